package main

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"io"
	"log/slog"
	"net/http"
	"net/http/httptest"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	"dwiaudit/audit/report"
	"dwiaudit/audit/web"
	"dwiaudit/config"
	"dwiaudit/rules"
	"dwiaudit/store"
	"dwiaudit/store/storetest"
)

// httpGet GETs url and returns the status, the Content-Type and the body.
func httpGet(t testing.TB, url string) (int, string, []byte) {
	t.Helper()
	res, err := http.Get(url)
	if err != nil {
		t.Fatal(err)
	}
	defer res.Body.Close()
	b, err := io.ReadAll(res.Body)
	if err != nil {
		t.Fatal(err)
	}
	return res.StatusCode, res.Header.Get("Content-Type"), b
}

// TestTheDailyListOfARealNodeShowsAMissingB0 sends a no-b0 phantom to a
// real `dwiaudit serve` with C-STORE, lets it settle for 1 s, and reads
// today's list over HTTP and with `dwiaudit report daily --server`.
func TestTheDailyListOfARealNodeShowsAMissingB0(t *testing.T) {
	src, st := noB0Study(t)
	data := t.TempDir()
	n := startNode(t, data, "--settle", "1s")
	if r := runCLI(t, "send", "--to", n.dicomAddr, "--called-ae", testAE, "--quiet", src); r.code != exitOK {
		t.Fatalf("send exited %d", r.code)
	}
	awaitFinding(t, n, st.Series[0].UID, rules.IDMissingB0, findingsWait)

	today := time.Now().Format(dayLayout) // the node runs on node.time_zone Local
	code, ctype, body := httpGet(t, n.httpURL+"/api/v1/reports/daily/"+today+".csv")
	if code != http.StatusOK || ctype != "text/csv; charset=utf-8" {
		t.Fatalf("GET .csv: %d %q\n%s", code, ctype, body)
	}
	recs, err := csv.NewReader(bytes.NewReader(body)).ReadAll()
	if err != nil {
		t.Fatalf("the CSV does not parse (RFC 4180, encoding/csv): %v\n%s", err, body)
	}
	col := map[string]int{}
	for i, h := range recs[0] {
		col[h] = i
	}
	var found bool
	for _, r := range recs[1:] {
		if r[col["rule"]] == rules.IDMissingB0 && r[col["study_uid"]] == st.StudyUID {
			found = true
			if r[col["severity"]] != "error" || !strings.Contains(r[col["link"]], "/studies/"+st.StudyUID+"#series-") {
				t.Errorf("row %v", r)
			}
			if id := r[col["patient_id"]]; id != "*********001" { // phantom.Options PatientID "QOH-SYN-0001", masked by default
				t.Errorf("patient ID %q, want it masked", id)
			}
		}
	}
	if !found {
		t.Fatalf("no missing-b0 row for the study in:\n%s", body)
	}

	for _, c := range []struct{ path, ctype string }{
		{"/api/v1/reports/daily/" + today + ".json", "application/json"},
		{"/api/v1/reports/daily/" + today + ".html", "text/html; charset=utf-8"},
		{"/api/v1/reports/compliance?from=" + today + "&to=" + today, "application/json"},
		{"/api/v1/reports/compliance?from=" + today + "&to=" + today + "&format=html", "text/html; charset=utf-8"},
		{"/api/v1/reports/compliance?from=" + today + "&to=" + today + "&format=csv", "text/csv; charset=utf-8"},
	} {
		t.Run("GET "+c.path, func(t *testing.T) {
			code, ctype, body := httpGet(t, n.httpURL+c.path)
			if code != http.StatusOK || ctype != c.ctype {
				t.Errorf("%d %q, want 200 %q", code, ctype, c.ctype)
			}
			if !strings.Contains(c.path, "csv") && !strings.Contains(string(body), report.Caution) {
				t.Errorf("no caution in:\n%s", body)
			}
		})
	}

	r := runCLI(t, "report", "daily", "--server", n.httpURL)
	if r.code != exitOK || !strings.Contains(r.stdout, rules.IDMissingB0) || !strings.Contains(r.stdout, report.Caution) {
		t.Errorf("report daily --server exited %d:\n%s", r.code, r.stdout)
	}
	r = runCLI(t, "report", "compliance", "--server", n.httpURL, "--from", today, "--to", today, "--format", "csv")
	if r.code != exitOK || !strings.Contains(r.stdout, rules.IDMissingB0) {
		t.Errorf("report compliance --server exited %d:\n%s", r.code, r.stdout)
	}
	r = runCLI(t, "report", "daily", "--data", data)
	if r.code != exitFailure || !strings.Contains(r.stderr, "--server") {
		t.Errorf("report --data on a held folder: exit %d, %q; want 1 and advice to use --server", r.code, r.stderr)
	}

	if code := n.stop(); code != exitOK {
		t.Fatalf("exit code %d after SIGTERM", code)
	}
	r = runCLI(t, "report", "daily", "--data", data, "--format", "json")
	if r.code != exitOK {
		t.Fatalf("report daily --data exited %d", r.code)
	}
	l, err := report.ParseDailyList([]byte(r.stdout))
	if err != nil || len(l.Rows) == 0 || l.Rows[0].Rule != rules.IDMissingB0 {
		t.Errorf("report daily --data: %v %+v", err, l)
	}
}

func TestTheReportEndpointsAnswerErrorsAsJSON(t *testing.T) {
	st := openTestStore(t, time.Now)
	srv := httptest.NewServer(testHTTPHandler(t, config.Default(), st, config.Default().Reports.Archive(st, time.UTC, time.Now)))
	defer srv.Close()
	for _, c := range []struct {
		name, path string
		status     int
	}{
		{"a day that is not a date", "/api/v1/reports/daily/2026-02-30.json", http.StatusBadRequest},
		{"an unknown extension", "/api/v1/reports/daily/2026-12-01.pdf", http.StatusNotFound},
		{"no extension", "/api/v1/reports/daily/2026-12-01", http.StatusNotFound},
		{"compliance without to", "/api/v1/reports/compliance?from=2026-12-01", http.StatusBadRequest},
		{"compliance reversed", "/api/v1/reports/compliance?from=2026-12-09&to=2026-12-01", http.StatusBadRequest},
		{"compliance as text", "/api/v1/reports/compliance?from=2026-12-01&to=2026-12-01&format=text", http.StatusBadRequest},
		{"an unknown report", "/api/v1/reports/weekly", http.StatusNotFound},
	} {
		t.Run(c.name, func(t *testing.T) {
			code, ctype, body := httpGet(t, srv.URL+c.path)
			var e web.ErrorBody
			if code != c.status || !strings.HasPrefix(ctype, "application/json") || json.Unmarshal(body, &e) != nil || e.Error == "" {
				t.Errorf("%d %q %s, want %d with a JSON error", code, ctype, body, c.status)
			}
		})
	}
	t.Run("the rest of the API still answers", func(t *testing.T) {
		if code, _, body := httpGet(t, srv.URL+"/healthz"); code != http.StatusOK {
			t.Errorf("/healthz %d %s", code, body)
		}
	})
}

// TestAFrozenDayServedOverHTTPIsByteIdentical: the list of a past day
// read over HTTP is the same bytes before and after a late audit and a
// re-audit of one of its studies.
func TestAFrozenDayServedOverHTTPIsByteIdentical(t *testing.T) {
	now := time.Date(2026, 12, 2, 8, 0, 0, 0, time.UTC)
	st := openTestStore(t, func() time.Time { return now })
	rec := func(series string, at time.Time, fs ...rules.Finding) store.AuditRecord {
		b, _ := json.Marshal(append([]rules.Finding{}, fs...))
		return store.AuditRecord{AuditTime: at, StudyInstanceUID: "2.25.77", SeriesUID: series, Scanner: "hv-mr1", Findings: b}
	}
	miss := rules.Finding{Rule: rules.IDMissingB0, Severity: rules.SeverityError, StudyUID: "2.25.77", SeriesUID: "2.25.77.1", Message: "no b0", Measured: []float64{1000}, Expected: []float64{0}}
	if err := st.SaveAudit(rec("2.25.77.1", time.Date(2026, 12, 1, 15, 0, 0, 0, time.UTC), miss)); err != nil {
		t.Fatal(err)
	}
	srv := httptest.NewServer(testHTTPHandler(t, config.Default(), st, config.Default().Reports.Archive(st, time.UTC, func() time.Time { return now })))
	defer srv.Close()
	var first [][]byte
	for _, ext := range []string{"json", "csv", "html"} {
		code, _, b := httpGet(t, srv.URL+"/api/v1/reports/daily/2026-12-01."+ext)
		if code != http.StatusOK || !bytes.Contains(b, []byte("missing-b0")) {
			t.Fatalf("%s: %d %s", ext, code, b)
		}
		first = append(first, b)
	}
	late := rules.Finding{Rule: rules.IDLowSNR, Severity: rules.SeverityWarning, StudyUID: "2.25.77", SeriesUID: "2.25.77.2", Message: "low", Measured: 2.0, Expected: 3.0}
	if err := st.SaveAudits([]store.AuditRecord{
		rec("2.25.77.2", time.Date(2026, 12, 1, 23, 0, 0, 0, time.UTC), late),
		rec("2.25.77.1", time.Date(2026, 12, 2, 7, 0, 0, 0, time.UTC)), // re-audited: no finding now
	}); err != nil {
		t.Fatal(err)
	}
	for i, ext := range []string{"json", "csv", "html"} {
		_, _, b := httpGet(t, srv.URL+"/api/v1/reports/daily/2026-12-01."+ext)
		if !bytes.Equal(b, first[i]) {
			t.Errorf("%s changed:\n%s\nwas:\n%s", ext, b, first[i])
		}
	}
	// The check can fail: today's list, not frozen, does change.
	code, _, b := httpGet(t, srv.URL+"/api/v1/reports/daily/2026-12-02.json")
	if code != http.StatusOK || bytes.Contains(b, []byte("missing-b0")) || !bytes.Contains(b, []byte(`"frozen_at": null`)) {
		t.Errorf("today: %d %s", code, b)
	}
}

func TestReportFlagsAreChecked(t *testing.T) {
	for _, c := range []struct {
		name   string
		args   []string
		stderr string
	}{
		{"no report named", []string{"report"}, "Usage: dwiaudit report"},
		{"an unknown report", []string{"report", "weekly"}, `unknown report "weekly"`},
		{"a bad date", []string{"report", "daily", "--date", "2026-12-32"}, `--date "2026-12-32" is not YYYY-MM-DD`},
		{"a bad format", []string{"report", "daily", "--format", "pdf"}, `--format "pdf"`},
		{"both sources", []string{"report", "daily", "--data", "x", "--server", "y"}, "not both"},
		{"compliance without dates", []string{"report", "compliance"}, `--from "" is not YYYY-MM-DD`},
		{"a reversed range", []string{"report", "compliance", "--from", "2026-12-09", "--to", "2026-12-01", "--data", "DATA"}, "from 2026-12-09 is after to 2026-12-01"},
		{"an unknown flag", []string{"report", "daily", "--day", "2026-12-01"}, "flag provided but not defined: -day"},
	} {
		t.Run(c.name, func(t *testing.T) {
			args := slices.Clone(c.args)
			for i, a := range args {
				if a == "DATA" {
					dir := t.TempDir()
					openTestStore(t, time.Now, dir).Close()
					args[i] = dir
				}
			}
			r := runCLI(t, args...)
			if r.code != exitUsage || !strings.Contains(r.stderr, c.stderr) {
				t.Errorf("exit %d, stderr %q; want 2 and %q", r.code, r.stderr, c.stderr)
			}
		})
	}
	t.Run("a folder with nothing stored exits 1", func(t *testing.T) {
		r := runCLI(t, "report", "daily", "--data", filepath.Join(t.TempDir(), "none"))
		if r.code != exitFailure || !strings.Contains(r.stderr, "nothing is stored") {
			t.Errorf("exit %d %q", r.code, r.stderr)
		}
	})
}

// openTestStore opens a writable store (real bbolt) in dir, or a temp
// folder, in UTC with the clock now.
func openTestStore(t testing.TB, now func() time.Time, dir ...string) *store.Store {
	t.Helper()
	opts := store.Options{Location: time.UTC, Now: now, Describe: describeInstance}
	if len(dir) > 0 {
		opts.Dir = dir[0]
	}
	st, _ := storetest.Open(t, opts)
	return st
}

func discardLog() *slog.Logger { return slog.New(slog.DiscardHandler) }

// testHTTPHandler is the node's HTTP handler over st as serve builds it,
// with the DICOM acceptor up, the reports from archive and no metrics.
func testHTTPHandler(t testing.TB, cfg config.Config, st *store.Store, archive *report.Archive) http.Handler {
	t.Helper()
	h, err := httpHandler(cfg, st, time.UTC, func() bool { return true }, http.NotFoundHandler(), archive, discardLog())
	if err != nil {
		t.Fatal(err)
	}
	return h
}
