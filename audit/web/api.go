package web

// The node's JSON API: health checks for the service manager and load
// balancer, and the list of what is stored; and the JSON types of every
// answer, shared with the command-line clients (dwiaudit studies
// --server, dwiaudit selftest, dwiaudit demo). Every answer, errors
// included, is JSON.

import (
	"encoding/json"
	"errors"
	"fmt"
	"log/slog"
	"net/http"
	"time"

	"dwiaudit/store"
)

// studyLister is what the HTTP API needs of the store.
type studyLister interface {
	Studies(day string) ([]store.Study, error)
	Ping() error
}

// findingsLister is what GET /api/v1/findings needs of the store
// (*store.Store has it; a lister without it answers that endpoint with
// 404).
type findingsLister interface {
	Findings(day string) ([]store.AuditRecord, error)
}

// api serves the JSON endpoints of the store and the node's health.
type api struct {
	store    studyLister
	findings findingsLister // nil when the store keeps no audits
	loc      *time.Location // receive times are shown in the node's time zone
	dicomUp  func() bool    // whether the DICOM acceptor is serving
	log      *slog.Logger
}

func newAPI(st studyLister, loc *time.Location, dicomUp func() bool, log *slog.Logger) *api {
	a := &api{store: st, loc: loc, dicomUp: dicomUp, log: log}
	a.findings, _ = st.(findingsLister)
	return a
}

// methodNotAllowed answers a request whose path is a JSON endpoint's
// with a method other than GET or HEAD.
func methodNotAllowed(w http.ResponseWriter, r *http.Request) {
	w.Header().Set("Allow", "GET, HEAD")
	writeError(w, http.StatusMethodNotAllowed, "method "+r.Method+" not allowed; use GET")
}

// noSuchEndpoint answers every path the route table does not know.
func noSuchEndpoint(w http.ResponseWriter, r *http.Request) {
	writeError(w, http.StatusNotFound, fmt.Sprintf("no such endpoint %q", r.URL.Path))
}

// ErrorBody is the body of every error answer.
type ErrorBody struct {
	Error  string `json:"error"`
	Status int    `json:"status"`
}

func writeError(w http.ResponseWriter, status int, msg string) {
	writeJSON(w, status, ErrorBody{Error: msg, Status: status})
}

func writeJSON(w http.ResponseWriter, status int, v any) {
	w.Header().Set("Content-Type", "application/json; charset=utf-8")
	w.Header().Set("Cache-Control", "no-store")
	w.WriteHeader(status)
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	enc.Encode(v) // a failed write means the client went away
}

// HealthBody answers /healthz and /readyz.
type HealthBody struct {
	Status string            `json:"status"`           // "ok", "ready" or "not ready"
	Checks map[string]string `json:"checks,omitempty"` // check -> "ok" or the problem
}

// healthz says the process is alive and serving HTTP; nothing more, so
// that a service manager restarts only what is really stuck.
func (a *api) healthz(w http.ResponseWriter, r *http.Request) {
	writeJSON(w, http.StatusOK, HealthBody{Status: "ok"})
}

// readyz says whether the node can take studies: the index answers and
// the DICOM acceptor is listening.
func (a *api) readyz(w http.ResponseWriter, r *http.Request) {
	body := HealthBody{Status: "ready", Checks: map[string]string{"store": "ok", "dicom_listener": "ok"}}
	status := http.StatusOK
	if err := a.store.Ping(); err != nil {
		body.Checks["store"] = err.Error()
		body.Status, status = "not ready", http.StatusServiceUnavailable
	}
	if !a.dicomUp() {
		body.Checks["dicom_listener"] = "not listening"
		body.Status, status = "not ready", http.StatusServiceUnavailable
	}
	writeJSON(w, status, body)
}

// studies lists the stored studies, all of them or those with an
// instance received on ?day=YYYY-MM-DD (in the node's time zone).
func (a *api) studies(w http.ResponseWriter, r *http.Request) {
	day := r.URL.Query().Get("day")
	if day != "" {
		if _, err := time.Parse(dayLayout, day); err != nil {
			writeError(w, http.StatusBadRequest, fmt.Sprintf("day %q is not YYYY-MM-DD", day))
			return
		}
	}
	list, err := a.store.Studies(day)
	if errors.Is(err, store.ErrClosed) {
		writeError(w, http.StatusServiceUnavailable, "the node is stopping")
		return
	}
	if err != nil {
		a.log.Error("listing studies failed", "err", err)
		writeError(w, http.StatusInternalServerError, "listing studies failed: "+err.Error())
		return
	}
	writeJSON(w, http.StatusOK, StudiesBody(day, list, a.loc))
}

// StudiesResponse is the body of GET /api/v1/studies and the JSON output
// of `dwiaudit studies`. Patient names and IDs are left out: the list is
// for finding what arrived, and the API has no authentication.
type StudiesResponse struct {
	Day     string      `json:"day,omitempty"` // the ?day asked for, if any
	Studies []StudyJSON `json:"studies"`       // oldest last reception first
	// Totals over Studies.
	SeriesCount int   `json:"series_count"`
	Instances   int   `json:"instances"`
	Bytes       int64 `json:"bytes"`
}

// StudyJSON is one study with its series.
type StudyJSON struct {
	StudyInstanceUID string       `json:"study_instance_uid"`
	StudyDate        string       `json:"study_date,omitempty"` // DA as in the data set, YYYYMMDD
	StudyTime        string       `json:"study_time,omitempty"` // TM as in the data set
	AccessionNumber  string       `json:"accession_number,omitempty"`
	Instances        int          `json:"instances"`
	Bytes            int64        `json:"bytes"`
	FirstReceived    time.Time    `json:"first_received"`
	LastReceived     time.Time    `json:"last_received"`
	Series           []SeriesJSON `json:"series"`
}

// SeriesJSON is one series of a study.
type SeriesJSON struct {
	SeriesInstanceUID string    `json:"series_instance_uid"`
	SeriesNumber      int       `json:"series_number"`
	Modality          string    `json:"modality,omitempty"`
	SeriesDescription string    `json:"series_description,omitempty"`
	Scanner           string    `json:"scanner,omitempty"` // the peer's scanner label from the configuration
	CallingAETitle    string    `json:"calling_ae_title,omitempty"`
	StationName       string    `json:"station_name,omitempty"`
	Manufacturer      string    `json:"manufacturer,omitempty"`
	Instances         int       `json:"instances"`
	Bytes             int64     `json:"bytes"`
	FirstReceived     time.Time `json:"first_received"`
	LastReceived      time.Time `json:"last_received"`
}

// StudiesBody converts the store's studies, with receive times in loc:
// the API's answer, and `dwiaudit studies --data`'s.
func StudiesBody(day string, list []store.Study, loc *time.Location) StudiesResponse {
	out := StudiesResponse{Day: day, Studies: make([]StudyJSON, 0, len(list))}
	for _, st := range list {
		sj := StudyJSON{
			StudyInstanceUID: st.StudyInstanceUID,
			StudyDate:        st.StudyDate,
			StudyTime:        st.StudyTime,
			AccessionNumber:  st.AccessionNumber,
			FirstReceived:    st.FirstReceived.In(loc),
			LastReceived:     st.LastReceived.In(loc),
			Series:           make([]SeriesJSON, 0, len(st.Series)),
		}
		for _, se := range st.Series {
			sj.Series = append(sj.Series, SeriesJSON{
				SeriesInstanceUID: se.SeriesInstanceUID,
				SeriesNumber:      se.SeriesNumber,
				Modality:          se.Modality,
				SeriesDescription: se.SeriesDescription,
				Scanner:           se.ScannerLabel,
				CallingAETitle:    se.CallingAETitle,
				StationName:       se.StationName,
				Manufacturer:      se.Manufacturer,
				Instances:         se.Instances,
				Bytes:             se.Bytes,
				FirstReceived:     se.FirstReceived.In(loc),
				LastReceived:      se.LastReceived.In(loc),
			})
			sj.Instances += se.Instances
			sj.Bytes += se.Bytes
		}
		out.Studies = append(out.Studies, sj)
		out.SeriesCount += len(sj.Series)
		out.Instances += sj.Instances
		out.Bytes += sj.Bytes
	}
	return out
}

// FindingsResponse is the body of GET /api/v1/findings: the current
// audit of every series audited on the day (by audit time, in the
// node's time zone). A series audited again shows only its newest audit.
type FindingsResponse struct {
	Day    string      `json:"day"`
	Audits []AuditJSON `json:"audits"` // oldest audit first
}

// AuditJSON is one audit of one series. Findings are as the audit
// stored them (rules.Finding as JSON: rule, severity, UIDs, message,
// measured, expected); Measures are the series' computed measures
// (null when the series was not computed).
type AuditJSON struct {
	AuditTime       time.Time       `json:"audit_time"`
	StudyUID        string          `json:"study_uid"`
	SeriesUID       string          `json:"series_uid"`
	Scanner         string          `json:"scanner"`
	AccessionNumber string          `json:"accession_number"`
	Findings        json.RawMessage `json:"findings"`
	Measures        json.RawMessage `json:"measures"`
}

// findingsOfDay lists the audits of ?day=YYYY-MM-DD (today in the
// node's time zone when absent).
func (a *api) findingsOfDay(w http.ResponseWriter, r *http.Request) {
	if a.findings == nil {
		writeError(w, http.StatusNotFound, "this node keeps no audits")
		return
	}
	day := r.URL.Query().Get("day")
	if day == "" {
		day = time.Now().In(a.loc).Format(dayLayout)
	}
	if _, err := time.Parse(dayLayout, day); err != nil {
		writeError(w, http.StatusBadRequest, fmt.Sprintf("day %q is not YYYY-MM-DD", day))
		return
	}
	list, err := a.findings.Findings(day)
	if errors.Is(err, store.ErrClosed) {
		writeError(w, http.StatusServiceUnavailable, "the node is stopping")
		return
	}
	if err != nil {
		a.log.Error("listing findings failed", "err", err)
		writeError(w, http.StatusInternalServerError, "listing findings failed: "+err.Error())
		return
	}
	body := FindingsResponse{Day: day, Audits: make([]AuditJSON, 0, len(list))}
	for _, rec := range list {
		measures := rec.Measures
		if len(measures) == 0 {
			measures = json.RawMessage("null")
		}
		findings := rec.Findings
		if len(findings) == 0 {
			findings = json.RawMessage("[]")
		}
		body.Audits = append(body.Audits, AuditJSON{
			AuditTime:       rec.AuditTime.In(a.loc),
			StudyUID:        rec.StudyInstanceUID,
			SeriesUID:       rec.SeriesUID,
			Scanner:         rec.Scanner,
			AccessionNumber: rec.AccessionNumber,
			Findings:        findings,
			Measures:        measures,
		})
	}
	writeJSON(w, http.StatusOK, body)
}
