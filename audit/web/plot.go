package web

// A small server-side SVG plotter for the scanner pages: one series of
// dated values, as points joined by a line, on linear axes with ticks,
// and optionally an expected band. No script, no external fonts: the
// SVG is part of the page and prints with it.

import (
	"fmt"
	"html"
	"html/template"
	"math"
	"slices"
	"strings"
	"time"
)

// Plot geometry, in SVG user units (CSS pixels at 100%): wide enough for
// seven date ticks, low enough that three plots fit on a printed page.
const (
	plotWidth   = 760
	plotHeight  = 240
	plotLeft    = 64 // room for the y tick labels
	plotRight   = 16
	plotTop     = 12
	plotBottom  = 36 // room for the x tick labels
	pointRadius = 3.5
	maxXTicks   = 7
)

// plotPoint is one value at one time.
type plotPoint struct {
	T     time.Time
	V     float64
	Label string // shown as the point's tooltip
	Href  string // the point links here when set
	Out   bool   // outside the expected band: drawn as a square
}

// bandPoint is the expected range at one time.
type bandPoint struct {
	T      time.Time
	Lo, Hi float64
}

// plot is one chart.
type plot struct {
	ID     string // unique on the page, for aria references
	Title  string
	YLabel string
	Points []plotPoint
	Band   []bandPoint
	Loc    *time.Location // of the x tick labels
}

// SVG draws the plot. A plot without points draws nothing (the page says
// so instead).
func (p plot) SVG() template.HTML {
	if len(p.Points) == 0 {
		return ""
	}
	pts := slices.Clone(p.Points)
	slices.SortStableFunc(pts, func(a, b plotPoint) int { return a.T.Compare(b.T) })
	band := slices.Clone(p.Band)
	slices.SortStableFunc(band, func(a, b bandPoint) int { return a.T.Compare(b.T) })
	loc := p.Loc
	if loc == nil {
		loc = time.UTC
	}

	// Ranges.
	t0, t1 := pts[0].T, pts[len(pts)-1].T
	for _, b := range band {
		t0, t1 = minTime(t0, b.T), maxTime(t1, b.T)
	}
	if !t1.After(t0) {
		t0, t1 = t0.Add(-12*time.Hour), t1.Add(12*time.Hour)
	} else {
		pad := t1.Sub(t0) / 25
		t0, t1 = t0.Add(-pad), t1.Add(pad)
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, q := range pts {
		lo, hi = math.Min(lo, q.V), math.Max(hi, q.V)
	}
	for _, b := range band {
		lo, hi = math.Min(lo, b.Lo), math.Max(hi, b.Hi)
	}
	if hi-lo < 1e-9 {
		pad := math.Max(math.Abs(hi)*0.05, 0.05)
		lo, hi = lo-pad, hi+pad
	}
	yticks, step := niceTicks(lo, hi, 5)
	lo, hi = math.Min(lo, yticks[0]), math.Max(hi, yticks[len(yticks)-1])

	x0, x1 := float64(plotLeft), float64(plotWidth-plotRight)
	y0, y1 := float64(plotHeight-plotBottom), float64(plotTop)
	xOf := func(t time.Time) float64 {
		return x0 + (x1-x0)*float64(t.Sub(t0))/float64(t1.Sub(t0))
	}
	yOf := func(v float64) float64 { return y0 + (y1-y0)*(v-lo)/(hi-lo) }

	var b strings.Builder
	fmt.Fprintf(&b, `<svg class="plot" viewBox="0 0 %d %d" width="%d" height="%d" role="img" aria-labelledby="%s-title" xmlns="http://www.w3.org/2000/svg">`,
		plotWidth, plotHeight, plotWidth, plotHeight, esc(p.ID))
	fmt.Fprintf(&b, `<title id="%s-title">%s</title>`, esc(p.ID), esc(p.Title))

	// Expected band.
	if len(band) > 0 {
		constant := true
		for _, q := range band {
			if q.Lo != band[0].Lo || q.Hi != band[0].Hi {
				constant = false
			}
		}
		if constant {
			fmt.Fprintf(&b, `<rect class="band" x="%.1f" y="%.1f" width="%.1f" height="%.1f"/>`,
				x0, yOf(band[0].Hi), x1-x0, yOf(band[0].Lo)-yOf(band[0].Hi))
		} else {
			var up, down []string
			for _, q := range band {
				up = append(up, fmt.Sprintf("%.1f,%.1f", xOf(q.T), yOf(q.Hi)))
				down = append(down, fmt.Sprintf("%.1f,%.1f", xOf(q.T), yOf(q.Lo)))
			}
			slices.Reverse(down)
			fmt.Fprintf(&b, `<polygon class="band" points="%s"/>`, strings.Join(append(up, down...), " "))
		}
	}

	// Axes, grid and ticks.
	fmt.Fprintf(&b, `<g class="axis y">`)
	for _, v := range yticks {
		y := yOf(v)
		fmt.Fprintf(&b, `<line class="grid" x1="%.1f" y1="%.1f" x2="%.1f" y2="%.1f"/>`, x0, y, x1, y)
		fmt.Fprintf(&b, `<text x="%.1f" y="%.1f" text-anchor="end" dominant-baseline="middle">%s</text>`, x0-6, y, tickLabel(v, step))
	}
	fmt.Fprintf(&b, `<text class="label" transform="translate(14 %.1f) rotate(-90)" text-anchor="middle">%s</text>`, (y0+y1)/2, esc(p.YLabel))
	fmt.Fprintf(&b, `</g><g class="axis x">`)
	for _, tk := range timeTicks(t0, t1, loc) {
		x := xOf(tk.t)
		fmt.Fprintf(&b, `<line class="tick" x1="%.1f" y1="%.1f" x2="%.1f" y2="%.1f"/>`, x, y0, x, y0+5)
		fmt.Fprintf(&b, `<text x="%.1f" y="%.1f" text-anchor="middle">%s</text>`, x, y0+18, esc(tk.label))
	}
	fmt.Fprintf(&b, `</g><path class="frame" d="M%.1f %.1fV%.1fH%.1f"/>`, x0, y1, y0, x1)

	// The line, then the points over it.
	if len(pts) > 1 {
		var line []string
		for _, q := range pts {
			line = append(line, fmt.Sprintf("%.1f,%.1f", xOf(q.T), yOf(q.V)))
		}
		fmt.Fprintf(&b, `<polyline class="line" points="%s"/>`, strings.Join(line, " "))
	}
	for _, q := range pts {
		x, y := xOf(q.T), yOf(q.V)
		if q.Href != "" {
			fmt.Fprintf(&b, `<a href="%s">`, esc(q.Href))
		}
		if q.Out {
			fmt.Fprintf(&b, `<rect class="pt out" x="%.1f" y="%.1f" width="%.1f" height="%.1f"><title>%s</title></rect>`,
				x-pointRadius-1, y-pointRadius-1, 2*pointRadius+2, 2*pointRadius+2, esc(q.Label))
		} else {
			fmt.Fprintf(&b, `<circle class="pt" cx="%.1f" cy="%.1f" r="%.1f"><title>%s</title></circle>`, x, y, pointRadius, esc(q.Label))
		}
		if q.Href != "" {
			b.WriteString(`</a>`)
		}
	}
	b.WriteString(`</svg>`)
	return template.HTML(b.String()) // every value inside is escaped or a number
}

func esc(s string) string { return html.EscapeString(s) }

func minTime(a, b time.Time) time.Time {
	if a.Before(b) {
		return a
	}
	return b
}

func maxTime(a, b time.Time) time.Time {
	if a.After(b) {
		return a
	}
	return b
}

// niceTicks returns about n ticks covering [lo, hi] at a step of 1, 2,
// 2.5 or 5 times a power of ten, and the step.
func niceTicks(lo, hi float64, n int) ([]float64, float64) {
	raw := (hi - lo) / float64(n-1)
	mag := math.Pow(10, math.Floor(math.Log10(raw)))
	step := 10 * mag
	for _, m := range []float64{1, 2, 2.5, 5, 10} {
		if m*mag >= raw {
			step = m * mag
			break
		}
	}
	first := math.Floor(lo/step) * step
	var out []float64
	for v := first; v <= hi+step*1e-9; v += step {
		out = append(out, v)
	}
	if out[len(out)-1] < hi {
		out = append(out, out[len(out)-1]+step)
	}
	return out, step
}

// tickLabel writes v with as many decimals as step needs.
func tickLabel(v, step float64) string {
	d := 0
	for s := step; s < 1 && d < 6; s *= 10 {
		d++
	}
	if math.Abs(step*math.Pow10(d)-math.Round(step*math.Pow10(d))) > 1e-9 {
		d++ // 2.5 steps
	}
	if math.Abs(v) < step*1e-9 {
		v = 0
	}
	return fmt.Sprintf("%.*f", d, v)
}

type timeTick struct {
	t     time.Time
	label string
}

// timeTicks places at most maxXTicks ticks on [t0, t1] at a round step:
// hours within a day or two, days, weeks or months beyond, aligned to
// midnight or the hour in loc.
func timeTicks(t0, t1 time.Time, loc *time.Location) []timeTick {
	span := t1.Sub(t0)
	day := 24 * time.Hour
	steps := []time.Duration{time.Hour, 2 * time.Hour, 3 * time.Hour, 6 * time.Hour, 12 * time.Hour,
		day, 2 * day, 7 * day, 14 * day, 28 * day, 91 * day, 182 * day, 364 * day}
	step := steps[len(steps)-1]
	for _, s := range steps {
		if span/s < maxXTicks {
			step = s
			break
		}
	}
	a := t0.In(loc)
	var start time.Time
	if step >= day {
		start = time.Date(a.Year(), a.Month(), a.Day(), 0, 0, 0, 0, loc)
	} else {
		h := int(step / time.Hour)
		start = time.Date(a.Year(), a.Month(), a.Day(), a.Hour()-a.Hour()%h, 0, 0, 0, loc)
	}
	var out []timeTick
	prevDay, prevYear := "", 0
	for i := 0; i < 1000; i++ {
		var t time.Time
		if step >= day {
			t = start.AddDate(0, 0, i*int(step/day)) // calendar days across DST
		} else {
			t = start.Add(time.Duration(i) * step)
		}
		if t.After(t1) {
			break
		}
		if t.Before(t0) {
			continue
		}
		label := t.Format("2 Jan")
		if t.Year() != prevYear && step < 91*day {
			// The year on the first tick and where it changes.
			label = t.Format("2 Jan 2006")
			prevYear = t.Year()
		}
		if step >= 91*day {
			label = t.Format("Jan 2006")
		} else if step < day {
			d := t.Format("2 Jan")
			label = t.Format("15:04")
			if d != prevDay {
				label = d + " " + label
				prevDay = d
			}
		}
		out = append(out, timeTick{t: t, label: label})
	}
	return out
}
