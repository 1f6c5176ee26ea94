package phantom

import (
	"math"
	"testing"
)

func TestPhantomWaterADCReproducesTheHolzTable(t *testing.T) {
	// docs/references.md#holz-2000: Holz, Heil & Sacco, PCCP 2000;2:4740, the fit
	// D = D0 (T/Ts - 1)^gamma, quoted to three decimals (1e-3 mm^2/s). The
	// fit itself gives 2.2995 at 25 C, which the table shows as 2.300, so
	// the tolerance is one unit of the last quoted decimal.
	cases := []struct {
		celsius, want float64
	}{
		{0, 1.099e-3},
		{20, 2.023e-3},
		{25, 2.300e-3},
		{37, 3.037e-3},
	}
	for _, c := range cases {
		t.Run("water at "+ftoa(c.celsius)+" C", func(t *testing.T) {
			if got := WaterADC(c.celsius); math.Abs(got-c.want) > 0.001e-3 {
				t.Fatalf("WaterADC(%g) = %.6g mm2/s, want %.4g (Holz 2000, references.md#holz-2000)", c.celsius, got, c.want)
			}
		})
	}
	t.Run("the ice-water phantom is at the QIBA value", func(t *testing.T) {
		// QIBA DWI profile; Malyarenko et al., JMRI 2013;37:1238: 1.1e-3 at
		// 0 C (docs/references.md#ice-water-phantom), quoted to two significant figures.
		if got := WaterADC(IceWaterC); math.Abs(got-1.1e-3) > 0.005e-3 {
			t.Fatalf("WaterADC(0) = %.4g, want 1.1e-3 (QIBA)", got)
		}
	})
	t.Run("the warm phantom is outside the QIBA tolerance", func(t *testing.T) {
		// +-3.6% bias tolerance of the QIBA profile (docs/references.md#phantom-tolerance, from memory).
		if got := WaterADC(IceWarmC); got < 1.1e-3*1.036 {
			t.Fatalf("WaterADC(%g) = %.4g, want above 1.1e-3 + 3.6%%", IceWarmC, got)
		}
	})
	t.Run("below the fit's singular temperature there is no value", func(t *testing.T) {
		if got := WaterADC(-60); !math.IsNaN(got) {
			t.Fatalf("WaterADC(-60) = %v, want NaN", got)
		}
	})
}

func TestPhantomSignalModel(t *testing.T) {
	// docs/references.md#worked-example: S0 = 1000 and ADC = 1e-3 at b = 1000 give
	// Sb = 367.879 (exp(-1) exactly).
	iso := isotropic(1e-3)
	if got := signal(1000, 1000, iso, [3]float64{1, 0, 0}); math.Abs(got-1000*math.Exp(-1)) > 1e-9 {
		t.Fatalf("signal = %v, want 1000 exp(-1)", got)
	}
	// Geometric mean of three orthogonal directions = S0 exp(-b Tr(D)/3)
	// (Basser & Pierpaoli; docs/references.md#basser-pierpaoli), here with an anisotropic tensor.
	d := [3]float64{wmAxialD, wmRadialD, wmRadialD}
	gm := 1.0
	for _, g := range directionSet(3) {
		gm *= signal(600, 1000, d, g)
	}
	gm = math.Cbrt(gm)
	if want := signal(600, 1000, d, [3]float64{}); math.Abs(gm-want) > 1e-9 {
		t.Fatalf("geometric mean of x, y, z = %v, want trace signal %v", gm, want)
	}
	// The six-direction scheme averages to the trace too.
	lg := 0.0
	for _, g := range directionSet(6) {
		lg += math.Log(signal(600, 1000, d, g))
	}
	if got, want := math.Exp(lg/6), signal(600, 1000, d, [3]float64{}); math.Abs(got-want) > 1e-9 {
		t.Fatalf("geometric mean of six directions = %v, want %v", got, want)
	}
	if mean := (wmAxialD + 2*wmRadialD) / 3; math.Abs(mean-ADCWhiteMatter) > 1e-12 {
		t.Fatalf("anisotropic white matter mean diffusivity %v, want ADCWhiteMatter %v", mean, ADCWhiteMatter)
	}
}

func TestPhantomRicianNoiseFloor(t *testing.T) {
	// The magnitude of pure Gaussian noise is Rayleigh distributed, mean
	// sigma sqrt(pi/2) (Gudbjartsson & Patz, MRM 1995;34:910).
	sum := 0.0
	const n = 20000
	rnd := newTestRand(1)
	for i := 0; i < n; i++ {
		sum += rician(0, 10, rnd.NormFloat64(), rnd.NormFloat64())
	}
	if got, want := sum/n, 10*math.Sqrt(math.Pi/2); math.Abs(got-want)/want > 0.02 {
		t.Fatalf("mean noise magnitude %v, want %v (Rayleigh)", got, want)
	}
}
