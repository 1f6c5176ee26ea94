package report_test

import (
	"context"
	"encoding/json"
	"log/slog"
	"sync"
	"testing"
	"time"

	"dwiaudit/audit/report"
	"dwiaudit/rules"
	"dwiaudit/store"
)

// fakeTimer is the scheduler's injected clock: the test sets the time
// and fires the timer by hand.
type fakeTimer struct {
	mu    sync.Mutex
	now   time.Time
	waits []time.Duration
	tick  chan time.Time
	asked chan struct{} // one value per After call, so the test knows the scheduler sleeps
}

func (f *fakeTimer) Now() time.Time  { f.mu.Lock(); defer f.mu.Unlock(); return f.now }
func (f *fakeTimer) Set(t time.Time) { f.mu.Lock(); f.now = t; f.mu.Unlock() }
func (f *fakeTimer) After(d time.Duration) <-chan time.Time {
	f.mu.Lock()
	f.waits = append(f.waits, d)
	f.mu.Unlock()
	f.asked <- struct{}{}
	return f.tick
}

// expectFrozen waits for the scheduler to report day frozen.
func expectFrozen(t *testing.T, frozen <-chan string, want ...string) {
	t.Helper()
	for _, w := range want {
		select {
		case got := <-frozen:
			if got != w {
				t.Fatalf("froze %s, want %s", got, w)
			}
		case <-time.After(10 * time.Second): // a bound on a hang, not a timing
			t.Fatalf("nothing frozen; want %s", w)
		}
	}
}

func TestTheSchedulerCatchesUpThenFreezesAtDailyAt(t *testing.T) {
	clk := &fakeTimer{now: time.Date(2026, 12, 2, 5, 0, 0, 0, time.UTC), tick: make(chan time.Time), asked: make(chan struct{}, 16)}
	st, _ := newStore(t, time.UTC, clk.Now)
	f, _ := json.Marshal([]rules.Finding{{Rule: rules.IDMissingB0, Severity: rules.SeverityError, Message: "no b0"}})
	for _, at := range []time.Time{time.Date(2026, 11, 30, 12, 0, 0, 0, time.UTC), time.Date(2026, 12, 1, 12, 0, 0, 0, time.UTC)} {
		if err := st.SaveAudit(store.AuditRecord{AuditTime: at, StudyInstanceUID: "2.25.5", SeriesUID: "2.25.5." + at.Format("02"), Findings: f}); err != nil {
			t.Fatal(err)
		}
	}
	frozen := make(chan string)
	run := func(ctx context.Context) *sync.WaitGroup {
		archive := &report.Archive{Builder: &report.Builder{Source: st, Location: time.UTC, Now: clk.Now}, Lists: st, DailyAt: 6 * time.Hour}
		d := &report.Freezer{Archive: archive, Lists: st, Location: time.UTC,
			Now: clk.Now, After: clk.After, Logger: slog.New(slog.DiscardHandler), Frozen: frozen}
		var wg sync.WaitGroup
		wg.Go(func() { d.Run(ctx) })
		return &wg
	}
	ctx, cancel := context.WithCancel(t.Context())
	wg := run(ctx)
	// At 05:00 on 12-02 the due day is 11-30 (12-01 is due at 06:00).
	expectFrozen(t, frozen, "2026-11-30")
	if _, ok, _ := st.DailyList("2026-12-01"); ok {
		t.Fatal("2026-12-01 frozen before 06:00")
	}
	// The timer wakes before the freeze time: nothing yet.
	<-clk.asked
	clk.Set(time.Date(2026, 12, 2, 5, 50, 0, 0, time.UTC))
	clk.tick <- clk.Now()
	<-clk.asked
	clk.Set(time.Date(2026, 12, 2, 6, 0, 0, 0, time.UTC))
	clk.tick <- clk.Now()
	expectFrozen(t, frozen, "2026-12-01")
	cancel()
	wg.Wait()
	clk.mu.Lock()
	for _, w := range clk.waits {
		if w <= 0 || w > report.DailyRecheck {
			t.Errorf("slept %v; want 0 < wait <= %v", w, report.DailyRecheck)
		}
	}
	if clk.waits[0] != report.DailyRecheck || clk.waits[1] != 10*time.Minute {
		t.Errorf("waits %v, want 10m (capped) then 10m to 06:00", clk.waits)
	}
	clk.mu.Unlock()
	raw, ok, err := st.DailyList("2026-12-01")
	if err != nil || !ok || len(raw) == 0 {
		t.Fatalf("kept list: %v %v", ok, err)
	}

	// Down from 12-02 until 12-05 07:00: the restart catches up 12-02..12-04.
	clk.Set(time.Date(2026, 12, 5, 7, 0, 0, 0, time.UTC))
	ctx, cancel = context.WithCancel(t.Context())
	wg = run(ctx)
	expectFrozen(t, frozen, "2026-12-02", "2026-12-03", "2026-12-04")
	cancel()
	wg.Wait()
}
