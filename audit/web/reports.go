package web

// The reports in the HTTP API:
//
//	GET /api/v1/reports/daily/{YYYY-MM-DD}.{csv,json,html}
//	GET /api/v1/reports/compliance?from=YYYY-MM-DD&to=YYYY-MM-DD[&format=json|csv|html]
//
// Errors are JSON like every other answer of the API (api.go).

import (
	"bytes"
	"errors"
	"fmt"
	"log/slog"
	"net/http"
	"strings"

	"dwiaudit/audit/report"
	"dwiaudit/store"
)

// reportsPrefix is where the report endpoints live.
const reportsPrefix = "/api/v1/reports/"

// reportsAPI serves the report endpoints from an archive of daily lists.
type reportsAPI struct {
	archive *report.Archive
	log     *slog.Logger
}

// noSuchReport answers a path under reportsPrefix that is no report.
func (r *reportsAPI) noSuchReport(w http.ResponseWriter, req *http.Request) {
	writeError(w, http.StatusNotFound, fmt.Sprintf("no such report %q; use %sdaily/YYYY-MM-DD.{csv,json,html} or %scompliance?from=&to=", req.URL.Path, reportsPrefix, reportsPrefix))
}

// daily answers GET /api/v1/reports/daily/{date}.{csv,json,html}.
func (r *reportsAPI) daily(w http.ResponseWriter, req *http.Request) {
	file := req.PathValue("file")
	day, ext, ok := strings.Cut(file, ".")
	if !ok || ext == "text" {
		writeError(w, http.StatusNotFound, fmt.Sprintf("%q: ask for YYYY-MM-DD.csv, .json or .html", file))
		return
	}
	f, err := report.ParseFormat(ext)
	if err != nil {
		writeError(w, http.StatusNotFound, fmt.Sprintf("%q: ask for YYYY-MM-DD.csv, .json or .html", file))
		return
	}
	l, err := r.archive.Daily(day)
	if r.failed(w, err, "building the daily list") {
		return
	}
	r.write(w, f, "dwiaudit-daily-"+day, func(b *bytes.Buffer) error { return l.Write(b, f) })
}

// compliance answers GET /api/v1/reports/compliance?from=&to=&format=.
func (r *reportsAPI) compliance(w http.ResponseWriter, req *http.Request) {
	q := req.URL.Query()
	from, to := q.Get("from"), q.Get("to")
	if from == "" || to == "" {
		writeError(w, http.StatusBadRequest, "give from=YYYY-MM-DD and to=YYYY-MM-DD (inclusive days)")
		return
	}
	name := q.Get("format")
	if name == "" {
		name = "json"
	}
	f, err := report.ParseFormat(name)
	if err != nil || f == report.FormatText {
		writeError(w, http.StatusBadRequest, fmt.Sprintf("format %q: use json, csv or html", name))
		return
	}
	c, err := r.archive.Builder.Compliance(from, to)
	if r.failed(w, err, "building the compliance report") {
		return
	}
	r.write(w, f, "dwiaudit-compliance-"+from+"-"+to, func(b *bytes.Buffer) error { return c.Write(b, f) })
}

// failed answers an error, if any: 400 for a bad day or range, 503 when
// the node is stopping, 500 otherwise (logged without the request).
func (r *reportsAPI) failed(w http.ResponseWriter, err error, what string) bool {
	switch {
	case err == nil:
		return false
	case errors.Is(err, report.ErrBadDay), errors.Is(err, report.ErrBadRange):
		writeError(w, http.StatusBadRequest, err.Error())
	case errors.Is(err, store.ErrClosed):
		writeError(w, http.StatusServiceUnavailable, "the node is stopping")
	default:
		r.log.Error(what+" failed", "err", err)
		writeError(w, http.StatusInternalServerError, what+" failed: "+err.Error())
	}
	return true
}

// write renders into a buffer first, so that a rendering error still
// gets a JSON error answer, then sends it. Reports hold patient data:
// nothing may cache them.
func (r *reportsAPI) write(w http.ResponseWriter, f report.Format, name string, render func(*bytes.Buffer) error) {
	var b bytes.Buffer
	if err := render(&b); err != nil {
		r.log.Error("rendering a report failed", "format", f.String(), "err", err)
		writeError(w, http.StatusInternalServerError, "rendering the report failed: "+err.Error())
		return
	}
	w.Header().Set("Content-Type", f.ContentType())
	w.Header().Set("Cache-Control", "no-store")
	if f == report.FormatCSV {
		w.Header().Set("Content-Disposition", fmt.Sprintf("attachment; filename=%q", name+".csv"))
	}
	w.WriteHeader(http.StatusOK)
	w.Write(b.Bytes()) // a failed write means the client went away
}
