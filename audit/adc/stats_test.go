package adc

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

// referencePercentile sorts a copy and interpolates at rank (n-1)p/100,
// the definition numpy.percentile uses by default (from memory).
func referencePercentile(vals []float32, p float64) float32 {
	var x []float64
	for _, v := range vals {
		if v == v {
			x = append(x, float64(v))
		}
	}
	slices.Sort(x)
	h := float64(len(x)-1) * p / 100
	lo := int(math.Floor(h))
	if lo >= len(x)-1 {
		return float32(x[len(x)-1])
	}
	return float32(x[lo] + (h-float64(lo))*(x[lo+1]-x[lo]))
}

func TestPercentile(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	random := make([]float32, 10001)
	for i := range random {
		random[i] = float32(rng.NormFloat64())
		if i%97 == 0 {
			random[i] = float32(math.NaN())
		}
	}
	dups := make([]float32, 5000)
	for i := range dups {
		dups[i] = float32(i % 3)
	}
	cases := []struct {
		name string
		vals []float32
		p    float64
	}{
		{name: "median of random values with NaN", vals: random, p: 50},
		{name: "95th percentile of random values", vals: random, p: 95},
		{name: "minimum", vals: random, p: 0},
		{name: "maximum", vals: random, p: 100},
		{name: "many duplicates", vals: dups, p: 40},
		{name: "two values interpolate", vals: []float32{1, 3}, p: 25},
		{name: "one value", vals: []float32{4}, p: 90},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			before := slices.Clone(c.vals)
			got := Percentile(c.vals, c.p)
			want := referencePercentile(c.vals, c.p)
			if math.Abs(float64(got-want)) > 1e-6 {
				t.Errorf("Percentile(%v) = %g, sorted reference %g", c.p, got, want)
			}
			for i := range before {
				if before[i] != c.vals[i] && !(before[i] != before[i] && c.vals[i] != c.vals[i]) {
					t.Fatalf("Percentile changed the caller's data at %d", i)
				}
			}
		})
	}
	t.Run("two values at 25 percent give a quarter of the way", func(t *testing.T) {
		if got := Median([]float32{1, 3}); got != 2 {
			t.Errorf("Median(1, 3) = %g, want 2", got)
		}
	})
	t.Run("no finite value gives NaN", func(t *testing.T) {
		if got := Percentile([]float32{float32(math.NaN())}, 50); got == got {
			t.Errorf("Percentile of NaN only = %g, want NaN", got)
		}
	})
	t.Run("p outside 0..100 gives NaN", func(t *testing.T) {
		if got := Percentile([]float32{1, 2}, 101); got == got {
			t.Errorf("Percentile(101) = %g, want NaN", got)
		}
	})
}
