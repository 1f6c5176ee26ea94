package report_test

import (
	"bytes"
	"slices"
	"testing"
	"time"

	"dwiaudit/audit/report"
	"dwiaudit/rules"
	"dwiaudit/store/storetest"
)

func jsonOf(t *testing.T, l *report.DailyList) []byte {
	t.Helper()
	var buf bytes.Buffer
	if err := l.WriteJSON(&buf); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

func TestAFrozenDayReadsTheSameAfterMoreStudiesAndAReAudit(t *testing.T) {
	loc := quellvander(t)
	c := &clock{t: time.Date(2026, 12, 2, 7, 0, 0, 0, loc)} // after 06:00: 2026-12-01 is due
	s, _ := newStore(t, loc, c.Now)
	a := &report.Archive{Builder: &report.Builder{Source: s, Location: loc, Now: c.Now}, Lists: s, DailyAt: 6 * time.Hour}
	st1, st2 := newStudy(1), newStudy(2)
	put(t, s, st1, 1)
	put(t, s, st2, 1)
	saveAudits(t, s, audit(t, st1, 1, time.Date(2026, 12, 1, 14, 0, 0, 0, loc), "brain", "hv-mr1", false,
		finding("missing-b0", rules.SeverityError, seriesUID(st1.UID, 1), 2, []float64{1000}, []float64{0})))

	first, err := a.Daily("2026-12-01")
	if err != nil {
		t.Fatal(err)
	}
	if first.FrozenAt == nil || len(first.Rows) != 1 {
		t.Fatalf("the due day was not frozen with its row: frozen %v, %d rows", first.FrozenAt, len(first.Rows))
	}
	want := jsonOf(t, first)

	// A study audited that day arrives late, and the frozen study is
	// re-audited the next day without findings: the live list changes,
	// the frozen one must not.
	c.Set(time.Date(2026, 12, 2, 11, 0, 0, 0, loc))
	put(t, s, st2, 2)
	saveAudits(t, s,
		audit(t, st2, 2, time.Date(2026, 12, 1, 23, 59, 0, 0, loc), "brain", "hv-mr1", false,
			finding("low-snr", rules.SeverityWarning, seriesUID(st2.UID, 2), 2, 4.0, 8.0)),
		audit(t, st1, 1, time.Date(2026, 12, 2, 10, 0, 0, 0, loc), "brain", "hv-mr1", false))
	live, err := a.Builder.Daily("2026-12-01")
	if err != nil {
		t.Fatal(err)
	}
	if len(live.Rows) != 1 || live.Rows[0].Rule != "low-snr" {
		t.Fatalf("the live list did not change as the fixture meant: %+v", live.Rows)
	}
	again, err := a.Daily("2026-12-01")
	if err != nil {
		t.Fatal(err)
	}
	if got := jsonOf(t, again); !bytes.Equal(got, want) {
		t.Errorf("the frozen list changed:\n%s\nwant:\n%s", got, want)
	}
	if frozen, err := a.Freeze("2026-12-01"); err != nil || frozen {
		t.Errorf("Freeze of a kept day: frozen %v, err %v; want it left alone", frozen, err)
	}
}

func TestADayNotYetDueIsBuiltLiveAndNotKept(t *testing.T) {
	loc := quellvander(t)
	c := &clock{t: time.Date(2026, 12, 2, 5, 59, 0, 0, loc)}
	s, _ := newStore(t, loc, c.Now)
	a := &report.Archive{Builder: &report.Builder{Source: s, Location: loc, Now: c.Now}, Lists: s, DailyAt: 6 * time.Hour}
	for _, day := range []string{"2026-12-01", "2026-12-02", "2026-12-03"} {
		t.Run(day+" before 06:00 on 2026-12-02", func(t *testing.T) {
			l, err := a.Daily(day)
			if err != nil {
				t.Fatal(err)
			}
			if l.FrozenAt != nil {
				t.Errorf("frozen at %v", l.FrozenAt)
			}
			if _, found, err := s.DailyList(day); err != nil || found {
				t.Errorf("kept in the store: %v %v", found, err)
			}
		})
	}
}

func TestAKeptListIsStoredInFullAndShownAsConfigured(t *testing.T) {
	loc := quellvander(t)
	c := &clock{t: time.Date(2026, 12, 2, 7, 0, 0, 0, loc)}
	s, _ := newStore(t, loc, c.Now)
	st := newStudy(1)
	put(t, s, st, 1)
	saveAudits(t, s, audit(t, st, 1, time.Date(2026, 12, 1, 14, 0, 0, 0, loc), "brain", "hv-mr1", false,
		finding("missing-b0", rules.SeverityError, seriesUID(st.UID, 1), 2, []float64{1000}, []float64{0})))
	a := &report.Archive{Builder: &report.Builder{Source: s, Location: loc, Now: c.Now, PatientID: report.PatientIDHidden}, Lists: s, DailyAt: 6 * time.Hour}
	l, err := a.Daily("2026-12-01")
	if err != nil {
		t.Fatal(err)
	}
	if l.Rows[0].PatientID != "" || l.PatientID != report.PatientIDHidden {
		t.Errorf("shown %q (%v), want hidden", l.Rows[0].PatientID, l.PatientID)
	}
	raw, _, err := s.DailyList("2026-12-01")
	if err != nil || !bytes.Contains(raw, []byte(st.PatientID)) {
		t.Errorf("kept list lacks the full ID (err %v)", err)
	}
	a.Builder.PatientID = report.PatientIDMasked
	if l, err = a.Daily("2026-12-01"); err != nil || l.Rows[0].PatientID != "*******201" {
		t.Errorf("after changing the mode: %q, %v", l.Rows[0].PatientID, err)
	}
}

func TestAReadOnlyStoreShowsADueDayLiveWithoutKeepingIt(t *testing.T) {
	loc := quellvander(t)
	c := &clock{t: time.Date(2026, 12, 2, 7, 0, 0, 0, loc)}
	s, opts := newStore(t, loc, c.Now)
	st := newStudy(1)
	put(t, s, st, 1)
	saveAudits(t, s, audit(t, st, 1, time.Date(2026, 12, 1, 14, 0, 0, 0, loc), "brain", "hv-mr1", false,
		finding("missing-b0", rules.SeverityError, seriesUID(st.UID, 1), 2, []float64{1000}, []float64{0})))
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	opts.ReadOnly = true
	ro, _ := storetest.Open(t, opts)
	a := &report.Archive{Builder: &report.Builder{Source: ro, Location: loc, Now: c.Now}, Lists: ro, DailyAt: 6 * time.Hour}
	l, err := a.Daily("2026-12-01")
	if err != nil {
		t.Fatal(err)
	}
	if l.FrozenAt != nil || len(l.Rows) != 1 {
		t.Errorf("frozen %v, %d rows; want a live list of 1 row", l.FrozenAt, len(l.Rows))
	}
}

func TestCatchUpFreezesTheDaysTheNodeMissed(t *testing.T) {
	loc := quellvander(t)
	c := &clock{t: time.Date(2026, 12, 2, 9, 0, 0, 0, loc)}
	s, _ := newStore(t, loc, c.Now)
	a := &report.Archive{Builder: &report.Builder{Source: s, Location: loc, Now: c.Now}, Lists: s, DailyAt: 6 * time.Hour}
	for _, cc := range []struct {
		name, last string
		now        time.Time
		want       []string
	}{
		{"a node that never kept a list freezes only the due day", "", time.Date(2026, 11, 20, 9, 0, 0, 0, loc), []string{"2026-11-19"}},
		{"a node down for three days freezes each of them", "2026-11-28", time.Date(2026, 12, 2, 9, 0, 0, 0, loc), []string{"2026-11-29", "2026-11-30", "2026-12-01"}},
		{"before the freeze time the day before yesterday is the due one", "2026-12-01", time.Date(2026, 12, 3, 5, 0, 0, 0, loc), nil},
		{"a node down for months freezes the last MaxCatchUpDays", "2026-01-01", time.Date(2026, 12, 2, 9, 0, 0, 0, loc), nil},
	} {
		t.Run(cc.name, func(t *testing.T) {
			c.Set(cc.now)
			got, err := a.CatchUp(cc.last)
			if err != nil {
				t.Fatal(err)
			}
			if cc.last == "2026-01-01" {
				// 2026-11-01 .. 2026-12-01 (31 days) minus the four kept
				// above (11-19, 11-29, 11-30, 12-01).
				if len(got) != report.MaxCatchUpDays-4 || got[0] != "2026-11-01" {
					t.Errorf("froze %d days from %v", len(got), got[:1])
				}
				return
			}
			if !slices.Equal(got, cc.want) {
				t.Errorf("froze %v, want %v", got, cc.want)
			}
		})
	}
	if day, ok, err := s.LatestDailyList(); err != nil || !ok || day != "2026-12-01" {
		t.Errorf("LatestDailyList %q %v %v", day, ok, err)
	}
}

func TestTheFreezeTimeFollowsTheWallClock(t *testing.T) {
	loc := quellvander(t)
	for _, c := range []struct {
		name    string
		now     time.Time
		due     string
		nextAt  time.Time
		nextDay string
	}{
		{"just before 06:00", time.Date(2026, 12, 2, 5, 59, 59, 0, loc), "2026-11-30", time.Date(2026, 12, 2, 6, 0, 0, 0, loc), "2026-12-01"},
		{"at 06:00", time.Date(2026, 12, 2, 6, 0, 0, 0, loc), "2026-12-01", time.Date(2026, 12, 3, 6, 0, 0, 0, loc), "2026-12-02"},
		// Irish summer time starts 2026-03-29 at 01:00 UTC (EU rule, last
		// Sunday of March, from memory); 06:00 stays 06:00 local.
		{"on the morning clocks go forward", time.Date(2026, 3, 29, 6, 30, 0, 0, loc), "2026-03-28", time.Date(2026, 3, 30, 6, 0, 0, 0, loc), "2026-03-29"},
	} {
		t.Run(c.name, func(t *testing.T) {
			if got := report.DueDay(c.now, 6*time.Hour, loc); got != c.due {
				t.Errorf("DueDay %s, want %s", got, c.due)
			}
			at, day := report.NextFreeze(c.now, 6*time.Hour, loc)
			if !at.Equal(c.nextAt) || day != c.nextDay {
				t.Errorf("NextFreeze %v %s, want %v %s", at, day, c.nextAt, c.nextDay)
			}
		})
	}
}
