package web

import (
	"encoding/json"
	"log/slog"
	"net/http"
	"net/http/httptest"
	"strings"
	"testing"
	"time"

	"dwiaudit/store"
)

// fakeLister is a studyLister with canned answers.
type fakeLister struct {
	studies []store.Study
	pingErr error
	gotDay  string
}

func (f *fakeLister) Studies(day string) ([]store.Study, error) {
	f.gotDay = day
	return f.studies, nil
}

func (f *fakeLister) Ping() error { return f.pingErr }

func get(t *testing.T, h http.Handler, method, target string) *httptest.ResponseRecorder {
	t.Helper()
	rec := httptest.NewRecorder()
	h.ServeHTTP(rec, httptest.NewRequest(method, target, nil))
	if ct := rec.Header().Get("Content-Type"); !strings.HasPrefix(ct, "application/json") {
		t.Errorf("%s %s: Content-Type %q, want JSON", method, target, ct)
	}
	return rec
}

func TestAPIAnswersEveryRequestInJSON(t *testing.T) {
	paris, err := time.LoadLocation("Europe/Paris")
	if err != nil {
		t.Fatal(err)
	}
	received := time.Date(2025, 3, 14, 8, 31, 0, 0, time.UTC)
	f := &fakeLister{studies: []store.Study{{
		StudyInstanceUID: "2.25.1", StudyDate: "20250314", AccessionNumber: "SYNACC0001", PatientID: "SYN0001", PatientName: "TEST^SYNTHETIC",
		FirstReceived: received, LastReceived: received,
		Series: []store.Series{
			{SeriesInstanceUID: "2.25.2", SeriesNumber: 1, ScannerLabel: "qoh-mr1", Instances: 16, Bytes: 1600, FirstReceived: received, LastReceived: received},
			{SeriesInstanceUID: "2.25.3", SeriesNumber: 2, ScannerLabel: "qoh-mr1", Instances: 4, Bytes: 400, FirstReceived: received, LastReceived: received},
		},
	}}}
	up := true
	s := &Server{api: newAPI(f, paris, func() bool { return up }, slog.New(slog.DiscardHandler)),
		metrics: http.NotFoundHandler(), auth: &Auth{}, log: slog.New(slog.DiscardHandler)}
	h := s.Handler()

	t.Run("healthz says ok", func(t *testing.T) {
		if rec := get(t, h, "GET", "/healthz"); rec.Code != http.StatusOK {
			t.Errorf("status %d", rec.Code)
		}
	})
	t.Run("readyz is ready with the store and listener up", func(t *testing.T) {
		if rec := get(t, h, "GET", "/readyz"); rec.Code != http.StatusOK {
			t.Errorf("status %d: %s", rec.Code, rec.Body)
		}
	})
	t.Run("readyz is not ready without the DICOM listener", func(t *testing.T) {
		up = false
		defer func() { up = true }()
		rec := get(t, h, "GET", "/readyz")
		if rec.Code != http.StatusServiceUnavailable || !strings.Contains(rec.Body.String(), `"dicom_listener": "not listening"`) {
			t.Errorf("status %d: %s", rec.Code, rec.Body)
		}
	})
	t.Run("readyz is not ready when the store fails", func(t *testing.T) {
		f.pingErr = store.ErrClosed
		defer func() { f.pingErr = nil }()
		if rec := get(t, h, "GET", "/readyz"); rec.Code != http.StatusServiceUnavailable {
			t.Errorf("status %d: %s", rec.Code, rec.Body)
		}
	})
	t.Run("studies lists series, counts and times in the node's zone, without patient identifiers", func(t *testing.T) {
		rec := get(t, h, "GET", "/api/v1/studies?day=2025-03-14")
		if rec.Code != http.StatusOK {
			t.Fatalf("status %d: %s", rec.Code, rec.Body)
		}
		if f.gotDay != "2025-03-14" {
			t.Errorf("store asked for day %q", f.gotDay)
		}
		var got StudiesResponse
		if err := json.Unmarshal(rec.Body.Bytes(), &got); err != nil {
			t.Fatal(err)
		}
		if got.Day != "2025-03-14" || len(got.Studies) != 1 || got.Instances != 20 || got.SeriesCount != 2 || got.Bytes != 2000 {
			t.Errorf("got %+v", got)
		}
		st := got.Studies[0]
		if st.Instances != 20 || len(st.Series) != 2 || st.Series[0].Scanner != "qoh-mr1" || st.Series[1].Instances != 4 {
			t.Errorf("study %+v", st)
		}
		// 08:31 UTC is 09:31 in Paris in March (CET, UTC+1; IANA tz database).
		if !strings.Contains(rec.Body.String(), `"first_received": "2025-03-14T09:31:00+01:00"`) {
			t.Errorf("receive time not in the node's zone: %s", rec.Body)
		}
		for _, id := range []string{"SYN0001", "TEST^SYNTHETIC"} {
			if strings.Contains(rec.Body.String(), id) {
				t.Errorf("the answer holds patient identifier %q", id)
			}
		}
	})
	t.Run("a day that is not YYYY-MM-DD is a 400 with a JSON error", func(t *testing.T) {
		rec := get(t, h, "GET", "/api/v1/studies?day=14.03.2025")
		var e ErrorBody
		if rec.Code != http.StatusBadRequest || json.Unmarshal(rec.Body.Bytes(), &e) != nil || e.Status != 400 || e.Error == "" {
			t.Errorf("status %d: %s", rec.Code, rec.Body)
		}
	})
	t.Run("an unknown path is a 404 with a JSON error", func(t *testing.T) {
		if rec := get(t, h, "GET", "/api/v2/everything"); rec.Code != http.StatusNotFound {
			t.Errorf("status %d", rec.Code)
		}
	})
	t.Run("a POST is a 405 naming the allowed methods", func(t *testing.T) {
		rec := get(t, h, "POST", "/api/v1/studies")
		if rec.Code != http.StatusMethodNotAllowed || rec.Header().Get("Allow") != "GET, HEAD" {
			t.Errorf("status %d, Allow %q", rec.Code, rec.Header().Get("Allow"))
		}
	})
}

func TestEveryAnswerPassesTheMiddleware(t *testing.T) {
	var logged strings.Builder
	log := slog.New(slog.NewTextHandler(&logged, &slog.HandlerOptions{Level: slog.LevelDebug}))
	s := &Server{api: newAPI(&fakeLister{}, time.UTC, func() bool { return true }, log),
		metrics: http.NotFoundHandler(), auth: &Auth{Token: "qoh-test-token-0123456789abcdef", Open: []string{"/healthz"}}, log: log}
	h := s.Handler()

	rec := get(t, h, "GET", "/healthz")
	if rec.Code != http.StatusOK {
		t.Fatalf("/healthz %d", rec.Code)
	}
	for _, hd := range []string{"Content-Security-Policy", "X-Content-Type-Options", "Referrer-Policy"} {
		if rec.Header().Get(hd) == "" {
			t.Errorf("/healthz lacks %s", hd)
		}
	}
	// A refused request still gets the security headers and a log line.
	rec = get(t, h, "GET", "/api/v1/series/2.25.99/preview.png")
	if rec.Code != http.StatusUnauthorized || rec.Header().Get("X-Content-Type-Options") != "nosniff" {
		t.Errorf("without the token: %d, headers %v", rec.Code, rec.Header())
	}
	out := logged.String()
	if !strings.Contains(out, `route="GET /healthz" status=200`) || !strings.Contains(out, "route=(unrouted) status=401") {
		t.Errorf("access log:\n%s", out)
	}
	if strings.Contains(out, "2.25.99") {
		t.Errorf("the access log holds a UID from the path:\n%s", out)
	}
}
