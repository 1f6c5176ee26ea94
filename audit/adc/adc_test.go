package adc

import (
	"math"
	"testing"
)

// docs/references.md#worked-example: S0 = 1000, Sb = 367.879 at
// b = 1000 gives ADC = 1.000e-3 mm²/s and eADC = 0.3679 (exact exp(-1)).
const (
	workedS0   = 1000.0
	workedSb   = 367.879
	workedB    = 1000.0
	workedADC  = 1.000e-3
	workedEADC = 0.3679
)

func TestWorkedExample(t *testing.T) {
	exact := math.Log(workedS0/workedSb) / workedB

	t.Run("the float64 kernel gives ln(S0/Sb)/b to 1e-9", func(t *testing.T) {
		got := TwoPointValue(workedS0, workedSb, workedB, 0)
		if rel := math.Abs(got-exact) / exact; rel > 1e-9 { // docs/references.md#worked-example, exact form
			t.Errorf("ADC = %.12g, exact %.12g (relative error %.2g)", got, exact, rel)
		}
		if math.Abs(got-workedADC) > 0.0005e-3 { // docs/references.md#worked-example: 1.000e-3 to four figures
			t.Errorf("ADC = %.6g, want 1.000e-3", got)
		}
	})

	t.Run("the float32 map agrees to float32 precision", func(t *testing.T) {
		// The map stores float32 and reads float32 pixels: 367.879 is
		// itself rounded (relative 3e-8) and the result is rounded once
		// more (6e-8), so 1e-7 relative is the honest bound here; the
		// 1e-9 check above is on the float64 kernel the map applies.
		dst := make([]float32, 1)
		TwoPoint(dst, []float32{workedS0}, []float32{workedSb}, workedB, 0)
		if rel := math.Abs(float64(dst[0])-exact) / exact; rel > 1e-7 { // docs/references.md#worked-example
			t.Errorf("ADC map = %.9g, exact %.12g (relative error %.2g)", dst[0], exact, rel)
		}
	})

	t.Run("eADC is exp(-1) to four figures", func(t *testing.T) {
		dst := make([]float32, 1)
		EADC(dst, []float32{workedS0}, []float32{workedSb})
		if math.Abs(float64(dst[0])-math.Exp(-1)) > 0.00005 { // docs/references.md#worked-example: 0.3679 = exp(-1)
			t.Errorf("eADC = %.7g, want exp(-1) = %.7g", dst[0], math.Exp(-1))
		}
		if math.Abs(float64(dst[0])-workedEADC) > 0.00005 { // docs/references.md#worked-example
			t.Errorf("eADC = %.7g, want 0.3679", dst[0])
		}
	})
}

func TestTwoPoint(t *testing.T) {
	nan := float32(math.NaN())
	cases := []struct {
		name     string
		s0, sb   float32
		b        float64
		floor    float32
		want     float64
		wantNaN  bool
		negative bool
	}{
		{name: "white matter at b 1000 gives 0.70e-3", s0: 1000, sb: float32(1000 * math.Exp(-0.7)), b: 1000, want: 0.70e-3},
		{name: "a DWI brighter than b0 gives a negative ADC", s0: 500, sb: 600, b: 1000, want: math.Log(500.0/600) / 1000, negative: true},
		{name: "S0 at the floor is undefined", s0: 10, sb: 5, b: 1000, floor: 10, wantNaN: true},
		{name: "Sb at the floor is undefined", s0: 100, sb: 10, b: 1000, floor: 10, wantNaN: true},
		{name: "a zero signal is undefined with floor 0", s0: 100, sb: 0, b: 1000, wantNaN: true},
		{name: "a missing voxel (NaN) is undefined", s0: nan, sb: 100, b: 1000, wantNaN: true},
		{name: "b = 0 is undefined", s0: 100, sb: 50, b: 0, wantNaN: true},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dst := make([]float32, 1)
			TwoPoint(dst, []float32{c.s0}, []float32{c.sb}, c.b, c.floor)
			got := float64(dst[0])
			if c.wantNaN {
				if !math.IsNaN(got) {
					t.Errorf("ADC = %g, want NaN", got)
				}
				return
			}
			// Mono-exponential model, docs/references.md#mono-exponential; float32 storage.
			if math.Abs(got-c.want) > 1e-7*math.Abs(c.want) {
				t.Errorf("ADC = %.9g, want %.9g", got, c.want)
			}
			if c.negative != (got < 0) {
				t.Errorf("ADC = %g, negative = %v", got, c.negative)
			}
		})
	}
}

// TestTraceOfOrthogonalDirections checks (Sx·Sy·Sz)^(1/3) =
// S0·exp(-b·Tr(D)/3), which follows from the model (docs/references.md#basser-pierpaoli;
// Basser & Pierpaoli), for an anisotropic voxel whose principal axes lie
// along the gradients.
func TestTraceOfOrthogonalDirections(t *testing.T) {
	cases := []struct {
		name   string
		s0, b  float64
		d      []float64 // diffusivity seen by each direction, mm²/s
		repeat int       // how many times the set of directions is given
	}{
		{name: "white matter fibre along x at b 1000", s0: 1200, b: 1000, d: []float64{1.7e-3, 0.2e-3, 0.2e-3}, repeat: 1},
		{name: "three different diffusivities at b 1000", s0: 1000, b: 1000, d: []float64{0.5e-3, 0.9e-3, 1.6e-3}, repeat: 1},
		{name: "free water is isotropic at b 2000", s0: 1900, b: 2000, d: []float64{3.04e-3, 3.04e-3, 3.04e-3}, repeat: 1},
		{name: "the orthogonal set given twice (six images, log path)", s0: 800, b: 1000, d: []float64{0.5e-3, 0.9e-3, 1.6e-3}, repeat: 2},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			var dirs [][]float32
			var sum float64
			for range c.repeat {
				for _, d := range c.d {
					dirs = append(dirs, []float32{float32(c.s0 * math.Exp(-c.b*d))})
					sum += d
				}
			}
			mean := sum / float64(len(dirs))
			dst := make([]float32, 1)
			GeometricMean(dst, dirs...)
			want := c.s0 * math.Exp(-c.b*mean) // Tr(D)/3 = mean of the directional D, Basser & Pierpaoli via docs/references.md#basser-pierpaoli
			if rel := math.Abs(float64(dst[0])-want) / want; rel > 3e-7 {
				t.Errorf("trace = %.9g, model %.9g (relative %.2g)", dst[0], want, rel)
			}
			adc := make([]float32, 1)
			TwoPoint(adc, []float32{float32(c.s0)}, dst, c.b, 0)
			if rel := math.Abs(float64(adc[0])-mean) / mean; rel > 1e-5 {
				t.Errorf("ADC of the trace = %.6g, want mean D %.6g", adc[0], mean)
			}
		})
	}
}

func TestGeometricMeanEdges(t *testing.T) {
	cases := []struct {
		name    string
		x, y, z float32
		want    float64
		wantNaN bool
	}{
		{name: "a zero input gives zero", x: 0, y: 100, z: 100, want: 0},
		{name: "a negative input is undefined", x: -1, y: 100, z: 100, wantNaN: true},
		{name: "a NaN input propagates", x: float32(math.NaN()), y: 100, z: 100, wantNaN: true},
		{name: "equal inputs return themselves", x: 7, y: 7, z: 7, want: 7},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dst := make([]float32, 1)
			GeometricMean(dst, []float32{c.x}, []float32{c.y}, []float32{c.z})
			if c.wantNaN != math.IsNaN(float64(dst[0])) || (!c.wantNaN && math.Abs(float64(dst[0])-c.want) > 1e-5) {
				t.Errorf("GeometricMean = %g, want %g (NaN %v)", dst[0], c.want, c.wantNaN)
			}
		})
	}
}

func TestFitWLS(t *testing.T) {
	const s0 = 1000.0
	cases := []struct {
		name string
		b    []float64
		adc  float64
	}{
		{name: "white matter over b 0 500 1000 1500", b: []float64{0, 500, 1000, 1500}, adc: 0.70e-3}, // Helenius 2002 WM, docs/references.md#helenius-2002
		{name: "grey matter over b 0 1000 2000", b: []float64{0, 1000, 2000}, adc: 0.89e-3},           // Helenius 2002 cortical GM, docs/references.md#helenius-2002
		{name: "free water at 37 C over b 50 400 800", b: []float64{50, 400, 800}, adc: 3.037e-3},     // Holz 2000 via docs/references.md#holz-2000
		{name: "b-values in any order", b: []float64{1000, 0, 500}, adc: 1.1e-3},                      // ice water, QIBA via docs/references.md#ice-water-phantom
		{name: "two b-values equal the two-point ADC", b: []float64{0, 1000}, adc: 0.75e-3},           // Helenius 2002 deep GM
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			signals := make([][]float32, len(c.b))
			for k, b := range c.b {
				signals[k] = []float32{float32(s0 * math.Exp(-b*c.adc))} // mono-exponential model, docs/references.md#mono-exponential
			}
			dst, s0fit := make([]float32, 1), make([]float32, 1)
			FitWLS(dst, s0fit, signals, c.b, 0)
			if rel := math.Abs(float64(dst[0])-c.adc) / c.adc; rel > 1e-5 {
				t.Errorf("ADC = %.7g, want %.7g (relative %.2g)", dst[0], c.adc, rel)
			}
			if rel := math.Abs(float64(s0fit[0])-s0) / s0; rel > 1e-5 {
				t.Errorf("S0 = %.7g, want %g", s0fit[0], s0)
			}
		})
	}

	t.Run("points at the floor are left out", func(t *testing.T) {
		b := []float64{0, 500, 1000, 3000}
		signals := [][]float32{{1000}, {float32(1000 * math.Exp(-0.5))}, {float32(1000 * math.Exp(-1))}, {3}}
		dst := make([]float32, 1)
		FitWLS(dst, nil, signals, b, 5)
		if math.Abs(float64(dst[0])-1e-3) > 1e-8 { // model, docs/references.md#mono-exponential; the b 3000 point is below the floor
			t.Errorf("ADC = %.7g, want 1e-3 from the three points above the floor", dst[0])
		}
	})
	t.Run("one b-value left is undefined", func(t *testing.T) {
		dst, s0fit := make([]float32, 1), make([]float32, 1)
		FitWLS(dst, s0fit, [][]float32{{1000}, {0}}, []float64{0, 1000}, 0)
		if !math.IsNaN(float64(dst[0])) || !math.IsNaN(float64(s0fit[0])) {
			t.Errorf("ADC = %g, S0 = %g, want NaN for a single usable point", dst[0], s0fit[0])
		}
	})
	t.Run("repeats of one b-value are undefined", func(t *testing.T) {
		dst := make([]float32, 1)
		FitWLS(dst, nil, [][]float32{{500}, {510}}, []float64{1000, 1000}, 0)
		if !math.IsNaN(float64(dst[0])) {
			t.Errorf("ADC = %g, want NaN without two distinct b-values", dst[0])
		}
	})
}

func TestEADCUndefined(t *testing.T) {
	dst := make([]float32, 2)
	EADC(dst, []float32{0, float32(math.NaN())}, []float32{10, 10})
	for i, v := range dst {
		if !math.IsNaN(float64(v)) {
			t.Errorf("eADC[%d] = %g, want NaN where S0 is not positive", i, v)
		}
	}
}

func TestRayleighMeanFactor(t *testing.T) {
	if math.Abs(rayleighMeanFactor-math.Sqrt(math.Pi/2)) > 1e-15 {
		t.Errorf("rayleighMeanFactor = %.17g, want sqrt(pi/2) = %.17g", rayleighMeanFactor, math.Sqrt(math.Pi/2))
	}
}

func TestLengthMismatchPanics(t *testing.T) {
	defer func() {
		if recover() == nil {
			t.Error("TwoPoint with slices of different lengths did not panic")
		}
	}()
	TwoPoint(make([]float32, 2), make([]float32, 2), make([]float32, 3), 1000, 0)
}

func TestCbrtPositiveMatchesMathCbrt(t *testing.T) {
	// Every product of three positive float32 values lies between
	// (1.4e-45)³ ≈ 3e-135 and (3.4e38)³ ≈ 4e115: normal float64 numbers.
	for e := -140.0; e <= 120; e += 0.0137 {
		x := math.Pow(10, e)
		if x == 0 || math.IsInf(x, 0) {
			continue
		}
		want := math.Cbrt(x)
		if got := cbrtPositive(x); math.Abs(got-want) > 1e-12*want {
			t.Fatalf("cbrtPositive(%g) = %.17g, math.Cbrt %.17g", x, got, want)
		}
	}
}
