package adc

import (
	"math"
	"math/rand/v2"
	"testing"
)

// benchVoxels is one 256×256×60 volume, the size of the brief's series.
const benchVoxels = 256 * 256 * 60

func benchSignals(n int, b float64, seed uint64) []float32 {
	rng := rand.New(rand.NewPCG(seed, 1))
	out := make([]float32, n)
	for i := range out {
		out[i] = float32(math.Max(1, 600*math.Exp(-b*0.7e-3)+10*rng.NormFloat64()))
	}
	return out
}

func reportVoxels(b *testing.B, n int) {
	b.ReportMetric(float64(n)*float64(b.N)/b.Elapsed().Seconds(), "voxels/s")
}

func BenchmarkTwoPoint(b *testing.B) {
	s0, sb := benchSignals(benchVoxels, 0, 1), benchSignals(benchVoxels, 1000, 2)
	dst := make([]float32, benchVoxels)
	b.ReportAllocs()
	for b.Loop() {
		TwoPoint(dst, s0, sb, 1000, 0)
	}
	reportVoxels(b, benchVoxels)
}

func BenchmarkFitWLS(b *testing.B) {
	bs := []float64{0, 500, 1000, 1500}
	signals := make([][]float32, len(bs))
	for k, bv := range bs {
		signals[k] = benchSignals(benchVoxels, bv, uint64(k))
	}
	dst, s0 := make([]float32, benchVoxels), make([]float32, benchVoxels)
	b.ReportAllocs()
	for b.Loop() {
		FitWLS(dst, s0, signals, bs, 0)
	}
	reportVoxels(b, benchVoxels)
}

func BenchmarkGeometricMean(b *testing.B) {
	x, y, z := benchSignals(benchVoxels, 1000, 3), benchSignals(benchVoxels, 1000, 4), benchSignals(benchVoxels, 1000, 5)
	dst := make([]float32, benchVoxels)
	b.ReportAllocs()
	for b.Loop() {
		GeometricMean(dst, x, y, z)
	}
	reportVoxels(b, benchVoxels)
}

func BenchmarkTissueMask(b *testing.B) {
	v, _ := head(headOptions{n: 256, slices: 60, sigma: 10, ring: true, missingSlice: -1})
	b.ReportAllocs()
	for b.Loop() {
		TissueMask(*v, DefaultMaskOptions())
	}
	reportVoxels(b, len(v.Data))
}

func BenchmarkMedian(b *testing.B) {
	vals := benchSignals(benchVoxels, 1000, 6)
	buf := make([]float32, len(vals))
	b.ReportAllocs()
	for b.Loop() {
		copy(buf, vals)
		PercentileInPlace(buf, 50)
	}
	reportVoxels(b, benchVoxels)
}
