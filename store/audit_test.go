package store

import (
	"encoding/json"
	"testing"
	"time"
)

func TestPendingSeriesSurviveReopenAndClearOnlyWhenNothingNewerArrived(t *testing.T) {
	s, opts := newTestStore(t)
	t0 := time.Date(2025, 3, 4, 9, 30, 0, 0, time.UTC)
	if err := s.MarkPending("1.2.3.1", "1.2.3", t0); err != nil {
		t.Fatal(err)
	}
	if err := s.MarkPending("1.2.3.1", "1.2.3", t0.Add(-time.Second)); err != nil {
		t.Fatal(err)
	}
	if err := s.MarkPending("1.2.3.2", "1.2.3", t0.Add(time.Second)); err != nil {
		t.Fatal(err)
	}
	s = reopen(t, s, opts)
	got, err := s.Pending()
	if err != nil || len(got) != 2 || got[0].SeriesInstanceUID != "1.2.3.1" || !got[0].LastInstance.Equal(t0) || got[1].StudyInstanceUID != "1.2.3" {
		t.Fatalf("Pending after reopen = %+v, %v; want 1.2.3.1 at %v (an older mark changes nothing), then 1.2.3.2", got, err, t0)
	}

	t.Run("an audit older than the last instance leaves the series pending", func(t *testing.T) {
		if err := s.ClearPending("1.2.3.2", t0); err != nil {
			t.Fatal(err)
		}
		if got, _ := s.Pending(); len(got) != 2 {
			t.Errorf("Pending = %+v, want both series still", got)
		}
	})
	t.Run("an audit after the last instance clears the series", func(t *testing.T) {
		if err := s.ClearPending("1.2.3.1", t0); err != nil {
			t.Fatal(err)
		}
		if got, _ := s.Pending(); len(got) != 1 || got[0].SeriesInstanceUID != "1.2.3.2" {
			t.Errorf("Pending = %+v, want only 1.2.3.2", got)
		}
	})
}

func TestANewAuditReplacesTheCurrentFindingsAndKeepsTheHistory(t *testing.T) {
	s, opts := newTestStore(t)
	day1 := time.Date(2025, 3, 4, 23, 59, 0, 0, time.UTC)
	first := AuditRecord{AuditTime: day1, StudyInstanceUID: "1.2.3", SeriesUID: "1.2.3.1", Scanner: "hgh-mr1", AccessionNumber: "ACC1",
		Findings: json.RawMessage(`[{"rule":"missing-b0"}]`), Measures: json.RawMessage(`{"b0_snr":null}`)}
	second := first
	second.AuditTime = day1.Add(2 * time.Minute) // the next day
	second.Findings = json.RawMessage(`[]`)
	other := AuditRecord{AuditTime: day1.Add(-time.Hour), StudyInstanceUID: "1.2.3", SeriesUID: "1.2.3.2"}
	for _, r := range []AuditRecord{first, other, second} {
		if err := s.SaveAudit(r); err != nil {
			t.Fatal(err)
		}
	}
	// An older audit saved late (a slow worker) does not replace a newer one.
	late := first
	late.AuditTime = day1.Add(time.Minute)
	if err := s.SaveAudit(late); err != nil {
		t.Fatal(err)
	}
	s = reopen(t, s, opts)

	d1, err := s.Findings("2025-03-04")
	if err != nil || len(d1) != 1 || d1[0].SeriesUID != "1.2.3.2" || string(d1[0].Findings) != "[]" {
		t.Errorf("Findings(2025-03-04) = %+v, %v; want only series 1.2.3.2 (1.2.3.1's audit of that day was replaced)", d1, err)
	}
	d2, err := s.Findings("2025-03-05")
	if err != nil || len(d2) != 1 || d2[0].SeriesUID != "1.2.3.1" || !d2[0].AuditTime.Equal(second.AuditTime) || d2[0].AccessionNumber != "ACC1" || d2[0].Scanner != "hgh-mr1" {
		t.Errorf("Findings(2025-03-05) = %+v, %v; want the second audit of 1.2.3.1", d2, err)
	}
	hist, err := s.SeriesAudits("1.2.3.1")
	if err != nil || len(hist) != 3 || string(hist[0].Findings) != `[{"rule":"missing-b0"}]` || !hist[2].AuditTime.Equal(second.AuditTime) {
		t.Errorf("SeriesAudits = %+v, %v; want three audits, oldest first", hist, err)
	}
	if _, err := s.Findings("2025-3-4"); err == nil {
		t.Error("Findings accepted a day not in YYYY-MM-DD")
	}
}
