package web

import (
	"encoding/json"
	"io"
	"log/slog"
	"net/http"
	"net/http/httptest"
	"os"
	"testing"
	"time"

	"dwiaudit/audit/header"
	"dwiaudit/audit/phantom"
	"dwiaudit/scp/part10"
	"dwiaudit/store"
	"dwiaudit/store/storetest"
)

// qoh is the node's time zone in the tests: an invented site ten hours
// east of UTC, so that day boundaries differ from UTC's.
var qoh = time.FixedZone("QOH", 10*3600)

// testNow is the clock of the pages in the tests.
var testNow = time.Date(2025, 3, 20, 15, 0, 0, 0, qoh)

// describe is the store's header reader, as the node's (cmd/dwiaudit
// describe.go).
func describe(path string) (store.Attributes, error) {
	id, err := header.ReadFile(path)
	if err != nil {
		return store.Attributes{}, err
	}
	return store.Attributes{
		StudyInstanceUID: id.StudyInstanceUID, SeriesInstanceUID: id.SeriesInstanceUID,
		StudyDate: id.StudyDate, StudyTime: id.StudyTime, AccessionNumber: id.AccessionNumber,
		PatientID: id.PatientID, PatientName: id.PatientName, Modality: id.Modality,
		SeriesDescription: id.SeriesDescription, StationName: id.StationName,
		Manufacturer: id.Manufacturer, SeriesNumber: id.SeriesNumber, InstanceNumber: id.InstanceNumber,
	}, nil
}

// newTestStore opens a real store in a temporary folder.
func newTestStore(t *testing.T) *store.Store {
	t.Helper()
	st, _ := storetest.Open(t, store.Options{Location: qoh, Describe: describe})
	return st
}

// putPhantom writes a small synthetic study and stores every file as a
// C-STORE from a peer with the scanner label would.
func putPhantom(t *testing.T, st *store.Store, o phantom.Options, label string) *phantom.Study {
	t.Helper()
	if o.Matrix == 0 {
		o.Matrix, o.Slices = 16, 2
	}
	o.PatientName = "TEST^SYNTHETIC"
	ph, err := phantom.Write(t.TempDir(), o)
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range ph.Files {
		meta, off, err := part10.ReadMetaFile(p)
		if err != nil {
			t.Fatal(err)
		}
		f, err := os.Open(p)
		if err != nil {
			t.Fatal(err)
		}
		if _, err := f.Seek(off, io.SeekStart); err != nil {
			t.Fatal(err)
		}
		_, err = st.Put(t.Context(), store.PutRequest{
			SOPClassUID: meta.MediaStorageSOPClassUID, SOPInstanceUID: meta.MediaStorageSOPInstanceUID,
			TransferSyntaxUID: meta.TransferSyntaxUID, CallingAETitle: "QOH_MR1", ScannerLabel: label,
		}, f)
		f.Close()
		if err != nil {
			t.Fatal(err)
		}
	}
	return ph
}

// dwiSeries is the diffusion series of a phantom study (number 2).
func dwiSeries(t *testing.T, ph *phantom.Study) string {
	t.Helper()
	for _, s := range ph.Series {
		if s.Number == 2 {
			return s.UID
		}
	}
	t.Fatalf("no series 2 in %+v", ph.Series)
	return ""
}

// saveAudit stores an audit with findings and measures given as Go
// values, encoded as the pipeline encodes them.
func saveAudit(t *testing.T, st *store.Store, rec store.AuditRecord, findings []map[string]any, measures map[string]any) {
	t.Helper()
	var err error
	if rec.Findings, err = json.Marshal(findings); err != nil {
		t.Fatal(err)
	}
	if findings == nil {
		rec.Findings = json.RawMessage("[]")
	}
	if measures != nil {
		if rec.Measures, err = json.Marshal(measures); err != nil {
			t.Fatal(err)
		}
	}
	if err := st.SaveAudit(rec); err != nil {
		t.Fatal(err)
	}
}

// newPages is the pages' handler over st behind the server's route
// table and middleware, as the node mounts it.
func newPages(t testing.TB, st Store, mod func(*Options)) http.Handler {
	t.Helper()
	opt := Options{Store: st, Location: qoh, Now: func() time.Time { return testNow }, Scanners: []string{"qoh-mr1-1.5t", "qoh-mr3-3t"}}
	if mod != nil {
		mod(&opt)
	}
	h, err := newPagesHandler(opt)
	if err != nil {
		t.Fatal(err)
	}
	s := &Server{pages: h, metrics: http.NotFoundHandler(), auth: &Auth{}, log: opt.Logger}
	if s.log == nil {
		s.log = slog.New(slog.DiscardHandler)
	}
	return s.Handler()
}

// getPage GETs path and returns the status and body.
func getPage(t *testing.T, h http.Handler, path string) (int, string) {
	t.Helper()
	rec := httptest.NewRecorder()
	h.ServeHTTP(rec, httptest.NewRequest("GET", path, nil))
	if ct := rec.Header().Get("Content-Type"); rec.Code != http.StatusNotFound && ct != "text/html; charset=utf-8" && ct != "text/css; charset=utf-8" {
		t.Errorf("GET %s: Content-Type %q", path, ct)
	}
	return rec.Code, rec.Body.String()
}

func ptr(v float64) *float64 { return &v }
