package store

import (
	"encoding/json"
	"slices"
	"testing"
	"time"
)

func TestScannerAuditsListsOneScannersCurrentAuditsInTheRangeWithTheirStudyDate(t *testing.T) {
	s, opts := newTestStore(t)
	mustPut(t, s, testInstance{SOP: "2.25.1001.1.1", Study: "2.25.1001", Payload: 16})
	mustPut(t, s, testInstance{SOP: "2.25.6001.1.1", Study: "2.25.6001", Payload: 16})
	t0 := time.Date(2025, 3, 4, 10, 0, 0, 0, time.UTC)
	audits := []AuditRecord{
		{AuditTime: t0, StudyInstanceUID: "2.25.1001", SeriesUID: "2.25.1001.1", Scanner: "quellvander-mr1", Measures: json.RawMessage(`{"tissue_adc_median":0.00079}`)},
		{AuditTime: t0.Add(time.Hour), StudyInstanceUID: "2.25.2001", SeriesUID: "2.25.2001.1", Scanner: "quellvander-mr2"},
		{AuditTime: t0.Add(2 * time.Hour), StudyInstanceUID: "2.25.3001", SeriesUID: "2.25.3001.1", Scanner: "quellvander-mr1", TestPatient: true},
		{AuditTime: t0.Add(48 * time.Hour), StudyInstanceUID: "2.25.4001", SeriesUID: "2.25.4001.1", Scanner: "quellvander-mr1"},
		// Re-audited later: only its newest audit is current.
		{AuditTime: t0.Add(-time.Hour), StudyInstanceUID: "2.25.5001", SeriesUID: "2.25.5001.1", Scanner: "quellvander-mr1"},
		{AuditTime: t0.Add(3 * time.Hour), StudyInstanceUID: "2.25.5001", SeriesUID: "2.25.5001.1", Scanner: "quellvander-mr1"},
		// The audit names the Station Name; the series was received
		// under the peer's label, which counts.
		{AuditTime: t0.Add(4 * time.Hour), StudyInstanceUID: "2.25.6001", SeriesUID: "2.25.6001.1", Scanner: "HV-MR1"},
	}
	for _, a := range audits {
		if err := s.SaveAudit(a); err != nil {
			t.Fatal(err)
		}
	}
	s = reopen(t, s, opts)

	got, err := s.ScannerAudits("quellvander-mr1", t0.Add(-2*time.Hour), t0.Add(24*time.Hour))
	if err != nil {
		t.Fatal(err)
	}
	var series []string
	for _, a := range got {
		series = append(series, a.SeriesUID)
	}
	want := []string{"2.25.1001.1", "2.25.3001.1", "2.25.5001.1", "2.25.6001.1"}
	if !slices.Equal(series, want) {
		t.Fatalf("series %v, want %v (other scanner, outside the range, and replaced audits left out; a series received under the label in)", series, want)
	}
	if other, err := s.ScannerAudits("HV-MR1", t0.Add(-2*time.Hour), t0.Add(24*time.Hour)); err != nil || len(other) != 0 {
		t.Errorf("the Station Name of a labelled series lists %v, %v; want nothing", other, err)
	}
	if got[0].StudyDate != "20250304" || string(got[0].Measures) != `{"tissue_adc_median":0.00079}` {
		t.Errorf("first audit %+v: want the stored study's date 20250304 and its measures", got[0])
	}
	if got[1].StudyDate != "" || !got[1].TestPatient {
		t.Errorf("audit of an unstored study %+v: want no study date and the test-patient mark kept", got[1])
	}
	if !got[2].AuditTime.Equal(t0.Add(3 * time.Hour)) {
		t.Errorf("re-audited series at %v, want its newest audit at %v", got[2].AuditTime, t0.Add(3*time.Hour))
	}
	t.Run("an empty or inverted range gives nothing", func(t *testing.T) {
		if got, err := s.ScannerAudits("quellvander-mr1", t0, t0); err != nil || len(got) != 0 {
			t.Errorf("ScannerAudits(t0, t0) = %v, %v", got, err)
		}
	})
}

func TestScannerLabelsListsTheLabelsOfStoredSeries(t *testing.T) {
	s, _ := newTestStore(t)
	if got, err := s.ScannerLabels(); err != nil || len(got) != 0 {
		t.Fatalf("empty store: %v, %v", got, err)
	}
	mustPut(t, s, testInstance{SOP: "2.25.1001.1.1", Study: "2.25.1001", Payload: 16})
	mustPut(t, s, testInstance{SOP: "2.25.1002.1.1", Study: "2.25.1002", Payload: 16})
	got, err := s.ScannerLabels()
	if err != nil || !slices.Equal(got, []string{"quellvander-mr1"}) {
		t.Errorf("ScannerLabels = %v, %v; want [quellvander-mr1] once", got, err)
	}
}

func TestAuditDaysJumpsFromDayToDayNewestFirst(t *testing.T) {
	loc := time.FixedZone("QOH", 10*3600)
	s, _ := newTestStore(t, func(o *Options) { o.Location = loc })
	if got, err := s.AuditDays(10); err != nil || len(got) != 0 {
		t.Fatalf("no audits: %v, %v", got, err)
	}
	times := []time.Time{
		time.Date(2025, 3, 1, 8, 0, 0, 0, loc),
		time.Date(2025, 3, 1, 9, 0, 0, 0, loc),
		time.Date(2025, 3, 3, 23, 30, 0, 0, loc),
		time.Date(2025, 3, 4, 0, 30, 0, 0, loc), // 14:30 UTC on the 3rd: the 4th in the node's zone
		time.Date(2025, 3, 4, 7, 0, 0, 0, loc),
	}
	for i, at := range times {
		if err := s.SaveAudit(AuditRecord{AuditTime: at, StudyInstanceUID: "2.25.9", SeriesUID: uid(9, i)}); err != nil {
			t.Fatal(err)
		}
	}
	got, err := s.AuditDays(10)
	if want := []string{"2025-03-04", "2025-03-03", "2025-03-01"}; err != nil || !slices.Equal(got, want) {
		t.Errorf("AuditDays(10) = %v, %v; want %v", got, err, want)
	}
	if got, _ := s.AuditDays(2); !slices.Equal(got, []string{"2025-03-04", "2025-03-03"}) {
		t.Errorf("AuditDays(2) = %v", got)
	}
}
