package report

// The daily freeze: at reports.daily_at (node time) the node builds the
// discrepancy list of the day before and keeps it in the store, so that
// the day reads the same whatever arrives or is re-audited later. At
// start it catches up the days it missed while down (Archive.CatchUp).

import (
	"context"
	"log/slog"
	"time"
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

// Freezer keeps the daily lists of an archive, each at its time.
type Freezer struct {
	Archive  *Archive
	Lists    latestLister     // the store, which keeps the lists
	Location *time.Location   // the node's time zone
	Now      func() time.Time // the Archive's Builder's clock
	// After is time.After (the default when nil), injected for tests.
	After  func(time.Duration) <-chan time.Time
	Logger *slog.Logger
	// Frozen, when set, gets each day frozen (tests wait on it).
	Frozen chan<- string
}

// Run catches up, then freezes each day at its time, until ctx ends.
func (d *Freezer) Run(ctx context.Context) {
	if d.After == nil {
		d.After = time.After
	}
	last, _, err := d.Lists.LatestDailyList()
	if err != nil {
		d.Logger.Warn("reading the kept daily lists failed; catching up from the due day only", "err", err)
		last = ""
	}
	days, err := d.Archive.CatchUp(last)
	if err != nil && ctx.Err() == nil {
		d.Logger.Warn("catching up the daily lists failed", "err", err)
	}
	for _, day := range days {
		d.Logger.Info("daily list kept (catch-up)", "day", day)
		d.notify(ctx, day)
	}
	for {
		at, day := NextFreeze(d.Now(), d.Archive.DailyAt, d.Location)
		for wait := at.Sub(d.Now()); wait > 0; wait = at.Sub(d.Now()) {
			select {
			case <-ctx.Done():
				return
			case <-d.After(min(wait, dailyRecheck)):
			}
		}
		frozen, err := d.Archive.Freeze(day)
		switch {
		case err != nil && ctx.Err() != nil:
			return
		case err != nil:
			d.Logger.Warn("keeping the daily list failed; the day stays live until asked for or the next start", "day", day, "err", err)
		case frozen:
			rows := -1
			if l, err := d.Archive.Daily(day); err == nil {
				rows = len(l.Rows)
			}
			d.Logger.Info("daily list kept", "day", day, "findings", rows)
			d.notify(ctx, day)
		}
	}
}

func (d *Freezer) notify(ctx context.Context, day string) {
	if d.Frozen == nil {
		return
	}
	select {
	case d.Frozen <- day:
	case <-ctx.Done():
	}
}
