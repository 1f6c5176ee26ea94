package rules_test

import (
	"fmt"
	"math"
	"slices"
	"strings"
	"testing"

	"dwiaudit/audit/adc"
	"dwiaudit/audit/analysis"
	"dwiaudit/audit/dwi"
	"dwiaudit/rules"
)

// Hand-built series: axial 4x4 slices, 2 mm pixels, on a grid of
// positions along +z.

const unitPixels = 4

func unitGeometry(z float64) dwi.Geometry {
	return dwi.Geometry{Rows: unitPixels, Columns: unitPixels, PixelSpacing: [2]float64{2, 2},
		Position: [3]float64{0, 0, z}, Orientation: [6]float64{1, 0, 0, 0, 1, 0}, Known: true}
}

// unitVolume is a volume at b along dir (zero: isotropic) with a frame
// at every grid position but those in missing.
func unitVolume(grid []float64, b float64, dir dwi.Direction, missing ...int) *dwi.Volume {
	v := &dwi.Volume{BValue: b, Direction: dir, Isotropic: dir == dwi.Direction{}, SeriesUID: "1.2.3.4", Slices: make([]*dwi.Frame, len(grid))}
	for z, p := range grid {
		if slices.Contains(missing, z) {
			continue
		}
		v.Slices[z] = &dwi.Frame{SOPInstanceUID: "1.2.3.4.5." + string(rune('a'+z)), BValue: b, HasBValue: true, Geometry: unitGeometry(p)}
	}
	v.Geometry = unitGeometry(grid[0])
	return v
}

// unitSeries assembles the volumes into a series with the facts the
// rules read (b-values, directions, missing slices), as the assembly
// would.
func unitSeries(desc string, grid []float64, vols ...*dwi.Volume) *dwi.Series {
	s := &dwi.Series{StudyInstanceUID: "1.2.3", SeriesInstanceUID: "1.2.3.4", SeriesNumber: 7, SeriesDescription: desc,
		Scanner: dwi.Scanner{Label: "QOH-MR1"}, Grid: grid, Normal: [3]float64{0, 0, 1}, Reference: unitGeometry(grid[0]), Volumes: vols}
	for _, v := range vols {
		if !slices.Contains(s.Facts.BValues, v.BValue) {
			s.Facts.BValues = append(s.Facts.BValues, v.BValue)
		}
		if !v.Isotropic {
			if s.Facts.Directions == nil {
				s.Facts.Directions = map[float64][]dwi.Direction{}
			}
			s.Facts.Directions[v.BValue] = append(s.Facts.Directions[v.BValue], v.Direction)
		}
		n := 0
		for z, f := range v.Slices {
			if f == nil {
				s.Facts.MissingSlices = append(s.Facts.MissingSlices, dwi.MissingSlice{BValue: v.BValue, Direction: v.Direction, Position: grid[z]})
			} else {
				n++
			}
		}
		s.Facts.SlicesPerVolume = append(s.Facts.SlicesPerVolume, n)
	}
	slices.Sort(s.Facts.BValues)
	return s
}

var (
	dirX = dwi.Direction{1, 0, 0}
	dirY = dwi.Direction{0, 1, 0}
	dirZ = dwi.Direction{0, 0, 1}
)

func grid(n int) []float64 {
	g := make([]float64, n)
	for i := range g {
		g[i] = -10 + 2.5*float64(i)
	}
	return g
}

// unitStudy wraps series, matched against cfg, without computation.
func unitStudy(cfg *rules.Config, ss ...*dwi.Series) *rules.Study {
	st := &rules.Study{StudyUID: "1.2.3", Assembly: &dwi.Study{StudyInstanceUID: "1.2.3", Series: ss}}
	for _, s := range ss {
		st.Series = append(st.Series, rules.NewSeriesAudit(cfg, s, nil, nil))
	}
	return st
}

func run(t *testing.T, r rules.Rule, st *rules.Study, cfg *rules.Config) []rules.Finding {
	t.Helper()
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	return rules.Run([]rules.Rule{r}, st, cfg)
}

func TestMissingB0OnHandBuiltSeries(t *testing.T) {
	g := grid(8)
	cases := []struct {
		name      string
		series    *dwi.Series
		wantSev   rules.Severity // 0: no finding
		wantWords []string
		wantMM    []float64
	}{
		{
			name:    "b0 for some slice positions only is reported with the positions",
			series:  unitSeries("DWI", g, unitVolume(g, 0, dwi.Direction{}, 5, 6), unitVolume(g, 1000, dwi.Direction{})),
			wantSev: rules.SeverityError, wantWords: []string{"present for 6 of 8 slice positions", "2.5 mm and 5.0 mm"}, wantMM: []float64{2.5, 5},
		},
		{
			name:    "no b0 at all is an error naming the lowest b-value",
			series:  unitSeries("DWI", g, unitVolume(g, 1000, dirX), unitVolume(g, 1000, dirY), unitVolume(g, 1000, dirZ)),
			wantSev: rules.SeverityError, wantWords: []string{"no b0", "b = 0 s/mm²", "b = 1000 s/mm² only"},
		},
		{
			name:    "a complete b0 is silent",
			series:  unitSeries("DWI", g, unitVolume(g, 0, dwi.Direction{}), unitVolume(g, 1000, dwi.Direction{})),
			wantSev: 0,
		},
		{
			name:    "b0 positions missing from every volume are a gap for incomplete-series, not missing-b0",
			series:  withGaps(unitSeries("DWI", g, unitVolume(g, 0, dwi.Direction{}, 3), unitVolume(g, 1000, dwi.Direction{}, 3)), g[3]),
			wantSev: 0,
		},
		{
			name:    "a body protocol with b 50 as its lowest accepts b 50",
			series:  unitSeries("DWI prostate", g, unitVolume(g, 50, dwi.Direction{}), unitVolume(g, 800, dwi.Direction{}), unitVolume(g, 1400, dwi.Direction{})),
			wantSev: 0,
		},
		{
			name:    "a body protocol with b 50 as its lowest reports b 50 missing",
			series:  unitSeries("DWI prostate", g, unitVolume(g, 800, dwi.Direction{}), unitVolume(g, 1400, dwi.Direction{})),
			wantSev: rules.SeverityError, wantWords: []string{"b = 50 s/mm²", `protocol "prostate (example)"`},
		},
		{
			name:    "a body protocol accepts a b0 below its lowest b-value as the reference",
			series:  unitSeries("DWI prostate", g, unitVolume(g, 0, dwi.Direction{}), unitVolume(g, 800, dwi.Direction{}), unitVolume(g, 1400, dwi.Direction{})),
			wantSev: 0,
		},
		{
			name:    "an unmatched series accepts a lowest b up to 200 as its b0",
			series:  unitSeries("t1 mystery", g, unitVolume(g, 100, dwi.Direction{}), unitVolume(g, 600, dwi.Direction{})),
			wantSev: 0,
		},
		{
			name:    "an unmatched series whose lowest b is 300 has no b0",
			series:  unitSeries("t1 mystery", g, unitVolume(g, 300, dwi.Direction{}), unitVolume(g, 600, dwi.Direction{})),
			wantSev: rules.SeverityError, wantWords: []string{"b <= 200 s/mm²", "no protocol matched"},
		},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			cfg := rules.DefaultConfig()
			fs := run(t, rules.NewMissingB0(), unitStudy(cfg, c.series), cfg)
			if c.wantSev == 0 {
				if len(fs) > 0 {
					t.Fatalf("want no finding, got %s", describe(fs))
				}
				return
			}
			if len(fs) != 1 || fs[0].Severity != c.wantSev || fs[0].Rule != rules.IDMissingB0 {
				t.Fatalf("want one %v missing-b0, got %s", c.wantSev, describe(fs))
			}
			f := fs[0]
			for _, w := range c.wantWords {
				if !strings.Contains(f.Message, w) {
					t.Errorf("message %q lacks %q", f.Message, w)
				}
			}
			if c.wantMM != nil && (f.Region == nil || !slices.Equal(f.Region.SlicesMM, c.wantMM)) {
				t.Errorf("region %+v, want positions %v", f.Region, c.wantMM)
			}
			if f.SeriesNumber != 7 || f.Scanner != "QOH-MR1" || f.StudyUID != "1.2.3" || f.SeriesUID != "1.2.3.4" {
				t.Errorf("identity %+v", f)
			}
		})
	}
}

func withGaps(s *dwi.Series, gaps ...float64) *dwi.Series {
	s.Facts.GridGaps = gaps
	s.Facts.SliceSpacing = 2.5
	return s
}

func TestBValueMismatchOnHandBuiltSeries(t *testing.T) {
	g := grid(4)
	inconsistent := unitVolume(g, 1000, dirX)
	inconsistent.Slices[1].BValue = 1100 // beyond max(5, 2% of 1000) = 20 (dwi.DefaultTolerances form)
	inconsistent.Slices[2].BValue = 1100
	trace := unitVolume(g, 1000, dirY)
	for _, f := range trace.Slices {
		f.HasBMatrix, f.BMatrix = true, [6]float64{0, 0, 0, 700, 0, 0} // trace 700 != 1000 (PS3.3 C.8.13.5.9: XX+YY+ZZ = b)
	}
	cases := []struct {
		name    string
		series  *dwi.Series
		wantSev []rules.Severity
		words   []string
	}{
		{"b-values inconsistent inside one volume are an error",
			unitSeries("DWI", g, unitVolume(g, 0, dwi.Direction{}), inconsistent, unitVolume(g, 1000, dirY), unitVolume(g, 1000, dirZ)),
			[]rules.Severity{rules.SeverityError}, []string{"inside one volume", "2 images", "1100 s/mm²"}},
		{"a header b-value that disagrees with the b-matrix trace is an error",
			unitSeries("DWI", g, unitVolume(g, 0, dwi.Direction{}), unitVolume(g, 1000, dirX), trace, unitVolume(g, 1000, dirZ)),
			[]rules.Severity{rules.SeverityError}, []string{"b-matrix", "b = 1000 s/mm²", "700 s/mm²"}},
		{"b-values within tolerance of the protocol's are silent",
			unitSeries("DWI", g, unitVolume(g, 0, dwi.Direction{}), unitVolume(g, 1004, dirX), unitVolume(g, 1004, dirY), unitVolume(g, 1004, dirZ)),
			nil, nil},
		{"fewer directions than the protocol's minimum is a warning",
			unitSeries("DWI", g, unitVolume(g, 0, dwi.Direction{}), unitVolume(g, 1000, dirZ)),
			[]rules.Severity{rules.SeverityWarning}, []string{"1 gradient direction", "at least 3"}},
		{"a series with only the scanner's trace is not judged on directions",
			unitSeries("DWI", g, unitVolume(g, 0, dwi.Direction{}), unitVolume(g, 1000, dwi.Direction{})),
			nil, nil},
		{"a b0-only series lending its b0 is not held to the protocol's set",
			unitSeries("DWI b0", g, unitVolume(g, 0, dwi.Direction{})),
			nil, nil},
		{"a prostate series with b0 instead of b50 differs from its protocol",
			unitSeries("DWI prostate", g, unitVolume(g, 0, dwi.Direction{}), unitVolume(g, 800, dwi.Direction{}), unitVolume(g, 1400, dwi.Direction{})),
			[]rules.Severity{rules.SeverityWarning}, []string{"b = 0 s/mm² acquired but not in the protocol"}},
		{"a missing b0 is left to missing-b0",
			unitSeries("DWI", g, unitVolume(g, 1000, dirX), unitVolume(g, 1000, dirY), unitVolume(g, 1000, dirZ)),
			nil, nil},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			cfg := rules.DefaultConfig()
			fs := run(t, rules.NewBValueMismatch(), unitStudy(cfg, c.series), cfg)
			var got []rules.Severity
			for _, f := range fs {
				got = append(got, f.Severity)
			}
			if !slices.Equal(got, c.wantSev) {
				t.Fatalf("severities %v, want %v: %s", got, c.wantSev, describe(fs))
			}
			for _, w := range c.words {
				if !strings.Contains(fs[0].Message, w) {
					t.Errorf("message %q lacks %q", fs[0].Message, w)
				}
			}
		})
	}
}

func TestIncompleteSeriesOnHandBuiltSeries(t *testing.T) {
	g := grid(6)
	t.Run("volumes with different slice counts are reported with the positions", func(t *testing.T) {
		cfg := rules.DefaultConfig()
		s := unitSeries("DWI", g, unitVolume(g, 0, dwi.Direction{}), unitVolume(g, 1000, dirX, 2), unitVolume(g, 1000, dirY), unitVolume(g, 1000, dirZ))
		fs := run(t, rules.NewIncompleteSeries(), unitStudy(cfg, s), cfg)
		if len(fs) != 1 || fs[0].Measured.(float64) != 5 || fs[0].Expected.(float64) != 6 || !strings.Contains(fs[0].Message, "-5.0 mm") {
			t.Fatalf("got %s", describe(fs))
		}
	})
	t.Run("a gap in the slab is a warning of its own", func(t *testing.T) {
		cfg := rules.DefaultConfig()
		s := withGaps(unitSeries("DWI", g, unitVolume(g, 0, dwi.Direction{}, 4), unitVolume(g, 1000, dwi.Direction{}, 4)), g[4])
		fs := run(t, rules.NewIncompleteSeries(), unitStudy(cfg, s), cfg)
		if len(fs) != 1 || fs[0].Severity != rules.SeverityWarning || !strings.Contains(fs[0].Message, "missing from every volume") {
			t.Fatalf("got %s", describe(fs))
		}
	})
	t.Run("b0 slices missing are missing-b0's, and incomplete-series' when missing-b0 is off", func(t *testing.T) {
		cfg := rules.DefaultConfig()
		s := unitSeries("DWI", g, unitVolume(g, 0, dwi.Direction{}, 1), unitVolume(g, 1000, dwi.Direction{}))
		if fs := run(t, rules.NewIncompleteSeries(), unitStudy(cfg, s), cfg); len(fs) != 0 {
			t.Fatalf("with missing-b0 on: %s", describe(fs))
		}
		off := false
		cfg.Rules = map[string]rules.RuleSettings{rules.IDMissingB0: {Enabled: &off}}
		if fs := run(t, rules.NewIncompleteSeries(), unitStudy(cfg, s), cfg); len(fs) != 1 {
			t.Fatalf("with missing-b0 off: %s", describe(fs))
		}
	})
}

func TestGeometryMismatchOnHandBuiltSeries(t *testing.T) {
	g := grid(4)
	cfg := rules.DefaultConfig()
	s := unitSeries("DWI", g, unitVolume(g, 1000, dwi.Direction{}))
	s.Facts.GeometryMismatch = []string{"b=1000 isotropic: shifted in plane by 3 mm along rows, 0 mm along columns (image 1.2)"}
	fs := run(t, rules.NewGeometryMismatch(), unitStudy(cfg, s), cfg)
	if len(fs) != 1 || fs[0].Severity != rules.SeverityError || !strings.Contains(fs[0].Message, "shifted in plane by 3 mm") {
		t.Fatalf("got %s", describe(fs))
	}
}

// computed wraps s with a hand-made result holding measures m.
func computed(cfg *rules.Config, s *dwi.Series, m analysis.Measures) *rules.Study {
	res := &analysis.Result{Series: s, Measures: m, B0Value: 0}
	st := &rules.Study{StudyUID: s.StudyInstanceUID, Series: []*rules.SeriesAudit{rules.NewSeriesAudit(cfg, s, res, nil)}}
	return st
}

// normalMeasures are those of a sound brain series (docs/references.md#brain-adc values:
// parenchyma 0.70e-3, CSF near 3.0e-3).
func normalMeasures() analysis.Measures {
	return analysis.Measures{ParenchymaMedianADC: 0.72e-3, CSFADC: 2.95e-3, TissueVoxels: 1000, ParenchymaVoxels: 900, ADCVoxels: 1000,
		B0SNR: 60, HighBTissueSNR: 30, HighB: 1000}
}

func TestADCOutOfRangeOnHandBuiltMeasures(t *testing.T) {
	g := grid(4)
	brain := func() *dwi.Series {
		return unitSeries("DWI", g, unitVolume(g, 0, dwi.Direction{}), unitVolume(g, 1000, dwi.Direction{}))
	}
	cases := []struct {
		name   string
		series *dwi.Series
		edit   func(*analysis.Measures)
		want   []string // words of each finding, in order
	}{
		{"normal measures are silent", brain(), func(*analysis.Measures) {}, nil},
		{"a parenchyma median above 1.1e-3 is out of range", brain(), func(m *analysis.Measures) { m.ParenchymaMedianADC = 1.3e-3 },
			[]string{"parenchyma median ADC 1.30e-3 mm²/s"}},
		{"CSF at 2.1e-3 is far from free water", brain(), func(m *analysis.Measures) { m.CSFADC = 2.1e-3 },
			[]string{"CSF ADC 2.10e-3 mm²/s is 30% below free water"}},
		// The noise floor (issue 15; Gudbjartsson & Patz, MRM
		// 1995;34:910): a CSF ADC left undefined because its signal is
		// at the floor is an info note; its lower bound above free
		// water by more than the 15% tolerance is still an error (the
		// floor only lowers an ADC), and just inside it is a note.
		{"CSF at the noise floor is a note, not an error", brain(), func(m *analysis.Measures) {
			m.CSFADC, m.CSFADCLowerBound, m.CSFDWSignalSigmas = math.NaN(), 1.6e-3, 1.2
			m.CSFNote = "CSF ADC not measurable at b = 1500: signal at the noise floor"
		}, []string{"CSF ADC not measurable at b = 1500: signal at the noise floor: the CSF check against free water was not made"}},
		{"a CSF lower bound 16% above free water is an error", brain(), func(m *analysis.Measures) {
			m.CSFADC, m.CSFADCLowerBound = math.NaN(), 3.0e-3*1.16
			m.CSFNote = "CSF ADC not measurable at b = 1500: signal at the noise floor"
		}, []string{"CSF ADC is at least 3.48e-3"}},
		{"a CSF lower bound 14% above free water is a note", brain(), func(m *analysis.Measures) {
			m.CSFADC, m.CSFADCLowerBound = math.NaN(), 3.0e-3*1.14
			m.CSFNote = "CSF ADC not measurable at b = 1500: signal at the noise floor"
		}, []string{"not measurable"}},
		{"CSF is not judged when the mask holds too little of it", brain(), func(m *analysis.Measures) { m.CSFADC, m.ParenchymaVoxels = 0.9e-3, 980 }, nil},
		{"tissue above free water beyond 2% is a warning", brain(), func(m *analysis.Measures) { m.FractionAboveFreeWater = 0.05 },
			[]string{"5.0% of tissue voxels have an ADC above the free-water ceiling"}},
		{"negative ADC beyond 5% is a warning", brain(), func(m *analysis.Measures) { m.FractionNegative = 0.2 },
			[]string{"20.0% of tissue voxels have a negative ADC"}},
		{"an unmatched series is held to physics only", unitSeries("mystery", g, unitVolume(g, 0, dwi.Direction{}), unitVolume(g, 1000, dwi.Direction{})),
			func(m *analysis.Measures) { m.ParenchymaMedianADC, m.CSFADC, m.FractionNegative = 2e-3, 1e-3, 0.5 },
			[]string{"negative ADC"}},
		{"a phantom series is not judged by tissue ranges", unitSeries("ice water qa", g, unitVolume(g, 0, dwi.Direction{}), unitVolume(g, 1000, dwi.Direction{})),
			func(m *analysis.Measures) { m.ParenchymaMedianADC, m.CSFADC, m.FractionNegative = 1.1e-3, 1.1e-3, 0.5 }, nil},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			cfg := rules.DefaultConfig()
			m := normalMeasures()
			c.edit(&m)
			fs := run(t, rules.NewADCOutOfRange(), computed(cfg, c.series, m), cfg)
			if len(fs) != len(c.want) {
				t.Fatalf("want %d findings, got %s", len(c.want), describe(fs))
			}
			for i, w := range c.want {
				if !strings.Contains(fs[i].Message, w) {
					t.Errorf("message %q lacks %q", fs[i].Message, w)
				}
			}
		})
	}
}

func TestLowSNROnHandBuiltMeasures(t *testing.T) {
	g := grid(4)
	s := unitSeries("DWI", g, unitVolume(g, 0, dwi.Direction{}), unitVolume(g, 1000, dwi.Direction{}))
	cfg := rules.DefaultConfig()
	m := normalMeasures()
	m.B0SNR, m.HighBTissueSNR = 8, 2.5
	fs := run(t, rules.NewLowSNR(), computed(cfg, s, m), cfg)
	if len(fs) != 2 || fs[0].Severity != rules.SeverityWarning || fs[1].Severity != rules.SeverityError {
		t.Fatalf("got %s", describe(fs))
	}
	// (1/b)·sqrt(1/8² + 1/2.5²) = 0.42e-3 at b = 1000 (noise through
	// ln(S0/Sb)/b, the model in docs/references.md#mono-exponential).
	if !strings.Contains(fs[0].Message, "±0.42e-3 mm²/s") {
		t.Errorf("message %q lacks the ADC spread", fs[0].Message)
	}
}

// mapSeries is a series with a scanner ADC map whose pixels are
// stored as pixel, with rwv as its Real World Value Mapping (nil: none),
// and a recomputed ADC of 0.7e-3 everywhere.
func mapSeries(cfg *rules.Config, pixel float32, rwv []dwi.RealWorldValue) *rules.Study {
	g := grid(10)
	s := unitSeries("DWI", g, unitVolume(g, 0, dwi.Direction{}), unitVolume(g, 1000, dwi.Direction{}))
	m := unitVolume(g, 1000, dwi.Direction{})
	m.Kind = dwi.KindADC
	n := unitPixels * unitPixels
	for _, f := range m.Slices {
		f.Kind, f.RealWorld, f.RescaleSlope = dwi.KindADC, rwv, 1
		f.Pixels = make([]float32, n)
		for i := range f.Pixels {
			f.Pixels[i] = pixel
		}
	}
	s.Maps = []*dwi.Volume{m}
	res := &analysis.Result{Series: s, Measures: normalMeasures(), ADC: adc.NewVolume3(unitPixels, unitPixels, len(g)), Mask: make([]bool, n*len(g))}
	for i := range res.ADC.Data {
		res.ADC.Data[i], res.Mask[i] = 0.7e-3, true // the worked values of the white matter in docs/references.md#brain-adc (Helenius 2002)
	}
	return &rules.Study{StudyUID: "1.2.3", Series: []*rules.SeriesAudit{rules.NewSeriesAudit(cfg, s, res, nil)}}
}

func TestScannerADCUnitsComeFromTheMappingOrTheConfiguration(t *testing.T) {
	cases := []struct {
		name  string
		pixel float32
		rwv   []dwi.RealWorldValue
		units string // default_units; "" keeps the shipped one
		fires bool
	}{
		{"integers in 1e-6 mm²/s without a mapping agree under the default units", 700, nil, "", false},
		{"the same integers read as um2/s agree", 700, nil, "um2/s", false},
		{"the same integers read as mm2/s disagree a millionfold", 700, nil, "mm2/s", true},
		// PS3.3 C.7.6.16.2.11: value = slope × stored + intercept, units
		// (0040,08EA) UCUM.
		{"a mapping with slope 1e-6 in mm2/s agrees", 700, []dwi.RealWorldValue{{Slope: 1e-6, Units: "mm2/s"}}, "", false},
		{"a mapping with slope 1e-5 in mm2/s disagrees tenfold", 700, []dwi.RealWorldValue{{Slope: 1e-5, Units: "mm2/s"}}, "", true},
		{"a map 5% off is within the 8% tolerance", 735, nil, "", false},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			cfg := rules.DefaultConfig()
			if c.units != "" {
				cfg.Thresholds.ScannerADC.DefaultUnits = c.units
			}
			fs := run(t, rules.NewScannerADCDisagrees(), mapSeries(cfg, c.pixel, c.rwv), cfg)
			if (len(fs) > 0) != c.fires {
				t.Fatalf("fires %v, want %v: %s", len(fs) > 0, c.fires, describe(fs))
			}
			if c.fires && math.Abs(fs[0].Expected.(float64)-0.7e-3) > 1e-9 {
				t.Errorf("expected %v, want the recomputed 0.7e-3", fs[0].Expected)
			}
		})
	}
}

// panicky is a rule that panics, for Run's recovery.
type panicky struct{}

func (panicky) ID() string                                        { return "panicky" }
func (panicky) Check(*rules.Study, *rules.Config) []rules.Finding { panic("index out of range") }

func TestRunKeepsGoingWhenARulePanics(t *testing.T) {
	g := grid(4)
	cfg := rules.DefaultConfig()
	st := unitStudy(cfg, unitSeries("DWI", g, unitVolume(g, 1000, dwi.Direction{})))
	fs := rules.Run([]rules.Rule{panicky{}, rules.NewMissingB0()}, st, cfg)
	if len(fs) != 2 || fs[0].Rule != rules.IDAuditFailed || fs[1].Rule != rules.IDMissingB0 {
		t.Fatalf("got %s", describe(fs))
	}
	if !strings.Contains(fs[0].Message, "rule panicky failed") || fs[0].SeriesUID != "1.2.3.4" || fs[0].StudyUID != "1.2.3" {
		t.Errorf("audit-failed finding %+v", fs[0])
	}
}

func TestRunSkipsDisabledRulesAndAppliesSeverities(t *testing.T) {
	g := grid(4)
	off, info := false, rules.SeverityInfo
	cfg := rules.DefaultConfig()
	cfg.Rules = map[string]rules.RuleSettings{rules.IDBValueMismatch: {Enabled: &off}, rules.IDMissingB0: {Severity: &info}}
	st := unitStudy(cfg, unitSeries("DWI", g, unitVolume(g, 1000, dirZ)))
	fs := rules.Run([]rules.Rule{rules.NewMissingB0(), rules.NewBValueMismatch()}, st, cfg)
	if len(fs) != 1 || fs[0].Rule != rules.IDMissingB0 || fs[0].Severity != rules.SeverityInfo {
		t.Fatalf("got %s", describe(fs))
	}
}

func TestAuditFailedNamesTheSeriesEvenWithoutAnAssembly(t *testing.T) {
	err := &dwi.SeriesError{SeriesInstanceUID: "1.2.9", SeriesNumber: 4, Err: dwi.ErrMissingGeometry}
	f := rules.AuditFailed(&rules.SeriesAudit{Err: err}, "image geometry missing")
	if f.Rule != rules.IDAuditFailed || f.Severity != rules.SeverityWarning || f.SeriesUID != "1.2.9" || f.SeriesNumber != 4 ||
		!strings.Contains(f.Message, "image geometry missing") || f.Measured != "image geometry missing" {
		t.Errorf("finding %+v", f)
	}
}

func TestAllHoldsEveryRuleOnce(t *testing.T) {
	want := []string{rules.IDMissingB0, rules.IDBValueMismatch, rules.IDUnknownDirections, rules.IDIncompleteSeries, rules.IDGeometryMismatch, rules.IDADCOutOfRange,
		rules.HotspotID, rules.IDLowSNR, rules.IDScannerADCDisagrees, rules.IDPhantomADCBias} // issue 5's rule list, audit-failed aside
	var got []string
	for _, r := range rules.All() {
		got = append(got, r.ID())
	}
	if !slices.Equal(got, want) {
		t.Errorf("All() = %v, want %v", got, want)
	}
}

// frameAt is a hand-built image at slice position z with b-value b and,
// when dir is not zero, a gradient direction; pixels all v.
func frameAt(uid string, z, b float64, dir dwi.Direction, v float32) dwi.Frame {
	f := dwi.Frame{SOPInstanceUID: uid, StudyInstanceUID: "1.2.3", SeriesInstanceUID: "1.2.3.4", SeriesNumber: 7, SeriesDescription: "DWI",
		BValue: b, HasBValue: true, Geometry: unitGeometry(z), Pixels: make([]float32, unitPixels*unitPixels)}
	if b == 0 {
		f.Directionality = dwi.DirectionalityNone
	}
	if dir != (dwi.Direction{}) {
		f.Directionality, f.Gradient, f.HasGradient = dwi.DirectionalityDirectional, dir, true
	}
	for i := range f.Pixels {
		f.Pixels[i] = v
	}
	return f
}

func TestUnknownDirectionsOnAssembledSeries(t *testing.T) {
	g := grid(3)
	build := func(dirs []dwi.Direction) []dwi.Frame {
		var fs []dwi.Frame
		for z, p := range g {
			fs = append(fs, frameAt(fmt.Sprintf("1.2.3.4.%d.0", z), p, 0, dwi.Direction{}, 1000))
			for k, d := range dirs {
				fs = append(fs, frameAt(fmt.Sprintf("1.2.3.4.%d.%d", z, k+1), p, 999.9979999999283, d, 400+float32(k)))
			}
		}
		return fs
	}
	cases := []struct {
		name  string
		dirs  []dwi.Direction
		want  int // findings
		words []string
	}{
		// PS3.3 C.8.13.5.9: a DIRECTIONAL image gives its Diffusion
		// Gradient Orientation; these give none, and no ISOTROPIC label.
		{"three weighted images per slice without direction are a warning", make([]dwi.Direction, 3), 1,
			[]string{"b = 1000 s/mm²: 9 images, up to 3 on one slice", "geometric mean", "ADC may be wrong"}},
		{"one weighted image per slice without direction is the trace, with nothing to say", make([]dwi.Direction, 1), 0, nil},
		{"three directions given are silent", []dwi.Direction{dirX, dirY, dirZ}, 0, nil},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s, err := dwi.AssembleSeries(build(c.dirs), dwi.DefaultTolerances())
			if err != nil {
				t.Fatal(err)
			}
			cfg := rules.DefaultConfig()
			fs := run(t, rules.NewUnknownDirections(), unitStudy(cfg, s), cfg)
			if len(fs) != c.want {
				t.Fatalf("%d findings, want %d: %s", len(fs), c.want, describe(fs))
			}
			for _, f := range fs {
				if f.Rule != rules.IDUnknownDirections || f.Severity != rules.SeverityWarning || f.Measured != 9.0 {
					t.Errorf("finding %+v", f)
				}
				for _, w := range c.words {
					if !strings.Contains(f.Message, w) {
						t.Errorf("message %q lacks %q", f.Message, w)
					}
				}
				if strings.Contains(f.Message, "999.99") {
					t.Errorf("message %q shows a measured b-value, not the nominal one", f.Message)
				}
			}
		})
	}
}
