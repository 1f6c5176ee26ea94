package web

// The daily discrepancy list page. The list itself is built by package
// audit/report (the same rows as the CSV, JSON and printable reports);
// this page shows it with links and the other days.

import (
	"errors"
	"net/http"
	"net/url"
	"slices"
	"time"

	"dwiaudit/audit/report"
)

// DailyLists gives a day's discrepancy list: *report.Archive (frozen
// lists of past days) or *report.Builder (always built live) have it.
type DailyLists interface {
	Daily(day string) (*report.DailyList, error)
}

// dayRow is one finding on the daily list page.
type dayRow struct {
	report.Row
	Time     string // HH:MM of the audit, node time
	Link     string // the study page at the series, relative to this node
	Measured string
	Expected string
}

// dayView is the body of the daily list page.
type dayView struct {
	Day      string
	IsToday  bool
	Frozen   string // when the list was kept, "" for a live list
	Rows     []dayRow
	Studies  int // studies audited on the day
	Flagged  int // studies with a finding
	PastDays []string
	Prev     string // the day before, for the pager
	Next     string // the day after, "" when that is in the future
}

// seriesLink is the study page at one series' anchor.
func seriesLink(studyUID, seriesUID string) string {
	return "/studies/" + url.PathEscape(studyUID) + "#series-" + seriesUID
}

func (h *pagesHandler) today(w http.ResponseWriter, r *http.Request) {
	h.dayPage(w, h.opt.Now().In(h.opt.Location).Format(dayLayout))
}

func (h *pagesHandler) day(w http.ResponseWriter, r *http.Request) {
	day := r.PathValue("day")
	if d, err := time.ParseInLocation(dayLayout, day, h.opt.Location); err != nil || d.Format(dayLayout) != day {
		h.fail(w, http.StatusBadRequest, "A day is written YYYY-MM-DD, for example 2025-03-04.")
		return
	}
	h.dayPage(w, day)
}

func (h *pagesHandler) dayPage(w http.ResponseWriter, day string) {
	d, _ := time.ParseInLocation(dayLayout, day, h.opt.Location)
	today := h.opt.Now().In(h.opt.Location).Format(dayLayout)
	v := dayView{Day: day, IsToday: day == today, Prev: d.AddDate(0, 0, -1).Format(dayLayout)}
	if next := d.AddDate(0, 0, 1).Format(dayLayout); next <= today {
		v.Next = next
	}
	list, err := h.opt.Daily.Daily(day)
	if errors.Is(err, report.ErrBadDay) {
		h.fail(w, http.StatusBadRequest, "A day is written YYYY-MM-DD, for example 2025-03-04.")
		return
	}
	if err != nil {
		h.storeFailed(w, "day", err)
		return
	}
	v.Studies, v.Flagged = list.StudiesAudited, list.StudiesWithFindings
	if list.FrozenAt != nil {
		v.Frozen = list.FrozenAt.In(h.opt.Location).Format("2006-01-02 15:04")
	}
	for _, r := range list.Rows {
		v.Rows = append(v.Rows, dayRow{
			Row:      r,
			Time:     r.AuditTime.In(h.opt.Location).Format("15:04"),
			Link:     seriesLink(r.StudyUID, r.SeriesUID),
			Measured: displayValue(r.Measured),
			Expected: displayValue(r.Expected),
		})
	}
	if v.PastDays, err = h.opt.Store.AuditDays(pastDaysListed + 1); err != nil {
		h.storeFailed(w, "day", err)
		return
	}
	v.PastDays = slices.DeleteFunc(v.PastDays, func(s string) bool { return s == day })
	if len(v.PastDays) > pastDaysListed {
		v.PastDays = v.PastDays[:pastDaysListed]
	}
	title := "Discrepancies of " + day
	if v.IsToday {
		title = "Today's discrepancies (" + day + ")"
	}
	h.render(w, http.StatusOK, "day", title, "day", v)
}
