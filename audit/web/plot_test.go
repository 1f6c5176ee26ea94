package web

import (
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"
)

func TestNiceTicksCoverTheRangeAtARoundStep(t *testing.T) {
	tests := []struct {
		name     string
		lo, hi   float64
		wantStep float64
		want     []string
	}{
		{"ADC values around 0.8 get steps of 0.05", 0.76, 0.93, 0.05, []string{"0.75", "0.80", "0.85", "0.90", "0.95"}},
		{"a phantom band around 1.1 gets steps of 0.02", 1.06, 1.14, 0.02, []string{"1.06", "1.08", "1.10", "1.12", "1.14"}},
		{"a wide range gets whole steps", 0, 2.1, 1, []string{"0", "1", "2", "3"}},
		{"quarter steps keep two decimals", 0, 0.9, 0.25, []string{"0.00", "0.25", "0.50", "0.75", "1.00"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			ticks, step := niceTicks(tt.lo, tt.hi, 5)
			var labels []string
			for _, v := range ticks {
				labels = append(labels, tickLabel(v, step))
			}
			if step != tt.wantStep || !slices.Equal(labels, tt.want) {
				t.Errorf("niceTicks(%g, %g) = %v step %g, want %v step %g", tt.lo, tt.hi, labels, step, tt.want, tt.wantStep)
			}
			if ticks[0] > tt.lo || ticks[len(ticks)-1] < tt.hi {
				t.Errorf("ticks %v do not cover [%g, %g]", ticks, tt.lo, tt.hi)
			}
		})
	}
}

func TestTimeTicksAreFewAlignedAndDated(t *testing.T) {
	loc := qoh
	tests := []struct {
		name       string
		from, to   time.Time
		wantLabels []string
	}{
		{"a week gets a tick a day, the year on the first",
			time.Date(2025, 3, 3, 9, 0, 0, 0, loc), time.Date(2025, 3, 8, 18, 0, 0, 0, loc),
			[]string{"4 Mar 2025", "5 Mar", "6 Mar", "7 Mar", "8 Mar"}},
		{"a day gets ticks every few hours, dated at each new day",
			time.Date(2025, 3, 3, 7, 0, 0, 0, loc), time.Date(2025, 3, 4, 2, 0, 0, 0, loc),
			[]string{"3 Mar 09:00", "12:00", "15:00", "18:00", "21:00", "4 Mar 00:00"}},
		{"seven weeks get a tick a fortnight, naming the new year",
			time.Date(2024, 12, 1, 0, 0, 0, 0, loc), time.Date(2025, 1, 20, 0, 0, 0, 0, loc),
			[]string{"1 Dec 2024", "15 Dec", "29 Dec", "12 Jan 2025"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			var labels []string
			for _, tk := range timeTicks(tt.from, tt.to, loc) {
				labels = append(labels, tk.label)
				if tk.t.Before(tt.from) || tk.t.After(tt.to) {
					t.Errorf("tick %v outside [%v, %v]", tk.t, tt.from, tt.to)
				}
			}
			if !slices.Equal(labels, tt.wantLabels) {
				t.Errorf("labels %q, want %q", labels, tt.wantLabels)
			}
		})
	}
}

func TestPlotSVG(t *testing.T) {
	at := time.Date(2025, 3, 3, 9, 0, 0, 0, qoh)
	t.Run("no points draw nothing", func(t *testing.T) {
		if got := (plot{ID: "p"}).SVG(); got != "" {
			t.Errorf("SVG = %q", got)
		}
	})
	t.Run("one point still draws on a padded range", func(t *testing.T) {
		svg := string(plot{ID: "p", Points: []plotPoint{{T: at, V: 1.1}}}.SVG())
		if strings.Count(svg, `<circle class="pt"`) != 1 || strings.Contains(svg, "NaN") || strings.Contains(svg, "Inf") || strings.Contains(svg, "<polyline") {
			t.Errorf("SVG of one point: %s", svg)
		}
	})
	t.Run("labels and links are escaped", func(t *testing.T) {
		svg := string(plot{ID: "p", Title: `a<b`, Points: []plotPoint{{T: at, V: 1, Label: `<script>x</script>`, Href: `/studies/1"x`}, {T: at.Add(time.Hour), V: 2}}}.SVG())
		if strings.Contains(svg, "<script>") || strings.Contains(svg, `1"x`) || !strings.Contains(svg, "a&lt;b") {
			t.Errorf("unescaped text in %s", svg)
		}
	})
	t.Run("points are drawn in time order with the line through them", func(t *testing.T) {
		svg := string(plot{ID: "p", Points: []plotPoint{{T: at.Add(2 * time.Hour), V: 3}, {T: at, V: 1}, {T: at.Add(time.Hour), V: 2, Out: true}}}.SVG())
		if strings.Count(svg, `class="pt"`) != 2 || strings.Count(svg, `class="pt out"`) != 1 || strings.Count(svg, "<polyline") != 1 {
			t.Errorf("SVG: %s", svg)
		}
		pts := svg[strings.Index(svg, `points="`)+8:]
		pts = pts[:strings.Index(pts, `"`)]
		var xs []float64
		for _, p := range strings.Fields(pts) {
			x, err := strconv.ParseFloat(strings.Split(p, ",")[0], 64)
			if err != nil {
				t.Fatal(err)
			}
			xs = append(xs, x)
		}
		if len(xs) != 3 || !slices.IsSorted(xs) {
			t.Errorf("line points %v not in time order", xs)
		}
	})
}

func TestFormatting(t *testing.T) {
	tests := []struct{ name, got, want string }{
		{"an ADC in mm²/s reads in 1e-3", formatADC(ptr(0.00079)), "0.79 ×10⁻³ mm²/s"},
		{"an undefined measure is a dash", formatADC(nil), "—"},
		{"a report ADC becomes the pages' notation", displayValue("0.79e-3 mm²/s"), "0.79 ×10⁻³ mm²/s"},
		{"a report ADC range too", displayValue("0.60e-3 to 1.10e-3 mm²/s"), "0.60 to 1.10 ×10⁻³ mm²/s"},
		{"b-values are left alone", displayValue("0, 1000 s/mm²"), "0, 1000 s/mm²"},
		{"a patient ID keeps its last three characters", maskPatientID("QOH-SYN-0001"), "*********001"},
		{"a short patient ID is masked whole", maskPatientID("A12"), "***"},
		{"a DICOM time reads as HH:MM", formatStudyTime("093012.5"), "09:30"},
		{"a DICOM date reads as YYYY-MM-DD", formatStudyDate("20250314"), "2025-03-14"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if tt.got != tt.want {
				t.Errorf("got %q, want %q", tt.got, tt.want)
			}
		})
	}
	t.Run("study date and time are read in the node's zone (PS3.5 6.2 DA and TM)", func(t *testing.T) {
		for _, c := range []struct {
			da, tm string
			want   time.Time
			ok     bool
		}{
			{"20250314", "093012.123456", time.Date(2025, 3, 14, 9, 30, 12, 0, qoh), true},
			{"20250314", "0930", time.Date(2025, 3, 14, 9, 30, 0, 0, qoh), true},
			{"20250314", "", time.Date(2025, 3, 14, 0, 0, 0, 0, qoh), true},
			{"", "0930", time.Time{}, false},
		} {
			got, ok := studyDateTime(c.da, c.tm, qoh)
			if ok != c.ok || !got.Equal(c.want) {
				t.Errorf("studyDateTime(%q, %q) = %v, %v; want %v, %v", c.da, c.tm, got, ok, c.want, c.ok)
			}
		}
	})
}
