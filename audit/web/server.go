package web

// The node's HTTP listener: one route table (routes) and the middleware
// every request passes through (Handler).

import (
	"errors"
	"log/slog"
	"net/http"
	"time"

	"dwiaudit/audit"
	"dwiaudit/audit/report"
	"dwiaudit/store"
)

// ServerOptions are what the node's HTTP listener serves.
type ServerOptions struct {
	// Store is the node's store: the study list, the audits, the files
	// behind the previews.
	Store *store.Store
	// Location is the node's time zone: receive days and times.
	Location *time.Location
	// Logger logs the failures of the JSON endpoints and, at debug
	// level, one line a request (method, route pattern, status, bytes,
	// duration; never the path, which may hold UIDs).
	Logger *slog.Logger
	// DICOMUp reports whether the DICOM acceptor is serving (/readyz).
	DICOMUp func() bool
	// Pages configure the pages; their Store, Location and Logger
	// default to the server's.
	Pages Options
	// Reports is the archive of daily lists the report endpoints serve.
	Reports *report.Archive
	// PreviewEngine computes the studies behind the previews: an engine
	// of the previews' own, which they set to keep the computed studies.
	PreviewEngine *audit.Engine
	// Metrics serves /metrics (the Prometheus exposition).
	Metrics http.Handler
	// Auth guards every path but its Open ones; nil lets everything
	// through.
	Auth *Auth
}

// Server is the node's HTTP listener: the pages for people, the JSON
// API, the reports, the previews and the metrics, behind the access
// control.
type Server struct {
	api      *api
	reports  *reportsAPI
	previews *previews
	pages    *pagesHandler
	metrics  http.Handler
	auth     *Auth
	log      *slog.Logger
}

// NewServer builds the listener's parts from opt.
func NewServer(opt ServerOptions) (*Server, error) {
	if opt.Store == nil || opt.Reports == nil || opt.PreviewEngine == nil || opt.Metrics == nil {
		return nil, errors.New("web: the server needs a store, a report archive, a preview engine and metrics")
	}
	if opt.Location == nil {
		opt.Location = time.Local
	}
	if opt.Logger == nil {
		opt.Logger = slog.New(slog.DiscardHandler)
	}
	if opt.DICOMUp == nil {
		opt.DICOMUp = func() bool { return true }
	}
	po := opt.Pages
	if po.Store == nil {
		po.Store = opt.Store
	}
	if po.Location == nil {
		po.Location = opt.Location
	}
	if po.Logger == nil {
		po.Logger = opt.Logger
	}
	pages, err := newPagesHandler(po)
	if err != nil {
		return nil, err
	}
	prev, err := newPreviews(opt.Store, opt.PreviewEngine, opt.Logger)
	if err != nil {
		return nil, err
	}
	auth := opt.Auth
	if auth == nil {
		auth = &Auth{}
	}
	return &Server{
		api:      newAPI(opt.Store, opt.Location, opt.DICOMUp, opt.Logger),
		reports:  &reportsAPI{archive: opt.Reports, log: opt.Logger},
		previews: prev,
		pages:    pages,
		metrics:  opt.Metrics,
		auth:     auth,
		log:      opt.Logger,
	}, nil
}

// routes is the route table: every path the listener answers, with its
// method and handler. A JSON endpoint (get) answers GET and HEAD, and
// any other method with a JSON 405; a path no route names gets a JSON
// 404, pages' paths included.
func (s *Server) routes() *http.ServeMux {
	mux := http.NewServeMux()
	get := func(path string, h http.HandlerFunc) {
		mux.HandleFunc("GET "+path, h) // GET patterns match HEAD too
		mux.HandleFunc(path, methodNotAllowed)
	}

	// Health checks, open without credentials (Auth.Open).
	get("/healthz", s.api.healthz)
	get("/readyz", s.api.readyz)

	// The JSON API (api.go, preview.go, reports.go).
	get("/api/v1/studies", s.api.studies)
	get("/api/v1/findings", s.api.findingsOfDay)
	get("/api/v1/series/{uid}/preview.png", s.previews.serve)
	get(reportsPrefix+"daily/{file}", s.reports.daily)
	get(reportsPrefix+"compliance", s.reports.compliance)
	mux.HandleFunc(reportsPrefix, s.reports.noSuchReport)

	// The Prometheus exposition, any method as promhttp serves it.
	mux.Handle("/metrics", s.metrics)

	// The pages for people (daily.go, study.go, scanner.go).
	mux.HandleFunc("GET /{$}", s.pages.today)
	mux.HandleFunc("GET /days/{day}", s.pages.day)
	mux.HandleFunc("GET /studies/{uid}", s.pages.study)
	mux.HandleFunc("GET /scanners", s.pages.scanners)
	mux.HandleFunc("GET /scanners/{label}", s.pages.scanner)
	mux.HandleFunc("GET /assets/style.css", s.pages.style)

	mux.HandleFunc("/", noSuchEndpoint)
	return mux
}

// Handler is the listener's handler: the route table behind the
// middleware, applied here and nowhere else, outermost first: the
// access log, the security headers, the access control.
func (s *Server) Handler() http.Handler {
	return s.accessLog(securityHeaders(s.auth.Wrap(s.routes())))
}

// securityHeaders sets the headers every answer carries: nothing is
// loaded from elsewhere, no script runs, no page is framed, no content
// type is guessed, no address leaks to another site.
func securityHeaders(h http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		hd := w.Header()
		hd.Set("Content-Security-Policy", "default-src 'none'; img-src 'self'; style-src 'self'; form-action 'self'; frame-ancestors 'none'; base-uri 'none'")
		hd.Set("X-Content-Type-Options", "nosniff")
		hd.Set("Referrer-Policy", "no-referrer")
		h.ServeHTTP(w, r)
	})
}

// accessLog logs one line a request at debug level: the route pattern
// (so no UID or other value from the path), the status, the bytes and
// the time taken.
func (s *Server) accessLog(h http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		if !s.log.Enabled(r.Context(), slog.LevelDebug) {
			h.ServeHTTP(w, r)
			return
		}
		start := time.Now()
		rec := &statusRecorder{ResponseWriter: w, status: http.StatusOK}
		h.ServeHTTP(rec, r)
		route := r.Pattern
		if route == "" {
			route = "(unrouted)" // refused before routing, e.g. a 401
		}
		s.log.Debug("http request", "method", r.Method, "route", route, "status", rec.status,
			"bytes", rec.bytes, "took", time.Since(start).Round(time.Microsecond))
	})
}

// statusRecorder notes the status and size of an answer for the access
// log.
type statusRecorder struct {
	http.ResponseWriter
	status int
	bytes  int64
}

func (w *statusRecorder) WriteHeader(code int) {
	w.status = code
	w.ResponseWriter.WriteHeader(code)
}

func (w *statusRecorder) Write(b []byte) (int, error) {
	n, err := w.ResponseWriter.Write(b)
	w.bytes += int64(n)
	return n, err
}

// Unwrap lets http.ResponseController reach the connection's writer.
func (w *statusRecorder) Unwrap() http.ResponseWriter { return w.ResponseWriter }
