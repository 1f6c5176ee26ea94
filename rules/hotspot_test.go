package rules

import (
	"fmt"
	"math"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"dwiaudit/audit/adc"
	"dwiaudit/audit/analysis"
	"dwiaudit/audit/dwi"
	"dwiaudit/audit/header"
	"dwiaudit/audit/phantom"
)

// hotspotBuildStudy writes a phantom study into dir, reads every file
// back with the audit's reader (pixels loaded), assembles the study,
// computes every diffusion series and wraps it for the rules. It
// returns the study as written too, for its Truth. (The tests of the
// other rules use loadPhantomStudy in package rules_test; these tests
// need the rule's internals, so they live in package rules with their
// own loader.) It returns errors instead of failing the test so that
// the sweep can run it on several goroutines.
func hotspotBuildStudy(dir string, opt phantom.Options) (*Study, *phantom.Study, error) {
	st, err := phantom.Write(dir, opt)
	if err != nil {
		return nil, nil, fmt.Errorf("phantom.Write(%+v): %w", opt, err)
	}
	var frames []dwi.Frame
	for _, path := range st.Files {
		f, err := header.ExtractFile(path, header.ExtractOptions{LoadPixels: true})
		if err != nil {
			return nil, nil, fmt.Errorf("ExtractFile(%s): %w", path, err)
		}
		frames = append(frames, f...)
	}
	asm, err := dwi.AssembleStudy(frames, dwi.DefaultTolerances())
	if err != nil {
		return nil, nil, fmt.Errorf("AssembleStudy: %w", err)
	}
	study := &Study{StudyUID: asm.StudyInstanceUID, Assembly: asm}
	for _, s := range asm.Series {
		res, err := analysis.Analyze(s, analysis.DefaultAnalyzeConfig())
		study.Series = append(study.Series, &SeriesAudit{Series: s, Result: res, Err: err})
	}
	if len(study.Series) == 0 {
		return nil, nil, fmt.Errorf("no diffusion series assembled (failed: %v)", asm.Failed)
	}
	return study, st, nil
}

// hotspotPhantomStudy is hotspotBuildStudy in a temporary folder,
// failing the test on error.
func hotspotPhantomStudy(t testing.TB, opt phantom.Options) (*Study, *phantom.Study) {
	t.Helper()
	study, st, err := hotspotBuildStudy(filepath.Join(t.TempDir(), "study"), opt)
	if err != nil {
		t.Fatal(err)
	}
	return study, st
}

// hotspotOverlapsPlanted reports whether a finding's region shares a
// slice with the planted defect and its pixel box overlaps the planted
// box (Truth.Planted: BBox is half-open, the region's box inclusive).
func hotspotOverlapsPlanted(f Finding, d phantom.PlantedDefect) bool {
	if f.Region == nil {
		return false
	}
	shared := false
	for _, z := range f.Region.Slices {
		shared = shared || slices.Contains(d.Slices, z)
	}
	b := f.Region.BoxPixels
	return shared && b[0] < d.BBox.Row1 && b[2] >= d.BBox.Row0 && b[1] < d.BBox.Col1 && b[3] >= d.BBox.Col0
}

func hotspotDescribe(fs []Finding) string {
	if len(fs) == 0 {
		return "no findings"
	}
	var b strings.Builder
	for _, f := range fs {
		fmt.Fprintf(&b, "\n  %s %s series %d: %s", f.Severity, f.Rule, f.SeriesNumber, f.Message)
	}
	return b.String()
}

func hotspotMode(multi bool) string {
	if multi {
		return "multi-frame"
	}
	return "classic"
}

// TestHotspotFiresOnPlantedB0Artifacts: issue 5 acceptance, "each rule
// fires on its planted-defect phantom", classic and multi-frame, three
// seeds, two matrix sizes. The region reported overlaps the planted
// one, says which way the ADC moved, and its numbers hang together.
func TestHotspotFiresOnPlantedB0Artifacts(t *testing.T) {
	cases := []struct {
		c  phantom.Case
		up bool // the b0, and so the ADC, goes up
	}{
		{phantom.CaseB0ArtifactAliasing, true},
		{phantom.CaseB0ArtifactDropout, false},
	}
	for _, c := range cases {
		for _, matrix := range []int{64, 128} {
			for _, multi := range []bool{false, true} {
				for seed := int64(1); seed <= 3; seed++ {
					name := fmt.Sprintf("%s is found at %d×%d %s seed %d", c.c, matrix, matrix, hotspotMode(multi), seed)
					t.Run(name, func(t *testing.T) {
						study, st := hotspotPhantomStudy(t, phantom.Options{Case: c.c, Matrix: matrix, MultiFrame: multi, Seed: seed})
						fs := NewB0OnlyHotspot().Check(study, &Config{})
						if len(fs) != 1 {
							t.Fatalf("%d findings, want 1: %s", len(fs), hotspotDescribe(fs))
						}
						f := fs[0]
						planted := st.Truth.Planted[0]
						if !hotspotOverlapsPlanted(f, planted) {
							t.Fatalf("region slices %v box %v, planted slices %v box %+v", f.Region.Slices, f.Region.BoxPixels, planted.Slices, planted.BBox)
						}
						sa := study.Series[0]
						if f.Rule != HotspotID || f.SeriesUID != sa.Series.SeriesInstanceUID || f.StudyUID != study.StudyUID {
							t.Errorf("finding names rule %q series %q study %q", f.Rule, f.SeriesUID, f.StudyUID)
						}
						// docs/references.md#b0-only-artifacts: k = 0.6 gives -0.51e-3 at b = 1000, the
						// aliasing's k ≈ 1.67 +0.51e-3; both beyond
						// ErrorADCShift at the region's median.
						if f.Severity != SeverityError {
							t.Errorf("severity %v, want error for a shift of %v", f.Severity, f.Measured.(float64)-f.Expected.(float64))
						}
						in, around := f.Measured.(float64), f.Expected.(float64)
						if up := in > around; up != c.up {
							t.Errorf("ADC inside %.3g, around %.3g: want the ADC %s", in, around, map[bool]string{true: "raised", false: "lowered"}[c.up])
						}
						// The ADC around is normal white matter, 0.70e-3
						// (Helenius 2002, the phantom's truth), within 5%.
						if math.Abs(around-phantom.ADCWhiteMatter) > 0.05*phantom.ADCWhiteMatter {
							t.Errorf("ADC around %.4g, want white matter's %.4g", around, phantom.ADCWhiteMatter)
						}
						r := f.Region
						ps := sa.Series.Reference.PixelSpacing
						if len(r.SlicesMM) != len(r.Slices) || r.SlicesMM[0] != sa.Series.Grid[r.Slices[0]] {
							t.Errorf("slices %v at %v mm, grid %v", r.Slices, r.SlicesMM, sa.Series.Grid)
						}
						if want := [4]float64{float64(r.BoxPixels[0]) * ps[0], float64(r.BoxPixels[1]) * ps[1], float64(r.BoxPixels[2]) * ps[0], float64(r.BoxPixels[3]) * ps[1]}; r.BoxMM != want {
							t.Errorf("box %v mm, want %v from the pixels %v and spacing %v", r.BoxMM, want, r.BoxPixels, ps)
						}
						// At least the MinAreaMM2, at most the box's area
						// over its slices.
						boxArea := float64((r.BoxPixels[2]-r.BoxPixels[0]+1)*(r.BoxPixels[3]-r.BoxPixels[1]+1)*len(r.Slices)) * ps[0] * ps[1]
						if r.AreaMM2 < DefaultHotspotThresholds().MinAreaMM2 || r.AreaMM2 > boxArea {
							t.Errorf("area %v mm², box area %v", r.AreaMM2, boxArea)
						}
						for _, w := range []string{"b0", "DWI", "ADC", "slices"} {
							if !strings.Contains(f.Message, w) {
								t.Errorf("message does not mention %q: %s", w, f.Message)
							}
						}
					})
				}
			}
		}
	}
}

// TestHotspotIsSilentWithoutB0Artifact: issue 5 acceptance, "true
// restriction and T2 shine-through phantoms produce neither
// b0-only-hotspot nor adc-out-of-range" and "no error or warning finding
// appears on clean phantoms", classic and multi-frame, three seeds, two
// matrix sizes; and every other phantom case, whose defects are not on
// the b0 alone, once.
func TestHotspotIsSilentWithoutB0Artifact(t *testing.T) {
	type run struct {
		c      phantom.Case
		matrix int
		multi  bool
		seed   int64
	}
	var runs []run
	for _, c := range []phantom.Case{phantom.CaseClean, phantom.CaseRestrictionLesion, phantom.CaseT2ShineThrough} {
		for _, matrix := range []int{64, 128} {
			for _, multi := range []bool{false, true} {
				for seed := int64(1); seed <= 3; seed++ {
					runs = append(runs, run{c, matrix, multi, seed})
				}
			}
		}
	}
	for _, c := range phantom.Cases() {
		switch c {
		case phantom.CaseClean, phantom.CaseRestrictionLesion, phantom.CaseT2ShineThrough, phantom.CaseB0ArtifactAliasing, phantom.CaseB0ArtifactDropout:
			continue
		}
		runs = append(runs, run{c, 96, false, 4})
	}
	for _, r := range runs {
		t.Run(fmt.Sprintf("%s gives no finding at %d×%d %s seed %d", r.c, r.matrix, r.matrix, hotspotMode(r.multi), r.seed), func(t *testing.T) {
			study, _ := hotspotPhantomStudy(t, phantom.Options{Case: r.c, Matrix: r.matrix, MultiFrame: r.multi, Seed: r.seed})
			if fs := NewB0OnlyHotspot().Check(study, &Config{}); len(fs) != 0 {
				t.Fatalf("%s", hotspotDescribe(fs))
			}
		})
	}
}

// TestHotspotVoxelTestSeparatesTheSignatures runs tests 1-3 of the
// method on the departures each kind of change gives, from the
// mono-exponential model (docs/references.md#b0-only-artifacts: a b0 scaled by k shifts ADC by
// ln(k)/b) and the phantom's tissues (S0 and ADC of physics.go: white
// matter 600 and 0.70e-3, grey matter 800 and 0.89e-3, CSF 2000 and
// 3.0e-3, the restriction lesion 700 and 0.4e-3, the shine-through
// lesion 1800 and 0.8e-3), against a white-matter prediction at
// b = 1000 with no noise allowance.
func TestHotspotVoxelTestSeparatesTheSignatures(t *testing.T) {
	const b = 1000.0
	wm := struct{ s0, adc float64 }{600, 0.70e-3}
	// departures of tissue (s0, adc) against white matter: β, δ, ΔADC.
	tissue := func(s0, adcV float64) (float64, float64, float64) {
		be := math.Log(s0 / wm.s0)
		de := math.Log(s0*math.Exp(-b*adcV)) - math.Log(wm.s0*math.Exp(-b*wm.adc))
		return be, de, adcV - wm.adc
	}
	b0Only := func(k float64) (float64, float64, float64) { return math.Log(k), 0, math.Log(k) / b }
	mix := func(f float64) (float64, float64, float64) { // white matter with a share f of CSF
		s0 := (1-f)*wm.s0 + f*2000
		sb := (1-f)*wm.s0*math.Exp(-b*wm.adc) + f*2000*math.Exp(-b*3.0e-3)
		return tissue(s0, math.Log(s0/sb)/b)
	}
	th := DefaultHotspotThresholds()
	up, down := math.Log(1+th.MinB0Departure), -math.Log(1-th.MinB0Departure)
	type departures struct{ be, de, da float64 }
	d := func(be, de, da float64) departures { return departures{be, de, da} }
	raisedWithLowADC := d(b0Only(1.5))
	raisedWithLowADC.da = -0.3e-3
	cases := []struct {
		name string
		d    departures
		want bool
	}{
		{"a b0 raised by half (wrap-around) is flagged", d(b0Only(1.5)), true},
		{"a b0 at 0.6 (dropout, the example in references.md#b0-only-artifacts) is flagged", d(b0Only(0.6)), true},
		{"a b0 raised by a tenth is below MinB0Departure", d(b0Only(1.1)), false},
		{"true restriction (DWI bright, ADC low, b0 about normal) is not", d(tissue(700, 0.4e-3)), false},
		{"T2 shine-through (b0 and DWI bright, ADC normal) is not", d(tissue(1800, 0.8e-3)), false},
		{"grey matter against white matter is not", d(tissue(800, 0.89e-3)), false},
		{"CSF (b0 bright, DWI dark) is not", d(tissue(2000, 3.0e-3)), false},
		{"white matter with 10% CSF (partial volume) is not", d(mix(0.1)), false},
		{"white matter with 20% CSF is not", d(mix(0.2)), false},
		{"white matter with 50% CSF is not", d(mix(0.5)), false},
		{"a raised b0 with a lowered ADC is not (the change is not b0-borne)", raisedWithLowADC, false},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			if got := hotspotVoxelTest(c.d.be, c.d.de, c.d.da, th, up, down, 0, 0); got != c.want {
				t.Fatalf("β %.3f δ %.3f ΔADC %.3g: flagged %v, want %v", c.d.be, c.d.de, c.d.da, got, c.want)
			}
		})
	}
}

// hotspotSyntheticResult is a computed series made by hand: a
// rows×cols×slices block of uniform white matter (S0 600, ADC
// 0.70e-3 at b = 1000, the phantom's, noiseless) in a circular mask
// filling most of each slice, with the b0 multiplied by k in the box
// rows r0..r1, columns c0..c1 (inclusive) of slices z0..z1. Pixel
// spacing is rowMM by colMM, slices 5 mm apart from -10 mm.
func hotspotSyntheticResult(rows, cols, nz int, rowMM, colMM float64, k float64, box [6]int) *SeriesAudit {
	const s0, adcWM, b = 600.0, 0.70e-3, 1000.0
	n := rows * cols * nz
	b0 := adc.NewVolume3(rows, cols, nz)
	dwiV := adc.NewVolume3(rows, cols, nz)
	adcV := adc.NewVolume3(rows, cols, nz)
	mask := make([]bool, n)
	r0, c0, z0, r1, c1, z1 := box[0], box[1], box[2], box[3], box[4], box[5]
	for z := range nz {
		for r := range rows {
			for c := range cols {
				i := (z*rows+r)*cols + c
				y, x := (float64(r)-float64(rows-1)/2)*rowMM, (float64(c)-float64(cols-1)/2)*colMM
				rad := 0.45 * math.Min(float64(rows)*rowMM, float64(cols)*colMM)
				if x*x+y*y > rad*rad {
					continue
				}
				mask[i] = true
				v0 := s0
				if r >= r0 && r <= r1 && c >= c0 && c <= c1 && z >= z0 && z <= z1 {
					v0 *= k
				}
				sb := s0 * math.Exp(-b*adcWM)
				b0.Data[i], dwiV.Data[i] = float32(v0), float32(sb)
				adcV.Data[i] = float32(math.Log(v0/sb) / b)
			}
		}
	}
	grid := make([]float64, nz)
	for z := range grid {
		grid[z] = -10 + 5*float64(z)
	}
	ser := &dwi.Series{
		StudyInstanceUID: "2.25.1", SeriesInstanceUID: "2.25.2", SeriesNumber: 7, SeriesDescription: "DWI synthetic",
		Grid:      grid,
		Reference: dwi.Geometry{Rows: rows, Columns: cols, PixelSpacing: [2]float64{rowMM, colMM}},
	}
	nan := math.NaN()
	res := &analysis.Result{
		Series: ser, B0: b0, B0Value: 0,
		HighB: []analysis.BImage{{B: b, Trace: dwiV, Source: analysis.TraceIsotropic, Directions: 3}},
		ADC:   adcV, Method: analysis.ADCTwoPoint,
		Mask: mask, Parenchyma: slices.Clone(mask),
		Measures: analysis.Measures{Noise: adc.NoiseEstimate{Sigma: nan}, HighBNoise: adc.NoiseEstimate{Sigma: nan}, HighB: b},
	}
	return &SeriesAudit{Series: ser, Result: res}
}

// TestHotspotReportsTheRegionWhereItIs: on a noiseless synthetic series
// with a rectangular b0-only change, the region is that rectangle
// exactly, in pixels and in millimetres along rows and columns (pixels
// 2 mm apart down the columns and 3 mm along the rows, so that a swap
// shows), with its slices, its area and the departures.
func TestHotspotReportsTheRegionWhereItIs(t *testing.T) {
	box := [6]int{30, 20, 2, 41, 29, 3} // rows 30-41, columns 20-29, slices 2-3
	cases := []struct {
		name   string
		k      float64
		sev    Severity
		pixels [4]int
		mm     [4]float64
		area   float64
	}{
		// The tests run on 3×3 means of the departures, which dilute the
		// change at the rectangle's border: with k = 1.5 (β = 0.405) a
		// corner pixel's mean is 4/9 β = 0.18, just below ln(1.2), so
		// the region is the rectangle less its four corners on each
		// slice: (12×10 − 4) × 2 pixels of 6 mm².
		{"a b0 raised by half is an error: ADC +0.41e-3, beyond ErrorADCShift", 1.5, SeverityError,
			[4]int{30, 20, 41, 29}, [4]float64{60, 60, 82, 87}, (12*10 - 4) * 2 * 6},
		// With k = 0.75 (β = −0.29) the border's 6/9 is −0.19, a change
		// of 17%, below MinB0Departure: the region is the inside of the
		// rectangle, 10×8 pixels on each slice.
		{"a b0 at 0.75 is a warning: ADC -0.29e-3, short of ErrorADCShift", 0.75, SeverityWarning,
			[4]int{31, 21, 40, 28}, [4]float64{62, 63, 80, 84}, 10 * 8 * 2 * 6},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			sa := hotspotSyntheticResult(80, 60, 6, 2, 3, c.k, box)
			study := &Study{StudyUID: "2.25.1", Series: []*SeriesAudit{sa}}
			fs := NewB0OnlyHotspot().Check(study, &Config{})
			if len(fs) != 1 {
				t.Fatalf("%d findings: %s", len(fs), hotspotDescribe(fs))
			}
			f := fs[0]
			r := f.Region
			if !slices.Equal(r.Slices, []int{2, 3}) || !slices.Equal(r.SlicesMM, []float64{0, 5}) {
				t.Errorf("slices %v at %v mm, want [2 3] at [0 5]", r.Slices, r.SlicesMM)
			}
			if r.BoxPixels != c.pixels {
				t.Errorf("box %v, want %v", r.BoxPixels, c.pixels)
			}
			if r.BoxMM != c.mm {
				t.Errorf("box %v mm, want %v (rows ×2 mm, columns ×3 mm)", r.BoxMM, c.mm)
			}
			if r.AreaMM2 != c.area {
				t.Errorf("area %v mm², want %v", r.AreaMM2, c.area)
			}
			if f.Severity != c.sev {
				t.Errorf("severity %v, want %v", f.Severity, c.sev)
			}
			// docs/references.md#b0-only-artifacts: a b0 scaled by k shifts ADC by ln(k)/b.
			wantShift := math.Log(c.k) / 1000
			in, around := f.Measured.(float64), f.Expected.(float64)
			if math.Abs(around-0.70e-3) > 1e-6 || math.Abs(in-around-wantShift) > 1e-6 {
				t.Errorf("ADC %.4g inside, %.4g around; want a shift of %.4g from 0.70e-3", in, around, wantShift)
			}
			if f.SeriesNumber != 7 || f.SeriesUID != "2.25.2" || f.StudyUID != "2.25.1" {
				t.Errorf("finding names series %d %q study %q", f.SeriesNumber, f.SeriesUID, f.StudyUID)
			}
			if !strings.Contains(f.Message, fmt.Sprintf("%+.0f%%", 100*(c.k-1))) || !strings.Contains(f.Message, "slices 2-3") {
				t.Errorf("message: %s", f.Message)
			}
		})
	}
	t.Run("a change smaller than MinAreaMM2 is not reported", func(t *testing.T) {
		sa := hotspotSyntheticResult(80, 60, 6, 2, 3, 1.5, [6]int{30, 20, 2, 32, 22, 2}) // 3×3 pixels, 54 mm²
		if fs := NewB0OnlyHotspot().Check(&Study{Series: []*SeriesAudit{sa}}, &Config{}); len(fs) != 0 {
			t.Fatalf("%s", hotspotDescribe(fs))
		}
	})
	t.Run("the configuration's thresholds are used", func(t *testing.T) {
		sa := hotspotSyntheticResult(80, 60, 6, 2, 3, 1.5, box)
		cfg := &Config{}
		cfg.Thresholds.Hotspot = DefaultHotspotThresholds()
		cfg.Thresholds.Hotspot.MinB0Departure = 0.6 // above the 50% planted
		if fs := NewB0OnlyHotspot().Check(&Study{Series: []*SeriesAudit{sa}}, cfg); len(fs) != 0 {
			t.Fatalf("%s", hotspotDescribe(fs))
		}
	})
	t.Run("a series that could not be computed is left to other rules", func(t *testing.T) {
		sa := hotspotSyntheticResult(80, 60, 6, 2, 3, 1.5, box)
		sa.Result.CannotCompute = "one b-value only"
		if fs := NewB0OnlyHotspot().Check(&Study{Series: []*SeriesAudit{sa, nil}}, nil); len(fs) != 0 {
			t.Fatalf("%s", hotspotDescribe(fs))
		}
		if fs := NewB0OnlyHotspot().Check(nil, nil); fs != nil {
			t.Fatalf("nil study: %s", hotspotDescribe(fs))
		}
	})
}

func TestHotspotThresholdsValidate(t *testing.T) {
	if err := DefaultHotspotThresholds().Validate(); err != nil {
		t.Fatalf("defaults: %v", err)
	}
	bad := HotspotThresholds{MinB0Departure: 1.5, NoiseSigmas: -1, MaxDWIShare: 1, MinADCShift: 0, ErrorADCShift: math.NaN(), MinAreaMM2: -5, EdgeMM: 50, WindowMM: 0}
	err := bad.Validate()
	if err == nil {
		t.Fatal("no error for invalid thresholds")
	}
	for _, key := range []string{"min_b0_departure", "noise_sigmas", "max_dwi_share", "min_adc_shift", "error_adc_shift", "min_area_mm2", "edge_mm", "window_mm"} {
		if !strings.Contains(err.Error(), "thresholds.b0_only_hotspot."+key) {
			t.Errorf("error does not name %s: %v", key, err)
		}
	}
}

// BenchmarkHotspot: the rule on a 256×256×60 series (the brief: well
// under 1 s).
func BenchmarkHotspot(b *testing.B) {
	study, _ := hotspotPhantomStudy(b, phantom.Options{Case: phantom.CaseB0ArtifactAliasing, Matrix: 256, Slices: 60, MultiFrame: true, Seed: 1})
	rule, cfg := NewB0OnlyHotspot(), &Config{}
	b.ReportAllocs()
	for b.Loop() {
		if fs := rule.Check(study, cfg); len(fs) == 0 {
			b.Fatal("the planted aliasing was not found")
		}
	}
}

// TestHotspotCoreSitsOnBothSidesOfItsThickness: a region one pixel
// narrower than the core square has no core (a warning at most, as the
// cortical ribbon), one as wide has (hotspotCoreMM).
func TestHotspotCoreSitsOnBothSidesOfItsThickness(t *testing.T) {
	g := hotspotGeometry{rows: 20, cols: 20, slices: 1, rowMM: 3, colMM: 3}
	r := max(1, int(math.Round(hotspotCoreMM/2/3.0))) // 2 at 3 mm pixels: a 5×5 core
	band := func(width int) []int32 {
		var m []int32
		for y := 4; y < 4+width; y++ {
			for x := 2; x < 18; x++ {
				m = append(m, int32(y*g.cols+x))
			}
		}
		return m
	}
	scratch := make([]bool, g.rows*g.cols)
	if hotspotHasCore(band(2*r), scratch, g, r) {
		t.Errorf("a band %d pixels wide has a %d×%d core", 2*r, 2*r+1, 2*r+1)
	}
	if !hotspotHasCore(band(2*r+1), scratch, g, r) {
		t.Errorf("a band %d pixels wide has no %d×%d core", 2*r+1, 2*r+1, 2*r+1)
	}
	if slices.Contains(scratch, true) {
		t.Error("scratch not left clear")
	}
}

// TestHotspotNoiseFloorSitsOnBothSidesOfItsThreshold: the planted
// aliasing is found while its DWI is above MeasurableSigmas noise σ,
// and not once the floor is raised above the region's DWI (issue 15:
// where the DWI is at the floor, "the DWI did not change" means
// nothing; Gudbjartsson & Patz, MRM 1995;34:910).
func TestHotspotNoiseFloorSitsOnBothSidesOfItsThreshold(t *testing.T) {
	study, _ := hotspotPhantomStudy(t, phantom.Options{Case: phantom.CaseB0ArtifactAliasing, Matrix: 64, Slices: 12, Seed: 1})
	sa := study.Series[0]
	th := DefaultHotspotThresholds()
	regions := detectHotspots(sa.Result, th)
	if len(regions) == 0 || !(regions[0].dwiSigmas > th.MeasurableSigmas) {
		t.Fatalf("regions %+v: want the aliasing found above the floor", regions)
	}
	d := regions[0].dwiSigmas
	th.MeasurableSigmas = 0.5 * d
	if len(detectHotspots(sa.Result, th)) == 0 {
		t.Errorf("floor at %.1f σ, below the region's DWI (%.1f σ): aliasing lost", th.MeasurableSigmas, d)
	}
	th.MeasurableSigmas = 2 * d
	if rs := detectHotspots(sa.Result, th); len(rs) != 0 {
		t.Errorf("floor at %.1f σ, above the region's DWI (%.1f σ): still %d regions", th.MeasurableSigmas, d, len(rs))
	}
}
