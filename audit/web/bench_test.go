package web

import (
	"encoding/json"
	"fmt"
	"net/http"
	"net/http/httptest"
	"testing"
	"time"

	"dwiaudit/store"
	"dwiaudit/store/storetest"
)

// BenchmarkScannerPage renders a scanner page over 90 days holding 2,700
// audited series of that scanner (30 a day, a busy department), among
// 5,400 of two scanners in a real bbolt store.
func BenchmarkScannerPage(b *testing.B) {
	st, _ := storetest.Open(b, store.Options{Location: qoh, Describe: describe})
	measures, _ := json.Marshal(map[string]any{"series_number": 2, "series_description": "DWI", "protocol": "brain",
		"bvalues": []float64{0, 1000}, "tissue_adc_median": 0.00079, "csf_adc": 0.003, "b0_snr": 40.0})
	var recs []store.AuditRecord
	for d := range 90 {
		for i := range 60 {
			at := testNow.AddDate(0, 0, -d).Add(-time.Duration(i) * time.Minute)
			label := "qoh-mr1-1.5t"
			if i%2 == 1 {
				label = "qoh-mr2-3t"
			}
			recs = append(recs, store.AuditRecord{AuditTime: at, StudyInstanceUID: fmt.Sprintf("2.25.%d.%d", d, i),
				SeriesUID: fmt.Sprintf("2.25.%d.%d.2", d, i), Scanner: label, Findings: json.RawMessage("[]"), Measures: measures})
		}
	}
	if err := st.SaveAudits(recs); err != nil {
		b.Fatal(err)
	}
	h := newPages(b, st, nil)
	b.ResetTimer()
	for b.Loop() {
		rec := httptest.NewRecorder()
		h.ServeHTTP(rec, httptest.NewRequest("GET", "/scanners/qoh-mr1-1.5t", nil))
		if rec.Code != http.StatusOK {
			b.Fatalf("status %d", rec.Code)
		}
	}
}
