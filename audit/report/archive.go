package report

import (
	"errors"
	"fmt"
	"time"

	"dwiaudit/store"
)

// ListStore keeps frozen daily lists as opaque JSON (*store.Store has
// it). SaveDailyList must not replace a list already kept: it returns
// store.ErrDailyListExists.
type ListStore interface {
	DailyList(day string) ([]byte, bool, error)
	SaveDailyList(day string, data []byte) error
}

// MaxCatchUpDays bounds how many past days CatchUp freezes after the
// node was down: a month of lists, which a lead may still ask for; older
// days stay live (their audits are still in the store).
const MaxCatchUpDays = 31

// Archive serves daily lists, frozen or live. A day's list is frozen
// (built once and kept in the store) when its freeze time has passed:
// DailyAt (reports.daily_at) on the day after it. From then on the list
// reads the same, byte for byte, whatever arrives or is re-audited
// later.
//
// The choice for a past day without a frozen list (the node was down at
// its freeze time, or the day is older than the node): Daily builds it
// live and, when the day is due and the store is writable, freezes it at
// that moment, as the scheduler would have. A day not yet due (today,
// or yesterday before DailyAt) is always built live and never kept. A
// read-only store (`dwiaudit report --data`) never freezes: it shows
// live lists for days nobody froze.
//
// Frozen lists keep patient IDs in full; the Builder's PatientID mode is
// applied when a list is read, so changing reports.patient_id applies to
// old lists too.
type Archive struct {
	Builder *Builder
	Lists   ListStore
	// DailyAt is the freeze time after midnight, node time.
	DailyAt time.Duration
}

// DueDay is the newest day whose freeze time has passed at now: the day
// before now's if now is at or after dailyAt, else the day before that.
func DueDay(now time.Time, dailyAt time.Duration, loc *time.Location) string {
	n := now.In(loc)
	back := -1
	if n.Before(freezeTime(time.Date(n.Year(), n.Month(), n.Day()-1, 0, 0, 0, 0, loc), dailyAt)) {
		back = -2
	}
	return time.Date(n.Year(), n.Month(), n.Day()+back, 0, 0, 0, 0, loc).Format(dayLayout)
}

// freezeTime is when day's list is due: dailyAt after the midnight that
// ends it (wall clock, so 06:00 stays 06:00 across a DST change).
func freezeTime(day time.Time, dailyAt time.Duration) time.Time {
	h, m := int(dailyAt/time.Hour), int(dailyAt%time.Hour/time.Minute)
	return time.Date(day.Year(), day.Month(), day.Day()+1, h, m, 0, 0, day.Location())
}

// NextFreeze is the first freeze time after now, and the day it freezes.
func NextFreeze(now time.Time, dailyAt time.Duration, loc *time.Location) (time.Time, string) {
	n := now.In(loc)
	yesterday := time.Date(n.Year(), n.Month(), n.Day()-1, 0, 0, 0, 0, loc)
	if at := freezeTime(yesterday, dailyAt); at.After(n) {
		return at, yesterday.Format(dayLayout)
	}
	today := time.Date(n.Year(), n.Month(), n.Day(), 0, 0, 0, 0, loc)
	return freezeTime(today, dailyAt), today.Format(dayLayout)
}

// due says whether day's freeze time has passed.
func (a *Archive) due(day string) (bool, error) {
	d, err := parseDay(day, a.Builder.loc())
	if err != nil {
		return false, err
	}
	return !a.Builder.now().Before(freezeTime(d, a.DailyAt)), nil
}

// Daily returns day's list: the frozen one when kept, else built live
// (and frozen now if due; see Archive). Patient IDs show as the
// Builder's mode says.
func (a *Archive) Daily(day string) (*DailyList, error) {
	if _, err := parseDay(day, a.Builder.loc()); err != nil {
		return nil, err
	}
	l, err := a.kept(day)
	if err != nil || l != nil {
		return l, err
	}
	due, err := a.due(day)
	if err != nil {
		return nil, err
	}
	if !due {
		return a.Builder.Daily(day)
	}
	l, _, err = a.freeze(day)
	if err != nil && !errors.Is(err, store.ErrReadOnly) {
		return nil, err
	}
	return l.WithPatientID(a.Builder.PatientID), nil // on ErrReadOnly: the list built live
}

// kept returns day's frozen list, nil if none.
func (a *Archive) kept(day string) (*DailyList, error) {
	b, ok, err := a.Lists.DailyList(day)
	if err != nil || !ok {
		return nil, err
	}
	l, err := ParseDailyList(b)
	if err != nil {
		return nil, fmt.Errorf("kept list of %s: %w", day, err)
	}
	return l.WithPatientID(a.Builder.PatientID), nil
}

// Freeze builds and keeps day's list unless one is kept already;
// frozen says whether this call kept it. It does not check that the day
// is due: the scheduler calls it at the freeze time.
func (a *Archive) Freeze(day string) (frozen bool, err error) {
	if _, ok, err := a.Lists.DailyList(day); err != nil || ok {
		return false, err
	}
	_, frozen, err = a.freeze(day)
	return frozen, err
}

// freeze builds day's list with patient IDs in full and keeps it; if
// another call kept one first, that one is returned. A read-only store
// gives the list built, not frozen, with store.ErrReadOnly.
func (a *Archive) freeze(day string) (*DailyList, bool, error) {
	b := *a.Builder
	b.PatientID = PatientIDFull
	l, err := b.Daily(day)
	if err != nil {
		return nil, false, err
	}
	at := l.GeneratedAt
	l.FrozenAt = &at
	data, err := l.marshalIndent()
	if err != nil {
		return nil, false, err
	}
	err = a.Lists.SaveDailyList(day, data)
	if errors.Is(err, store.ErrReadOnly) {
		l.FrozenAt = nil
		return l, false, err
	}
	if errors.Is(err, store.ErrDailyListExists) {
		data, _, err = a.Lists.DailyList(day)
		if err != nil {
			return nil, false, err
		}
		l, err = ParseDailyList(data)
		return l, false, err
	}
	if err != nil {
		return nil, false, fmt.Errorf("report: keeping the list of %s: %w", day, err)
	}
	return l, true, nil
}

// CatchUp freezes the days the node missed: from the day after last
// (the newest day kept; "" when none is) up to DueDay at the Builder's
// clock, at most MaxCatchUpDays of them, and only the due day itself
// when nothing was ever kept. It returns the days it froze.
func (a *Archive) CatchUp(last string) ([]string, error) {
	loc := a.Builder.loc()
	dueDay := DueDay(a.Builder.now(), a.DailyAt, loc)
	due, _ := parseDay(dueDay, loc)
	first := due
	if last != "" {
		l, err := parseDay(last, loc)
		if err != nil {
			return nil, err
		}
		first = time.Date(l.Year(), l.Month(), l.Day()+1, 0, 0, 0, 0, loc)
		if oldest := time.Date(due.Year(), due.Month(), due.Day()-MaxCatchUpDays+1, 0, 0, 0, 0, loc); first.Before(oldest) {
			first = oldest
		}
	}
	var done []string
	for d := first; !d.After(due); d = time.Date(d.Year(), d.Month(), d.Day()+1, 0, 0, 0, 0, loc) {
		day := d.Format(dayLayout)
		frozen, err := a.Freeze(day)
		if err != nil {
			return done, err
		}
		if frozen {
			done = append(done, day)
		}
	}
	return done, nil
}
