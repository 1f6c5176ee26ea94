package adc

import (
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"
)

// headOptions describe a synthetic head for the mask tests: a brain
// ellipse, optionally a bright scalp ring outside a dark skull gap (fat
// and skin around bone), a bridge from the ring to the brain, and a dark
// dropout inside the brain.
type headOptions struct {
	n, slices    int
	sigma        float64 // background noise; 0 for a scanner-zeroed background
	ring, bridge bool
	dropout      bool
	missingSlice int // a slice stored as NaN, or -1
}

// head returns the b0 volume and the truth: which voxels are brain.
func head(o headOptions) (*Volume3, []bool) {
	rng := rand.New(rand.NewPCG(11, 13))
	v := NewVolume3(o.n, o.n, o.slices)
	brain := make([]bool, len(v.Data))
	c := float64(o.n-1) / 2
	ra, rb := 0.36*float64(o.n), 0.30*float64(o.n) // brain semi-axes
	for z := range o.slices {
		for y := range o.n {
			for x := range o.n {
				i := (z*o.n+y)*o.n + x
				dx, dy := float64(x)-c, float64(y)-c
				e := math.Sqrt(dx*dx/(ra*ra) + dy*dy/(rb*rb)) // 1 on the brain's edge
				sig := 0.0
				switch {
				case e < 1:
					brain[i] = true
					sig = 1000 // b0 brain signal, SNR 50 at sigma 20
					if o.dropout && math.Hypot(dx, dy+0.15*float64(o.n)) < 0.05*float64(o.n) {
						sig = 30 // signal loss at an air-bone interface
					}
				case o.ring && e > 1.10 && e < 1.17:
					sig = 1500 // scalp fat, brighter than brain
				case o.bridge && e >= 1 && e <= 1.10 && math.Abs(dy) < 1.5 && dx > 0:
					sig = 1200 // a two-pixel bridge across the skull gap
				}
				if o.sigma == 0 {
					if sig > 0 {
						v.Data[i] = float32(sig)
					}
					continue
				}
				v.Data[i] = rician(rng, sig, o.sigma)
			}
		}
	}
	if o.missingSlice >= 0 {
		fill(v.Slice(o.missingSlice), float32(math.NaN()))
		for i := range v.SliceLen() {
			brain[o.missingSlice*v.SliceLen()+i] = false
		}
	}
	return v, brain
}

func TestTissueMask(t *testing.T) {
	cases := []struct {
		name string
		o    headOptions
	}{
		{name: "covers a noisy head and leaves the background out", o: headOptions{n: 96, slices: 6, sigma: 20, missingSlice: -1}},
		{name: "drops a scalp ring joined to the brain by a bridge", o: headOptions{n: 96, slices: 6, sigma: 20, ring: true, bridge: true, missingSlice: -1}},
		{name: "keeps a dropout inside the head", o: headOptions{n: 96, slices: 6, sigma: 20, dropout: true, missingSlice: -1}},
		{name: "bridges a missing slice", o: headOptions{n: 96, slices: 7, sigma: 20, missingSlice: 3}},
		{name: "works on a scanner-zeroed background", o: headOptions{n: 96, slices: 4, sigma: 0, ring: true, missingSlice: -1}},
		{name: "works at SNR 5", o: headOptions{n: 96, slices: 4, sigma: 200, missingSlice: -1}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			v, brain := head(c.o)
			mask, noise := TissueMask(*v, DefaultMaskOptions())
			if c.o.sigma > 0 && math.Abs(noise.Sigma-c.o.sigma)/c.o.sigma > 0.05 {
				// Rayleigh background mean (see BackgroundNoise), from memory.
				t.Errorf("noise sigma = %g, want %g within 5%%", noise.Sigma, c.o.sigma)
			}
			var brainN, covered, outside int
			for i := range mask {
				if brain[i] {
					brainN++
					if mask[i] {
						covered++
					}
				} else if mask[i] {
					outside++
				}
			}
			// The edge erosion drops one pixel ring: about 2/ra of the
			// area, 6% at this size; 90% coverage leaves room for noise.
			if frac := float64(covered) / float64(brainN); frac < 0.90 {
				t.Errorf("mask covers %.1f%% of the brain, want at least 90%%", 100*frac)
			}
			if outside > 0 {
				t.Errorf("mask has %d voxels outside the brain (background, ring or bridge)", outside)
			}
			if c.o.dropout {
				// The dropout's centre (see head) is a hole the fill closes.
				y, x := int(float64(c.o.n-1)/2-0.15*float64(c.o.n)+0.5), (c.o.n-1)/2
				for z := range v.Slices {
					if !mask[(z*c.o.n+y)*c.o.n+x] {
						t.Errorf("slice %d: the dropout inside the head is not in the mask", z)
					}
				}
			}
			if c.o.missingSlice >= 0 {
				for z := range v.Slices {
					if z == c.o.missingSlice {
						continue
					}
					n := 0
					for _, m := range mask[z*v.SliceLen() : (z+1)*v.SliceLen()] {
						if m {
							n++
						}
					}
					if n == 0 {
						t.Errorf("slice %d lost from the mask across the missing slice %d", z, c.o.missingSlice)
					}
				}
			}
		})
	}
}

func TestOtsuSeparatesTwoLevels(t *testing.T) {
	vals := make([]float32, 0, 2000)
	for i := range 1000 {
		vals = append(vals, float32(10+i%5), float32(500+i%7))
	}
	if th := otsu(vals); !(th > 14 && th < 500) {
		t.Errorf("Otsu threshold = %g, want between the classes 10..14 and 500..506", th)
	}
}

func TestMaskOptionsValidate(t *testing.T) {
	if err := DefaultMaskOptions().Validate(); err != nil {
		t.Fatalf("default options invalid: %v", err)
	}
	err := MaskOptions{K: -1, OpenRadius: -1, EdgeErosion: 99}.Validate()
	if err == nil {
		t.Fatal("invalid options accepted")
	}
	for _, field := range []string{"K", "OpenRadius", "EdgeErosion"} {
		if !strings.Contains(err.Error(), field) {
			t.Errorf("error %q does not name %s", err, field)
		}
	}
}

func TestMedian9MatchesSorting(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 9))
	for n := range 20000 {
		var p [9]float32
		for k := range p {
			p[k] = float32(rng.IntN(6)) // many ties
			if n%2 == 0 {
				p[k] = float32(rng.NormFloat64())
			}
		}
		want := slices.Clone(p[:])
		slices.Sort(want)
		if got := median9(&p); got != want[4] {
			t.Fatalf("median9 = %g, sorted middle %g", got, want[4])
		}
	}
}

// TestMaskThresholdLeavesBackgroundOut: on pure Rayleigh noise (the
// background of a magnitude image, Gudbjartsson & Patz 1995 via
// docs/references.md#gudbjartsson-patz-1995) almost no filtered voxel is above the threshold.
func TestMaskThresholdLeavesBackgroundOut(t *testing.T) {
	const sigma = 15.0
	rng := rand.New(rand.NewPCG(10, 11))
	v := NewVolume3(128, 128, 8)
	for i := range v.Data {
		v.Data[i] = rician(rng, 0, sigma)
	}
	th := maskThreshold(*median3x3(*v), DefaultMaskOptions())
	f := median3x3(*v)
	above := 0
	for _, x := range f.Data {
		if x > th {
			above++
		}
	}
	// K = 5 deviations: a normal tail of 3e-7 (from memory); allow the
	// filtered Rayleigh's slightly heavier tail, 1e-4 of the voxels.
	if frac := float64(above) / float64(len(f.Data)); frac > 1e-4 {
		t.Errorf("%d background voxels (%.2g) above the threshold %g (%.2f sigma)", above, frac, th, th/sigma)
	}
	if r := float64(th) / sigma; r < 2 || r > 3.5 {
		t.Errorf("threshold %.2f sigma, want between the filtered background (about 1.2) and SNR 4", r)
	}
}
