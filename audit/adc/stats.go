package adc

import (
	"math"
	"slices"
)

// Percentile returns the p-th percentile (0 ≤ p ≤ 100) of the non-NaN
// values, interpolating linearly between order statistics: the value at
// rank (n-1)·p/100 counted from 0, which is numpy's default ("linear",
// Hyndman & Fan definition 7; from memory), so that the Python reference
// in testdata/ gives the same number. vals is not modified: the values
// are copied first. It is NaN when no value is finite or p is outside
// [0, 100].
func Percentile(vals []float32, p float64) float32 {
	buf := make([]float32, 0, len(vals))
	for _, v := range vals {
		if v == v {
			buf = append(buf, v)
		}
	}
	return PercentileInPlace(buf, p)
}

// Median is Percentile(vals, 50).
func Median(vals []float32) float32 { return Percentile(vals, 50) }

// PercentileInPlace is Percentile without the copy: it reorders vals
// (NaN values move to the end). Use it on a scratch buffer.
func PercentileInPlace(vals []float32, p float64) float32 {
	if !(p >= 0 && p <= 100) {
		return float32(math.NaN())
	}
	// Move NaN to the end so that selection sees only ordered values.
	n := 0
	for i, v := range vals {
		if v == v {
			vals[n], vals[i] = vals[i], vals[n]
			n++
		}
	}
	x := vals[:n]
	if n == 0 {
		return float32(math.NaN())
	}
	h := float64(n-1) * p / 100
	lo := int(math.Floor(h))
	if lo >= n-1 {
		lo = n - 1
	}
	v0 := selectK(x, lo)
	if lo == n-1 || h == float64(lo) {
		return v0
	}
	// After selection every element past lo is ≥ x[lo]; the next order
	// statistic is their minimum.
	v1 := slices.Min(x[lo+1:])
	return float32(float64(v0) + (h-float64(lo))*(float64(v1)-float64(v0)))
}

// selectK reorders x so that x[k] is the value a full sort would put
// there, with smaller-or-equal values before it and greater-or-equal
// after, and returns x[k]. Quickselect with a median-of-three pivot; it
// falls back to sorting the remaining range when partitioning stops
// shrinking it fast enough (adversarial or many-duplicate input), so the
// worst case stays O(n log n).
func selectK(x []float32, k int) float32 {
	lo, hi := 0, len(x)-1
	budget := 2 * bitsLen(len(x))
	for hi > lo {
		if budget == 0 || hi-lo < 16 {
			slices.Sort(x[lo : hi+1])
			return x[k]
		}
		budget--
		mid := lo + (hi-lo)/2
		// Median of three to x[mid].
		if x[mid] < x[lo] {
			x[mid], x[lo] = x[lo], x[mid]
		}
		if x[hi] < x[lo] {
			x[hi], x[lo] = x[lo], x[hi]
		}
		if x[hi] < x[mid] {
			x[hi], x[mid] = x[mid], x[hi]
		}
		pivot := x[mid]
		// Hoare partition: afterwards x[lo..j] ≤ pivot ≤ x[j+1..hi].
		i, j := lo-1, hi+1
		for {
			for i++; x[i] < pivot; i++ {
			}
			for j--; x[j] > pivot; j-- {
			}
			if i >= j {
				break
			}
			x[i], x[j] = x[j], x[i]
		}
		if k <= j {
			hi = j
		} else {
			lo = j + 1
		}
	}
	return x[k]
}

func bitsLen(n int) int {
	b := 0
	for ; n > 0; n >>= 1 {
		b++
	}
	return b
}
