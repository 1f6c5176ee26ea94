package store

import (
	"encoding/json"
	"errors"
	"testing"
	"time"
)

func TestADailyListIsKeptOnceAndSurvivesReopen(t *testing.T) {
	s, opts := newTestStore(t)
	if day, ok, err := s.LatestDailyList(); ok || err != nil {
		t.Fatalf("a fresh store has a kept list %q (%v)", day, err)
	}
	for _, day := range []string{"2025-03-03", "2025-03-01"} {
		if err := s.SaveDailyList(day, []byte(`{"day":"`+day+`"}`)); err != nil {
			t.Fatal(err)
		}
	}
	if err := s.SaveDailyList("2025-03-03", []byte(`{"replaced":true}`)); !errors.Is(err, ErrDailyListExists) {
		t.Errorf("saving a kept day again: %v, want ErrDailyListExists", err)
	}
	s = reopen(t, s, opts)
	for _, c := range []struct {
		day   string
		want  string
		found bool
	}{
		{"2025-03-03", `{"day":"2025-03-03"}`, true},
		{"2025-03-01", `{"day":"2025-03-01"}`, true},
		{"2025-03-02", "", false},
	} {
		t.Run("day "+c.day, func(t *testing.T) {
			got, found, err := s.DailyList(c.day)
			if err != nil || found != c.found || string(got) != c.want {
				t.Errorf("DailyList = %q %v %v, want %q %v", got, found, err, c.want, c.found)
			}
		})
	}
	if day, ok, err := s.LatestDailyList(); !ok || err != nil || day != "2025-03-03" {
		t.Errorf("LatestDailyList = %q %v %v, want 2025-03-03", day, ok, err)
	}
	for _, bad := range []string{"", "2025-3-3", "2025-02-30", "../x"} {
		if err := s.SaveDailyList(bad, []byte("{}")); err == nil {
			t.Errorf("SaveDailyList(%q) accepted", bad)
		}
	}
}

func TestAReadOnlyStoreKeepsNoDailyList(t *testing.T) {
	s, opts := newTestStore(t)
	if err := s.SaveDailyList("2025-03-03", []byte(`{}`)); err != nil {
		t.Fatal(err)
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	opts.ReadOnly = true
	ro, err := Open(opts)
	if err != nil {
		t.Fatal(err)
	}
	defer ro.Close()
	if err := ro.SaveDailyList("2025-03-04", []byte(`{}`)); !errors.Is(err, ErrReadOnly) {
		t.Errorf("SaveDailyList on a read-only store: %v, want ErrReadOnly", err)
	}
	if got, ok, err := ro.DailyList("2025-03-03"); !ok || err != nil || string(got) != "{}" {
		t.Errorf("DailyList read-only = %q %v %v", got, ok, err)
	}
}

func TestSaveAuditsIsOneTransactionWithSaveAuditsRules(t *testing.T) {
	s, _ := newTestStore(t)
	t0 := time.Date(2025, 3, 4, 10, 0, 0, 0, time.UTC)
	rec := func(series string, at time.Time, findings string) AuditRecord {
		return AuditRecord{AuditTime: at, StudyInstanceUID: "1.2.3", SeriesUID: series, Findings: json.RawMessage(findings)}
	}
	err := s.SaveAudits([]AuditRecord{rec("1.2.3.1", t0, `[]`), rec("", t0, `[]`)})
	if err == nil {
		t.Fatal("a batch with an empty series UID was accepted")
	}
	if got, _ := s.Findings("2025-03-04"); len(got) != 0 {
		t.Fatalf("a refused batch saved %d audits; want none", len(got))
	}
	// The newer of two audits of a series stands, whatever the order.
	if err := s.SaveAudits([]AuditRecord{
		rec("1.2.3.1", t0.Add(time.Hour), `[{"rule":"low-snr"}]`),
		rec("1.2.3.1", t0, `[{"rule":"missing-b0"}]`),
		rec("1.2.3.2", t0, `[]`),
	}); err != nil {
		t.Fatal(err)
	}
	got, err := s.Findings("2025-03-04")
	if err != nil || len(got) != 2 || got[0].SeriesUID != "1.2.3.2" || string(got[1].Findings) != `[{"rule":"low-snr"}]` {
		t.Errorf("Findings = %+v, %v; want 1.2.3.2, then 1.2.3.1's newer audit", got, err)
	}
	if h, _ := s.SeriesAudits("1.2.3.1"); len(h) != 2 {
		t.Errorf("history of 1.2.3.1: %d audits, want 2", len(h))
	}
}
