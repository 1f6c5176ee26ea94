package web

// The scanner pages: the list of scanners, and one scanner's trends of
// parenchyma ADC, CSF ADC and phantom central ADC over time.

import (
	"fmt"
	"net/http"
	"net/url"
	"slices"
	"strconv"
	"time"

	"dwiaudit/audit/record"
)

// scannerLink is one scanner on /scanners.
type scannerLink struct {
	Label, Href string
	Configured  bool // a configured peer's label
	Seen        bool // a stored series carries it
}

func (h *pagesHandler) scanners(w http.ResponseWriter, r *http.Request) {
	seen, err := h.opt.Store.ScannerLabels()
	if err != nil {
		h.storeFailed(w, "scanner", err)
		return
	}
	all := map[string]*scannerLink{}
	for _, l := range h.opt.Scanners {
		all[l] = &scannerLink{Label: l, Configured: true}
	}
	for _, l := range seen {
		if all[l] == nil {
			all[l] = &scannerLink{Label: l}
		}
		all[l].Seen = true
	}
	var list []scannerLink
	for _, s := range all {
		s.Href = "/scanners/" + url.PathEscape(s.Label)
		list = append(list, *s)
	}
	slices.SortFunc(list, func(a, b scannerLink) int {
		if a.Label < b.Label {
			return -1
		}
		if a.Label > b.Label {
			return 1
		}
		return 0
	})
	h.render(w, http.StatusOK, "scanners", "Scanners", "scanners", list)
}

// trendRow is one series in the table under the plots.
type trendRow struct {
	When        string // study date and time (or audit time), node time
	FromAudit   bool   // When is the audit time: the study had no date
	Series      string // number and description
	Link        string
	TissueADC   string
	CSFADC      string
	PhantomADC  string
	OutsideBand bool
}

// scannerView is the body of a scanner page.
type scannerView struct {
	Label     string
	Days      int
	From, To  string
	Plots     []plotView
	Rows      []trendRow // newest first
	Series    int        // series plotted
	TestLeft  int        // test-patient series left out
	Tolerance string     // the phantom band, e.g. "±3.6%"
}

// plotView is one plot with its caption.
type plotView struct {
	Title   string
	Caption string
	Points  int
	SVG     any
}

// maxTrendRows bounds the table under the plots: the plots show all.
const maxTrendRows = 60

func (h *pagesHandler) scanner(w http.ResponseWriter, r *http.Request) {
	label := r.PathValue("label")
	days := h.opt.TrendDays
	if q := r.URL.Query().Get("days"); q != "" {
		n, err := strconv.Atoi(q)
		if err != nil || n < 1 || n > maxTrendDays {
			h.fail(w, http.StatusBadRequest, fmt.Sprintf("days must be a whole number from 1 to %d.", maxTrendDays))
			return
		}
		days = n
	}
	loc := h.opt.Location
	now := h.opt.Now().In(loc)
	to := now.Add(time.Minute) // audits saved this very moment
	from := time.Date(now.Year(), now.Month(), now.Day(), 0, 0, 0, 0, loc).AddDate(0, 0, -(days - 1))
	audits, err := h.opt.Store.ScannerAudits(label, from, to)
	if err != nil {
		h.storeFailed(w, "scanner", err)
		return
	}
	v := scannerView{Label: label, Days: days, From: from.Format(dayLayout), To: now.Format(dayLayout)}
	tissue := plot{ID: "tissue", Title: "Parenchyma median ADC, " + label, YLabel: "ADC ×10⁻³ mm²/s", Loc: loc}
	csf := plot{ID: "csf", Title: "CSF ADC, " + label, YLabel: "ADC ×10⁻³ mm²/s", Loc: loc}
	phantom := plot{ID: "phantom", Title: "Phantom central ADC, " + label, YLabel: "ADC ×10⁻³ mm²/s", Loc: loc}
	tolerances := map[float64]bool{}
	for _, a := range audits {
		if a.TestPatient {
			v.TestLeft++ // trends are of the department's studies
			continue
		}
		m, ok, err := record.DecodeMeasures(a.Measures)
		if err != nil {
			h.storeFailed(w, "scanner", fmt.Errorf("web: measures of a series: %w", err))
			return
		}
		if !ok {
			continue
		}
		at, ok := studyDateTime(a.StudyDate, a.StudyTime, loc)
		row := trendRow{FromAudit: !ok, Link: seriesLink(a.StudyInstanceUID, a.SeriesUID),
			Series:    fmt.Sprintf("%d %s", m.SeriesNumber, m.SeriesDescription),
			TissueADC: formatADC(m.TissueADCMedian), CSFADC: formatADC(m.CSFADC), PhantomADC: formatADC(m.PhantomADC)}
		if !ok {
			at = a.AuditTime.In(loc)
		}
		row.When = at.Format("2006-01-02 15:04")
		label := row.When + ", series " + row.Series
		any := false
		add := func(p *plot, val *float64, out bool) {
			if val == nil {
				return
			}
			p.Points = append(p.Points, plotPoint{T: at, V: *val * 1e3, Label: fmt.Sprintf("%s: %.3f ×10⁻³ mm²/s", label, *val*1e3), Href: row.Link, Out: out})
			any = true
		}
		if m.PhantomExpectedADC == nil {
			// A phantom has no parenchyma or CSF: its mask medians are
			// water, and would hide a brain drift in the same plot.
			add(&tissue, m.TissueADCMedian, false)
			add(&csf, m.CSFADC, false)
		} else {
			row.TissueADC, row.CSFADC = "—", "—"
			tol := h.tolerance(m.Protocol)
			tolerances[tol] = true
			exp := *m.PhantomExpectedADC * 1e3
			lo, hi := exp*(1-tol), exp*(1+tol)
			phantom.Band = append(phantom.Band, bandPoint{T: at, Lo: lo, Hi: hi})
			if m.PhantomADC != nil {
				v := *m.PhantomADC * 1e3
				row.OutsideBand = v < lo || v > hi
			}
		}
		add(&phantom, m.PhantomADC, row.OutsideBand)
		if any {
			v.Series++
			v.Rows = append(v.Rows, row)
		}
	}
	for t := range tolerances {
		if v.Tolerance != "" {
			v.Tolerance += " or "
		}
		v.Tolerance += fmt.Sprintf("±%.1f%%", t*100)
	}
	slices.SortStableFunc(v.Rows, func(a, b trendRow) int {
		if a.When > b.When {
			return -1
		}
		if a.When < b.When {
			return 1
		}
		return 0
	})
	if len(v.Rows) > maxTrendRows {
		v.Rows = v.Rows[:maxTrendRows]
	}
	v.Plots = []plotView{
		{Title: "Parenchyma median ADC", Caption: "Median ADC of the brain tissue mask, CSF excluded, per series.", Points: len(tissue.Points), SVG: tissue.SVG()},
		{Title: "CSF ADC", Caption: "A high percentile of the ADC inside the head, per series; free water at 37 °C is about 3.0 ×10⁻³ mm²/s (Holz 2000).", Points: len(csf.Points), SVG: csf.SVG()},
		{Title: "Phantom central ADC", Caption: "Central-region ADC of each phantom series; the shaded band is the profile's expected value " + bandWords(v.Tolerance) + ". Squares lie outside the band.", Points: len(phantom.Points), SVG: phantom.SVG()},
	}
	h.render(w, http.StatusOK, "scanner", "Scanner "+label, "scanners", v)
}

func bandWords(tol string) string {
	if tol == "" {
		return "with its tolerance"
	}
	return tol
}

// tolerance is a phantom profile's relative tolerance.
func (h *pagesHandler) tolerance(profile string) float64 {
	if h.opt.PhantomTolerance != nil {
		if t := h.opt.PhantomTolerance(profile); t > 0 {
			return t
		}
	}
	return DefaultPhantomTolerance
}
