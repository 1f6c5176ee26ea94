package adc

import (
	"math"
	"math/rand/v2"
	"testing"
)

// rician returns the magnitude of signal s plus complex Gaussian noise of
// σ per channel: the noise of a magnitude MR image (Gudbjartsson & Patz,
// MRM 1995;34:910, via docs/references.md#gudbjartsson-patz-1995).
func rician(rng *rand.Rand, s, sigma float64) float32 {
	re := s + sigma*rng.NormFloat64()
	im := sigma * rng.NormFloat64()
	return float32(math.Hypot(re, im))
}

// noiseVolume is pure Rayleigh background with σ, and a bright square in
// the middle third (so the corners are background, as in a head).
func noiseVolume(rows, cols, slices int, sigma float64, seed uint64) *Volume3 {
	rng := rand.New(rand.NewPCG(seed, 7))
	v := NewVolume3(rows, cols, slices)
	for z := range slices {
		s := v.Slice(z)
		for y := range rows {
			for x := range cols {
				sig := 0.0
				if y > rows/3 && y < 2*rows/3 && x > cols/3 && x < 2*cols/3 {
					sig = 1000
				}
				s[y*cols+x] = rician(rng, sig, sigma)
			}
		}
	}
	return v
}

func TestBackgroundNoise(t *testing.T) {
	t.Run("Rayleigh background gives sigma within 3 percent", func(t *testing.T) {
		const sigma = 12.0
		v := noiseVolume(128, 128, 8, sigma, 1)
		n := BackgroundNoise(*v)
		// The Rayleigh mean is σ·√(π/2) (from memory); 8 slices × 4
		// corners × 144 pixels give a mean to about 1%.
		if n.Method != NoiseBackgroundRayleigh || math.Abs(n.Sigma-sigma)/sigma > 0.03 {
			t.Errorf("noise = %+v, want sigma %g by %q", n, sigma, NoiseBackgroundRayleigh)
		}
	})
	t.Run("a ghost in a few corners does not move the estimate", func(t *testing.T) {
		const sigma = 12.0
		v := noiseVolume(128, 128, 8, sigma, 2)
		// A bright ghost filling the top-left corner of three slices.
		for _, z := range []int{1, 4, 6} {
			s := v.Slice(z)
			for y := range 20 {
				for x := range 20 {
					s[y*128+x] += 300
				}
			}
		}
		n := BackgroundNoise(*v)
		if math.Abs(n.Sigma-sigma)/sigma > 0.05 { // median over regions, see BackgroundNoise
			t.Errorf("sigma = %g with ghosts, want %g within 5%%", n.Sigma, sigma)
		}
	})
	t.Run("a zeroed background is reported, not measured", func(t *testing.T) {
		v := NewVolume3(64, 64, 2)
		for i := range v.Data {
			if y, x := (i/64)%64, i%64; y > 20 && y < 44 && x > 20 && x < 44 {
				v.Data[i] = 800
			}
		}
		n := BackgroundNoise(*v)
		if n.Method != NoiseZeroedBackground || !math.IsNaN(n.Sigma) || n.Valid() {
			t.Errorf("noise = %+v, want %q with NaN sigma", n, NoiseZeroedBackground)
		}
	})
	t.Run("a tiny image has no background", func(t *testing.T) {
		n := BackgroundNoise(*NewVolume3(6, 6, 1))
		if n.Method != NoiseNoBackground || n.Valid() {
			t.Errorf("noise = %+v, want %q", n, NoiseNoBackground)
		}
	})
}

func TestNoiseFromDifference(t *testing.T) {
	const sigma = 9.0
	rng := rand.New(rand.NewPCG(3, 4))
	n := 20000
	a, b := make([]float32, n), make([]float32, n)
	mask := make([]bool, n)
	for i := range a {
		a[i] = rician(rng, 900, sigma)
		b[i] = rician(rng, 900, sigma)
		mask[i] = i%2 == 0
	}
	got := NoiseFromDifference(a, b, mask)
	// SD of a difference of two images with noise σ is σ√2 (NEMA MS
	// 1-2008 difference method, from memory); 10000 pixels give the SD
	// to under 1%.
	if got.Method != NoiseDifference || math.Abs(got.Sigma-sigma)/sigma > 0.03 || got.Pixels != n/2 {
		t.Errorf("noise = %+v, want sigma %g from %d pixels", got, sigma, n/2)
	}
}

func TestNoiseFromLaplacian(t *testing.T) {
	// A smooth tissue ramp (planar, which the Laplacian difference mask
	// cancels exactly) with a sharp step across the middle, under Rician
	// noise of σ at high SNR: the estimate must find σ within 10%
	// (Immerkær 1996's estimator, robust form; the tolerance is the
	// median's standard error over some 3,000 pixels plus the step's
	// edge pixels), and the zeroed background outside the mask must not
	// matter.
	for _, sigma := range []float64{5, 20} {
		rng := rand.New(rand.NewPCG(3, uint64(sigma)))
		const rows, cols = 64, 64
		var images [][]float32
		var masks [][]bool
		for range 2 {
			img := make([]float32, rows*cols)
			m := make([]bool, rows*cols)
			for r := range rows {
				for c := range cols {
					i := r*cols + c
					if r < 8 || r >= 56 || c < 8 || c >= 56 {
						continue // zeroed background, outside the mask
					}
					s := 600 + 3*float64(r) + 2*float64(c)
					if c >= 32 {
						s += 400
					}
					img[i], m[i] = rician(rng, s, sigma), true
				}
			}
			images, masks = append(images, img), append(masks, m)
		}
		got := NoiseFromLaplacian(rows, cols, images, masks)
		if got.Method != NoiseLaplacian || math.Abs(got.Sigma/sigma-1) > 0.10 {
			t.Errorf("σ %g: got %v (%s, %d pixels), want within 10%%", sigma, got.Sigma, got.Method, got.Pixels)
		}
	}
	t.Run("too few tissue pixels give no estimate", func(t *testing.T) {
		img := make([]float32, 16)
		m := make([]bool, 16)
		for i := range m {
			m[i] = true
		}
		if got := NoiseFromLaplacian(4, 4, [][]float32{img}, [][]bool{m}); got.Valid() {
			t.Errorf("got %v from 4 pixels, want undefined", got)
		}
	})
}
