package web

import (
	"bytes"
	"embed"
	"errors"
	"html/template"
	"io/fs"
	"log/slog"
	"net/http"
	"time"

	"dwiaudit/audit/report"
	"dwiaudit/store"
)

// Store is what the pages read; *store.Store has it.
type Store interface {
	Study(uid string) (store.Study, error)
	SeriesAudits(seriesUID string) ([]store.AuditRecord, error)
	Findings(day string) ([]store.AuditRecord, error)
	AuditDays(n int) ([]string, error)
	ScannerLabels() ([]string, error)
	ScannerAudits(label string, from, to time.Time) ([]store.TrendAudit, error)
}

// Defaults of Options.
const (
	// DefaultTrendDays is how far back a scanner page looks: a quarter
	// shows seasonal drift and a phantom schedule of weekly or monthly
	// scans (common practice).
	DefaultTrendDays = 90
	// DefaultPhantomTolerance is the relative band drawn around a
	// phantom's expected ADC when its profile gives none: ±3.6% (QIBA
	// bias tolerance; from memory, not verified, docs/references.md#phantom-tolerance).
	DefaultPhantomTolerance = 0.036
	// maxTrendDays bounds ?days= on a scanner page: ten years of audits
	// is more than any plot can show.
	maxTrendDays = 3650
	// pastDaysListed is how many days with audits the daily list links.
	pastDaysListed = 14
)

// Options configure the pages.
type Options struct {
	Store    Store
	Location *time.Location   // the node's time zone: what "today" and a day are
	Now      func() time.Time // time.Now when nil
	Logger   *slog.Logger
	// Scanners are the labels of the configured peers, listed on
	// /scanners even before they sent anything.
	Scanners []string
	// PhantomTolerance gives a phantom profile's relative tolerance by
	// name; DefaultPhantomTolerance when nil or it answers 0.
	PhantomTolerance func(profile string) float64
	// TrendDays is the default span of a scanner page (DefaultTrendDays
	// when 0).
	TrendDays int
	// Daily gives the daily lists; when nil, a report.Builder over Store
	// builds every day's list live, patient IDs masked.
	Daily DailyLists
}

//go:embed templates/*.html assets/*
var files embed.FS

// pagesHandler serves the pages; the server's route table (routes) mounts
// them.
type pagesHandler struct {
	opt   Options
	pages map[string]*template.Template
	css   []byte
}

// newPagesHandler parses the embedded templates and returns the pages' handler.
func newPagesHandler(opt Options) (*pagesHandler, error) {
	if opt.Store == nil {
		return nil, errors.New("web: no store")
	}
	if opt.Location == nil {
		opt.Location = time.Local
	}
	if opt.Now == nil {
		opt.Now = time.Now
	}
	if opt.Logger == nil {
		opt.Logger = slog.New(slog.DiscardHandler)
	}
	if opt.Daily == nil {
		opt.Daily = &report.Builder{Source: opt.Store, Location: opt.Location, Now: opt.Now}
	}
	if opt.TrendDays <= 0 {
		opt.TrendDays = DefaultTrendDays
	}
	h := &pagesHandler{opt: opt, pages: map[string]*template.Template{}}
	funcs := template.FuncMap{"caution": func() string { return Caution }}
	for _, name := range []string{"day", "study", "scanners", "scanner", "error"} {
		t, err := template.New("layout.html").Funcs(funcs).ParseFS(files, "templates/layout.html", "templates/"+name+".html")
		if err != nil {
			return nil, err
		}
		h.pages[name] = t
	}
	css, err := fs.ReadFile(files, "assets/style.css")
	if err != nil {
		return nil, err
	}
	h.css = css
	return h, nil
}

// layout is what every page passes to the layout template.
type layout struct {
	Title   string
	Nav     string // "day", "scanners" or ""
	Today   string
	Printed string // when the page was made, node time
	Body    any
}

func (h *pagesHandler) render(w http.ResponseWriter, status int, page, title, nav string, body any) {
	now := h.opt.Now().In(h.opt.Location)
	var buf bytes.Buffer
	err := h.pages[page].Execute(&buf, layout{
		Title: title, Nav: nav, Today: now.Format(dayLayout),
		Printed: now.Format("2006-01-02 15:04 MST"), Body: body,
	})
	if err != nil {
		h.opt.Logger.Error("rendering a page failed", "page", page, "err", err)
		http.Error(w, "rendering the page failed", http.StatusInternalServerError)
		return
	}
	w.Header().Set("Content-Type", "text/html; charset=utf-8")
	w.Header().Set("Cache-Control", "no-store")
	// The security headers (Content-Security-Policy: nothing from
	// elsewhere, no script) are the server's (securityHeaders).
	w.WriteHeader(status)
	w.Write(buf.Bytes())
}

// errorPage is the body of an error page.
type errorPage struct {
	Status  int
	Message string
}

func (h *pagesHandler) fail(w http.ResponseWriter, status int, msg string) {
	h.render(w, status, "error", http.StatusText(status), "", errorPage{Status: status, Message: msg})
}

// storeFailed answers a store error: 503 while the node stops, 404 for
// something unknown, else 500 (logged without identifiers).
func (h *pagesHandler) storeFailed(w http.ResponseWriter, what string, err error) {
	switch {
	case errors.Is(err, store.ErrClosed):
		h.fail(w, http.StatusServiceUnavailable, "The node is stopping; try again in a moment.")
	case errors.Is(err, store.ErrNotFound):
		h.fail(w, http.StatusNotFound, "This node has no such "+what+".")
	default:
		h.opt.Logger.Error("reading the store for a page failed", "what", what, "err", err)
		h.fail(w, http.StatusInternalServerError, "Reading the "+what+" failed: "+err.Error())
	}
}

func (h *pagesHandler) style(w http.ResponseWriter, r *http.Request) {
	w.Header().Set("Content-Type", "text/css; charset=utf-8")
	w.Header().Set("Cache-Control", "private, max-age=300")
	w.Write(h.css)
}

// dayLayout is the form of a day in URLs and on pages.
const dayLayout = "2006-01-02"
