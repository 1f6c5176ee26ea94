package store

import (
	"encoding/json"
	"os"
	"path/filepath"
	"testing"
	"time"
)

func TestPendingSeriesSurviveReopenAndClearOnlyWhenNothingNewerArrived(t *testing.T) {
	s, opts := newTestStore(t)
	t0 := time.Date(2025, 3, 4, 9, 30, 0, 0, time.UTC)
	if err := s.markPending("1.2.3.1", "1.2.3", t0); err != nil {
		t.Fatal(err)
	}
	if err := s.markPending("1.2.3.1", "1.2.3", t0.Add(-time.Second)); err != nil {
		t.Fatal(err)
	}
	if err := s.markPending("1.2.3.2", "1.2.3", t0.Add(time.Second)); err != nil {
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
	first := AuditRecord{AuditTime: day1, StudyInstanceUID: "1.2.3", SeriesUID: "1.2.3.1", Scanner: "qoh-mr1", AccessionNumber: "ACC1",
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
	if err != nil || len(d2) != 1 || d2[0].SeriesUID != "1.2.3.1" || !d2[0].AuditTime.Equal(second.AuditTime) || d2[0].AccessionNumber != "ACC1" || d2[0].Scanner != "qoh-mr1" {
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

func TestPutMarksItsSeriesPendingInTheSameCommit(t *testing.T) {
	clock := newTestClock(time.Date(2025, 3, 4, 9, 30, 0, 0, time.UTC))
	s, opts := newTestStore(t, func(o *Options) { o.Now = clock.Now })
	a := testInstance{SOP: uid(40, 1), Payload: 500}
	mustPut(t, s, a)
	in, err := s.Instance(a.SOP)
	if err != nil {
		t.Fatal(err)
	}
	pend, err := s.Pending()
	if err != nil || len(pend) != 1 || pend[0].SeriesInstanceUID != in.SeriesInstanceUID ||
		pend[0].StudyInstanceUID != in.StudyInstanceUID || !pend[0].LastInstance.Equal(in.ReceivedAt) {
		t.Fatalf("Pending after Put = %+v, %v; want the series at its instance's receive time %v", pend, err, in.ReceivedAt)
	}

	t.Run("an audit that saw an instance up to its receive time clears the series", func(t *testing.T) {
		if err := s.ClearPending(in.SeriesInstanceUID, in.ReceivedAt); err != nil {
			t.Fatal(err)
		}
		if pend, _ := s.Pending(); len(pend) != 0 {
			t.Errorf("Pending = %+v, want none", pend)
		}
	})
	t.Run("an identical duplicate changes nothing to audit", func(t *testing.T) {
		clock.Advance(time.Minute)
		if ref := mustPut(t, s, a); ref.Duplicate != DupIdentical {
			t.Fatalf("Duplicate = %v, want identical", ref.Duplicate)
		}
		if pend, _ := s.Pending(); len(pend) != 0 {
			t.Errorf("Pending = %+v after an identical duplicate, want none", pend)
		}
	})
	t.Run("an instance committed after those an audit saw keeps the series pending", func(t *testing.T) {
		clock.Advance(time.Minute)
		mustPut(t, s, testInstance{SOP: uid(40, 2), Payload: 500})
		if err := s.ClearPending(in.SeriesInstanceUID, in.ReceivedAt); err != nil {
			t.Fatal(err)
		}
		if pend, _ := s.Pending(); len(pend) != 1 {
			t.Errorf("Pending = %+v, want the series still pending", pend)
		}
	})
	t.Run("the mark survives a reopen", func(t *testing.T) {
		s = reopen(t, s, opts)
		if pend, _ := s.Pending(); len(pend) != 1 || pend[0].SeriesInstanceUID != in.SeriesInstanceUID {
			t.Errorf("Pending after reopen = %+v", pend)
		}
	})
}

func TestReconcileMarksTheSeriesOfAReindexedFilePending(t *testing.T) {
	s, opts := newTestStore(t, func(o *Options) { o.Describe = describeAny })
	ti := testInstance{SOP: uid(41, 1), Study: uid(41), Series: uid(41, 5), Payload: 800}
	abs := filepath.Join(opts.Dir, "instances", ti.Study, ti.Series, ti.SOP+".dcm")
	if err := os.MkdirAll(filepath.Dir(abs), 0o700); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(abs, handMadePart10(ti), 0o600); err != nil {
		t.Fatal(err)
	}
	s = reopen(t, s, opts)
	pend, err := s.Pending()
	if err != nil || len(pend) != 1 || pend[0].SeriesInstanceUID != ti.Series || pend[0].StudyInstanceUID != ti.Study {
		t.Errorf("Pending = %+v, %v; want series %s of a file indexed at start, never audited", pend, err, ti.Series)
	}
}
