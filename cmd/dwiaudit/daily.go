package main

// The daily freeze: at reports.daily_at (node time) the node builds the
// discrepancy list of the day before and keeps it in the store, so that
// the day reads the same whatever arrives or is re-audited later. At
// start it catches up the days it missed while down (report.Archive
// CatchUp).

import (
	"context"
	"log/slog"
	"time"

	"dwiaudit/audit/report"
)

// dailyRecheck is the longest the scheduler sleeps before looking at the
// clock again: a timer set for hours misses a wall-clock jump (NTP
// step, a suspended virtual machine), so it wakes at least this often
// and compares the time with the freeze time itself.
const dailyRecheck = 10 * time.Minute

// latestLister tells the newest day with a kept list (*store.Store has
// it).
type latestLister interface {
	LatestDailyList() (day string, found bool, err error)
}

// dailyScheduler freezes daily lists. now must be the archive's
// Builder's clock; after is time.After, injected for tests.
type dailyScheduler struct {
	archive *report.Archive
	lists   latestLister
	loc     *time.Location
	now     func() time.Time
	after   func(time.Duration) <-chan time.Time
	log     *slog.Logger
	// frozen, when set, gets each day frozen (tests wait on it).
	frozen chan<- string
}

// run catches up, then freezes each day at its time, until ctx ends.
func (d *dailyScheduler) run(ctx context.Context) {
	last, _, err := d.lists.LatestDailyList()
	if err != nil {
		d.log.Warn("reading the kept daily lists failed; catching up from the due day only", "err", err)
		last = ""
	}
	days, err := d.archive.CatchUp(last)
	if err != nil && ctx.Err() == nil {
		d.log.Warn("catching up the daily lists failed", "err", err)
	}
	for _, day := range days {
		d.log.Info("daily list kept (catch-up)", "day", day)
		d.notify(ctx, day)
	}
	for {
		at, day := report.NextFreeze(d.now(), d.archive.DailyAt, d.loc)
		for wait := at.Sub(d.now()); wait > 0; wait = at.Sub(d.now()) {
			select {
			case <-ctx.Done():
				return
			case <-d.after(min(wait, dailyRecheck)):
			}
		}
		frozen, err := d.archive.Freeze(day)
		switch {
		case err != nil && ctx.Err() != nil:
			return
		case err != nil:
			d.log.Warn("keeping the daily list failed; the day stays live until asked for or the next start", "day", day, "err", err)
		case frozen:
			rows := -1
			if l, err := d.archive.Daily(day); err == nil {
				rows = len(l.Rows)
			}
			d.log.Info("daily list kept", "day", day, "findings", rows)
			d.notify(ctx, day)
		}
	}
}

func (d *dailyScheduler) notify(ctx context.Context, day string) {
	if d.frozen == nil {
		return
	}
	select {
	case d.frozen <- day:
	case <-ctx.Done():
	}
}
