package analysis

import (
	"errors"
	"math"
	"math/rand/v2"
	"strconv"
	"strings"
	"testing"

	"dwiaudit/audit/adc"
	"dwiaudit/audit/dwi"
)

// volSpec is one volume of an in-memory series: pixel(z, row, col) gives
// its value; missing lists slices it lacks.
type volSpec struct {
	b         float64
	dir       dwi.Direction // zero for isotropic
	kind      dwi.MapKind
	pixel     func(z, r, c int) float32
	missing   map[int]bool
	encapsule bool
}

// memSeries builds a dwi.Series the way assembly would, without DICOM:
// volumes on a common grid of nslices positions 4 mm apart.
func memSeries(rows, cols, nslices int, specs ...volSpec) *dwi.Series {
	s := &dwi.Series{
		SeriesInstanceUID: "2.25.1",
		Reference:         dwi.Geometry{Rows: rows, Columns: cols, PixelSpacing: [2]float64{1, 1}, Known: true},
		Normal:            [3]float64{0, 0, 1},
	}
	for z := range nslices {
		s.Grid = append(s.Grid, 4*float64(z))
	}
	for k, sp := range specs {
		v := &dwi.Volume{BValue: sp.b, Direction: sp.dir, Isotropic: sp.dir == (dwi.Direction{}), Kind: sp.kind, SeriesUID: s.SeriesInstanceUID}
		for z := range nslices {
			if sp.missing[z] {
				v.Slices = append(v.Slices, nil)
				continue
			}
			f := &dwi.Frame{
				SOPInstanceUID: "2.25.1." + strconv.Itoa(k) + "." + strconv.Itoa(z),
				BValue:         sp.b, HasBValue: true,
				Geometry:     dwi.Geometry{Rows: rows, Columns: cols, Position: [3]float64{0, 0, s.Grid[z]}, Known: true},
				Encapsulated: sp.encapsule,
			}
			if !sp.encapsule {
				f.Pixels = make([]float32, rows*cols)
				for r := range rows {
					for c := range cols {
						f.Pixels[r*cols+c] = sp.pixel(z, r, c)
					}
				}
			}
			if sp.encapsule {
				s.Facts.Encapsulated = true
			}
			v.Slices = append(v.Slices, f)
		}
		if sp.kind == dwi.KindAcquired {
			s.Volumes = append(s.Volumes, v)
		} else {
			s.Maps = append(s.Maps, v)
		}
	}
	return s
}

func constant(v float64) func(z, r, c int) float32 {
	return func(int, int, int) float32 { return float32(v) }
}

var (
	dirX = dwi.Direction{1, 0, 0}
	dirY = dwi.Direction{0, 1, 0}
	dirZ = dwi.Direction{0, 0, 1}
)

// TestAnalyzeWorkedExample runs the worked example in docs/references.md#worked-example through the
// whole glue: S0 = 1000, Sb = 367.879 at b = 1000.
func TestAnalyzeWorkedExample(t *testing.T) {
	s := memSeries(8, 8, 2,
		volSpec{b: 0, pixel: constant(1000)},
		volSpec{b: 1000, pixel: constant(367.879)},
	)
	res, err := Analyze(s, DefaultAnalyzeConfig())
	if err != nil || res.CannotCompute != "" {
		t.Fatalf("Analyze: %v, cannot compute %q", err, res.CannotCompute)
	}
	exact := math.Log(1000/float64(float32(367.879))) / 1000
	for i, v := range res.ADC.Data {
		// docs/references.md#worked-example. The map is float32: the bound is one
		// float32 rounding of the float64 result (6e-8 relative); the
		// 1e-9 check of the kernel itself is in package adc.
		if rel := math.Abs(float64(v)-exact) / exact; rel > 1e-7 {
			t.Fatalf("ADC[%d] = %.9g, want %.12g", i, v, exact)
		}
		if math.Abs(float64(res.EADC.Data[i])-math.Exp(-1)) > 5e-5 { // docs/references.md#worked-example: eADC 0.3679 = exp(-1)
			t.Fatalf("eADC[%d] = %.7g, want exp(-1)", i, res.EADC.Data[i])
		}
	}
	if res.Method != ADCTwoPoint {
		t.Errorf("method = %v, want two-point for two b-values", res.Method)
	}
}

// TestAnalyzeTraceOfDirections checks that, with directional images
// only, the trace is their geometric mean and the ADC is mean(D):
// (Sx·Sy·Sz)^(1/3) = S0·exp(-b·Tr(D)/3) (docs/references.md#basser-pierpaoli; Basser &
// Pierpaoli).
func TestAnalyzeTraceOfDirections(t *testing.T) {
	const s0, b = 900.0, 1000.0
	d := [3]float64{1.0e-3, 0.55e-3, 0.55e-3} // a fibre along x; mean 0.70e-3 (Helenius 2002 WM, docs/references.md#helenius-2002)
	mean := (d[0] + d[1] + d[2]) / 3
	s := memSeries(8, 8, 3,
		volSpec{b: 0, pixel: constant(s0)},
		volSpec{b: b, dir: dirX, pixel: constant(s0 * math.Exp(-b*d[0]))},
		volSpec{b: b, dir: dirY, pixel: constant(s0 * math.Exp(-b*d[1]))},
		volSpec{b: b, dir: dirZ, pixel: constant(s0 * math.Exp(-b*d[2]))},
	)
	res, err := Analyze(s, DefaultAnalyzeConfig())
	if err != nil || res.CannotCompute != "" {
		t.Fatalf("Analyze: %v, cannot compute %q", err, res.CannotCompute)
	}
	hb := res.HighB[0]
	if hb.Source != TraceGeometricMean || hb.Directions != 3 {
		t.Errorf("trace from %v of %d directions, want the geometric mean of 3", hb.Source, hb.Directions)
	}
	want := s0 * math.Exp(-b*mean) // the model's trace, Basser & Pierpaoli via docs/references.md#basser-pierpaoli
	for i, v := range hb.Trace.Data {
		if rel := math.Abs(float64(v)-want) / want; rel > 3e-7 {
			t.Fatalf("trace[%d] = %.9g, model %.9g", i, v, want)
		}
		if rel := math.Abs(float64(res.ADC.Data[i])-mean) / mean; rel > 1e-5 {
			t.Fatalf("ADC[%d] = %.7g, want mean D %.7g", i, res.ADC.Data[i], mean)
		}
	}
}

func TestAnalyzePrefersTheIsotropicImage(t *testing.T) {
	// The scanner's trace says 0.8e-3; the directions, if used, would give
	// 1.0e-3. The isotropic image wins.
	s := memSeries(8, 8, 2,
		volSpec{b: 0, pixel: constant(1000)},
		volSpec{b: 1000, dir: dirX, pixel: constant(1000 * math.Exp(-1))},
		volSpec{b: 1000, dir: dirY, pixel: constant(1000 * math.Exp(-1))},
		volSpec{b: 1000, dir: dirZ, pixel: constant(1000 * math.Exp(-1))},
		volSpec{b: 1000, pixel: constant(1000 * math.Exp(-0.8))},
	)
	res, err := Analyze(s, DefaultAnalyzeConfig())
	if err != nil || res.CannotCompute != "" {
		t.Fatalf("Analyze: %v, cannot compute %q", err, res.CannotCompute)
	}
	if res.HighB[0].Source != TraceIsotropic {
		t.Errorf("trace source = %v, want the isotropic image", res.HighB[0].Source)
	}
	if got := res.ADC.Data[0]; math.Abs(float64(got)-0.8e-3) > 1e-9 { // model, docs/references.md#mono-exponential
		t.Errorf("ADC = %g, want 0.8e-3 from the isotropic image", got)
	}
}

// TestAnalyzeMultiB checks the weighted fit on noiseless data of four
// b-values: it returns the true ADC (mono-exponential model, docs/references.md#mono-exponential).
func TestAnalyzeMultiB(t *testing.T) {
	const s0, d = 1200.0, 0.89e-3 // Helenius 2002 cortical GM, docs/references.md#helenius-2002
	var specs []volSpec
	for _, b := range []float64{0, 500, 1000, 1500} {
		specs = append(specs, volSpec{b: b, pixel: constant(s0 * math.Exp(-b*d))})
	}
	res, err := Analyze(memSeries(8, 8, 2, specs...), DefaultAnalyzeConfig())
	if err != nil || res.CannotCompute != "" {
		t.Fatalf("Analyze: %v, cannot compute %q", err, res.CannotCompute)
	}
	if res.Method != ADCWLS || len(res.HighB) != 3 || res.Measures.HighB != 1500 {
		t.Errorf("method %v with %d high b-values up to %g, want WLS over 3 up to 1500", res.Method, len(res.HighB), res.Measures.HighB)
	}
	for i, v := range res.ADC.Data {
		if rel := math.Abs(float64(v)-d) / d; rel > 1e-5 {
			t.Fatalf("ADC[%d] = %.7g, want %.7g", i, v, d)
		}
	}
}

func TestAnalyzeCannotCompute(t *testing.T) {
	b0 := volSpec{b: 0, pixel: constant(1000)}
	b1000 := volSpec{b: 1000, pixel: constant(400)}
	cases := []struct {
		name   string
		series *dwi.Series
		reason string
	}{
		{name: "a series without b0 says so", series: memSeries(8, 8, 2, b1000), reason: "no b0"},
		{name: "a series whose lowest b is 500 has no b0", series: memSeries(8, 8, 2, volSpec{b: 500, pixel: constant(600)}, b1000), reason: "no b0"},
		{name: "a single b-value cannot give ADC", series: memSeries(8, 8, 2, b0), reason: "one b-value"},
		{name: "compressed pixel data is not guessed", series: memSeries(8, 8, 2, b0, volSpec{b: 1000, pixel: constant(400), encapsule: true}), reason: "compressed"},
		{name: "scanner maps alone are not diffusion images", series: memSeries(8, 8, 2, volSpec{b: 1000, kind: dwi.KindADC, pixel: constant(800)}), reason: "no acquired"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			res, err := Analyze(c.series, DefaultAnalyzeConfig())
			if err != nil {
				t.Fatalf("Analyze: %v", err)
			}
			if !strings.Contains(res.CannotCompute, c.reason) {
				t.Errorf("CannotCompute = %q, want it to mention %q", res.CannotCompute, c.reason)
			}
			if res.ADC != nil || !math.IsNaN(res.Measures.ParenchymaMedianADC) {
				t.Errorf("a series that cannot be computed has an ADC map or measures")
			}
		})
	}
	t.Run("images of another size are reported", func(t *testing.T) {
		s := memSeries(8, 8, 2, b0, b1000)
		s.Volumes[1].Slices[1].Pixels = make([]float32, 10)
		res, err := Analyze(s, DefaultAnalyzeConfig())
		if err != nil || !strings.Contains(res.CannotCompute, "pixels") {
			t.Errorf("Analyze: %v, CannotCompute %q, want a size mismatch", err, res.CannotCompute)
		}
	})
	t.Run("pixels not loaded are reported", func(t *testing.T) {
		s := memSeries(8, 8, 2, b0, b1000)
		s.Volumes[0].Slices[0].Pixels = nil
		res, err := Analyze(s, DefaultAnalyzeConfig())
		if err != nil || !strings.Contains(res.CannotCompute, "not loaded") {
			t.Errorf("Analyze: %v, CannotCompute %q, want pixels not loaded", err, res.CannotCompute)
		}
	})
}

func TestAnalyzeErrors(t *testing.T) {
	if _, err := Analyze(nil, DefaultAnalyzeConfig()); !errors.Is(err, errNoSeries) {
		t.Errorf("Analyze(nil) error = %v, want errNoSeries", err)
	}
	cfg := AnalyzeConfig{CSFPercentile: 120, ParenchymaADCMax: -1, FreeWaterCeiling: math.NaN(), SignalFloor: -1, ReferenceBMax: -5}
	err := cfg.Validate()
	if !errors.Is(err, errInvalidConfig) {
		t.Fatalf("Validate error = %v, want errInvalidConfig", err)
	}
	for _, field := range []string{"ParenchymaADCMax", "CSFPercentile", "FreeWaterCeiling", "SignalFloor", "ReferenceBMax", "Mask"} {
		if !strings.Contains(err.Error(), field) {
			t.Errorf("Validate error does not name %s: %v", field, err)
		}
	}
	if err := DefaultAnalyzeConfig().Validate(); err != nil {
		t.Errorf("default config invalid: %v", err)
	}
}

// TestAnalyzeMissingSliceIsNaN: a slice missing from one direction leaves
// that slice of the computed trace, and so of the ADC, undefined.
func TestAnalyzeMissingSliceIsNaN(t *testing.T) {
	s := memSeries(8, 8, 3,
		volSpec{b: 0, pixel: constant(1000)},
		volSpec{b: 1000, dir: dirX, pixel: constant(500)},
		volSpec{b: 1000, dir: dirY, pixel: constant(500), missing: map[int]bool{1: true}},
		volSpec{b: 1000, dir: dirZ, pixel: constant(500)},
	)
	res, err := Analyze(s, DefaultAnalyzeConfig())
	if err != nil || res.CannotCompute != "" {
		t.Fatalf("Analyze: %v, cannot compute %q", err, res.CannotCompute)
	}
	for z := range 3 {
		v := res.ADC.Slice(z)[0]
		if (z == 1) != math.IsNaN(float64(v)) {
			t.Errorf("slice %d: ADC %g; want NaN only on the missing slice 1", z, v)
		}
	}
}

// headSpec makes a noisy elliptical head: white matter inside, a CSF rim,
// Rician noise of sigma (Gudbjartsson & Patz 1995, via docs/references.md#gudbjartsson-patz-1995).
type headSpec struct {
	rows, cols, slices int
	sigma              float64
	seed               uint64
}

// tissueAt returns S0 and ADC at (r, c): WM 600 / 0.70e-3 (Helenius 2002
// via docs/references.md#helenius-2002), a CSF shell 2000 / 3.0e-3 (near free water at 37 C,
// Holz 2000 via docs/references.md#holz-2000), or background.
func (h headSpec) tissueAt(r, c int) (s0, d float64) {
	y := (float64(r) - float64(h.rows-1)/2) / (0.40 * float64(h.rows))
	x := (float64(c) - float64(h.cols-1)/2) / (0.33 * float64(h.cols))
	e := math.Hypot(x, y)
	switch {
	case e < 0.85:
		return 600, 0.70e-3
	case e < 1:
		return 2000, 3.0e-3
	}
	return 0, 0
}

// volumes returns the b0, three directions and their trace at b = 1000,
// the layout of BenchmarkAnalyze256x256x60.
func (h headSpec) volumes() []volSpec {
	rng := rand.New(rand.NewPCG(h.seed, 99))
	noisy := func(b float64) func(z, r, c int) float32 {
		return func(z, r, c int) float32 {
			s0, d := h.tissueAt(r, c)
			s := s0 * math.Exp(-b*d)
			return float32(math.Hypot(s+h.sigma*rng.NormFloat64(), h.sigma*rng.NormFloat64()))
		}
	}
	return []volSpec{
		{b: 0, pixel: noisy(0)},
		{b: 1000, dir: dirX, pixel: noisy(1000)},
		{b: 1000, dir: dirY, pixel: noisy(1000)},
		{b: 1000, dir: dirZ, pixel: noisy(1000)},
		{b: 1000, pixel: noisy(1000)},
	}
}

// TestAnalyzeMeasuresOfASimpleHead checks the measures against a head
// whose truth is known: WM 0.70e-3 and CSF 3.0e-3, b0 SNR 600/σ.
func TestAnalyzeMeasuresOfASimpleHead(t *testing.T) {
	h := headSpec{rows: 96, cols: 96, slices: 6, sigma: 10, seed: 5}
	res, err := Analyze(memSeries(h.rows, h.cols, h.slices, h.volumes()...), DefaultAnalyzeConfig())
	if err != nil || res.CannotCompute != "" {
		t.Fatalf("Analyze: %v, cannot compute %q", err, res.CannotCompute)
	}
	m := res.Measures
	if math.Abs(m.ParenchymaMedianADC-0.70e-3)/0.70e-3 > 0.02 { // Helenius 2002 WM via docs/references.md#helenius-2002, the head's truth
		t.Errorf("parenchyma median ADC = %.4g, want 0.70e-3 within 2%%", m.ParenchymaMedianADC)
	}
	if m.CSFADC < 2.7e-3 || m.CSFADC > 3.4e-3 { // CSF truth 3.0e-3, high percentile; docs/references.md#csf-reference: about 3e-3
		t.Errorf("CSF ADC = %.4g, want about 3.0e-3", m.CSFADC)
	}
	if snr := 600 / h.sigma; math.Abs(m.B0SNR-snr)/snr > 0.10 { // the head's chosen SNR; NEMA-style background method
		t.Errorf("b0 SNR = %.1f, want %.0f within 10%% (noise %+v)", m.B0SNR, snr, m.Noise)
	}
	if snr := 600 * math.Exp(-0.7) / h.sigma; math.Abs(m.HighBTissueSNR-snr)/snr > 0.10 {
		t.Errorf("high-b SNR = %.1f, want %.1f within 10%%", m.HighBTissueSNR, snr)
	}
	if m.FractionNegative != 0 || m.FractionAboveFreeWater > 0.05 {
		t.Errorf("fractions negative %.3g, above free water %.3g; want 0 and a few percent at most", m.FractionNegative, m.FractionAboveFreeWater)
	}
	if m.TissueVoxels == 0 || m.ParenchymaVoxels == 0 || m.ParenchymaVoxels > m.TissueVoxels {
		t.Errorf("voxels: tissue %d, parenchyma %d", m.TissueVoxels, m.ParenchymaVoxels)
	}
}

func TestAnalyzeNoiseFromRepeatedB0(t *testing.T) {
	h := headSpec{rows: 64, cols: 64, slices: 4, sigma: 8, seed: 6}
	vols := h.volumes()
	repeat := h
	repeat.seed = 7
	vols = append(vols, volSpec{b: 0, pixel: repeat.volumes()[0].pixel})
	s := memSeries(h.rows, h.cols, h.slices, vols...)
	// Zero the background of both b0s, as a scanner that masks air
	// would: only the difference method can still see the noise.
	for _, v := range s.Volumes {
		if v.BValue != 0 {
			continue
		}
		for _, f := range v.Slices {
			for i := range f.Pixels {
				if s0, _ := h.tissueAt(i/h.cols, i%h.cols); s0 == 0 {
					f.Pixels[i] = 0
				}
			}
		}
	}
	res, err := Analyze(s, DefaultAnalyzeConfig())
	if err != nil || res.CannotCompute != "" {
		t.Fatalf("Analyze: %v, cannot compute %q", err, res.CannotCompute)
	}
	n := res.Measures.Noise
	if n.Method != adc.NoiseDifference || math.Abs(n.Sigma-h.sigma)/h.sigma > 0.05 { // NEMA MS 1-2008 difference method (from memory)
		t.Errorf("noise = %+v, want sigma %g by the difference method", n, h.sigma)
	}
}
