package adc

import (
	"fmt"
	"math"
)

// GeometricMean writes the voxel-wise geometric mean of dirs into dst:
// (Sx·Sy·Sz)^(1/3) for three directions. For three orthogonal directions
// of one b-value this is the trace-weighted image, S0·exp(-b·Tr(D)/3),
// free of the tissue's orientation (Basser & Pierpaoli;
// docs/references.md#basser-pierpaoli). For other direction sets it is the trace image only when
// their second moment is isotropic (the mean of g·gᵀ is I/3).
//
// A voxel is NaN when any input is NaN or negative (the geometric mean of
// magnitudes is undefined there), and 0 when any input is 0. dst may be
// one of dirs. With no dirs, dst is left alone.
func GeometricMean(dst []float32, dirs ...[]float32) {
	sameLen("GeometricMean", len(dst), dirs...)
	switch len(dirs) {
	case 0:
		return
	case 1:
		copy(dst, dirs[0])
		for i, v := range dst {
			if v < 0 {
				dst[i] = float32(math.NaN())
			}
		}
	case 3:
		// The common case, unrolled: the cube root of the product. The
		// product of three float32 values stays far inside float64's
		// normal range (1e-45³ to 3.4e38³).
		x, y, z := dirs[0], dirs[1], dirs[2]
		for i := range dst {
			a, b, c := float64(x[i]), float64(y[i]), float64(z[i])
			p := a * b * c
			switch {
			case a < 0 || b < 0 || c < 0 || p != p:
				dst[i] = float32(math.NaN())
			case p == 0:
				dst[i] = 0
			default:
				dst[i] = float32(cbrtPositive(p))
			}
		}
	default:
		inv := 1 / float64(len(dirs))
		for i := range dst {
			var sum float64
			zero := false
			for _, d := range dirs {
				v := float64(d[i])
				if v < 0 || v != v {
					sum = math.NaN()
					break
				}
				if v == 0 {
					zero = true
					continue
				}
				sum += math.Log(v)
			}
			switch {
			case sum != sum:
				dst[i] = float32(math.NaN())
			case zero:
				dst[i] = 0
			default:
				dst[i] = float32(math.Exp(sum * inv))
			}
		}
	}
}

// cbrtPositive is the cube root of a positive, finite, normal x to
// 1e-12 relative, far below the 6e-8 of the float32 it is stored in,
// and three times faster than math.Cbrt, which also handles every
// special value. The first guess divides the exponent and mantissa bits
// by three (relative error a few percent, from memory); two Halley steps
// y·(y³+2x)/(2y³+x) converge cubically from there. A test compares it
// with math.Cbrt over the whole range of products of float32 values.
func cbrtPositive(x float64) float64 {
	y := math.Float64frombits(math.Float64bits(x)/3 + cbrtMagic)
	y3 := y * y * y
	y *= (y3 + 2*x) / (2*y3 + x)
	y3 = y * y * y
	return y * (y3 + 2*x) / (2*y3 + x)
}

// cbrtMagic is a third of the bias of float64's exponent, moved to the
// exponent bits, with a mantissa correction: 0x2A9F7893782DA1CE (from
// memory; the test against math.Cbrt is what vouches for it).
const cbrtMagic = 0x2A9F7893782DA1CE

// TwoPointValue is the two-point ADC of one voxel in float64,
// ln(s0/sb)/b (docs/references.md#mono-exponential): the kernel TwoPoint applies to every
// voxel. It is NaN unless both signals are above floor and b > 0. b is
// the difference of the two b-values when the reference is not b = 0.
func TwoPointValue(s0, sb, b, floor float64) float64 {
	if !(s0 > floor) || !(sb > floor) || !(b > 0) {
		return math.NaN()
	}
	return math.Log(s0/sb) / b
}

// TwoPoint writes the two-point ADC map ln(S0/Sb)/b, in mm²/s for b in
// s/mm², into dst (docs/references.md#mono-exponential). A voxel is NaN where S0 or Sb is
// at or below floor (or NaN): the logarithm of a signal at the noise
// floor says nothing about diffusion. A negative ADC (Sb > S0) is kept:
// its frequency is a measure of the series. Each voxel is computed in
// float64 and rounded once to float32.
func TwoPoint(dst, s0, sb []float32, b float64, floor float32) {
	sameLen("TwoPoint", len(dst), s0, sb)
	if !(b > 0) {
		fill(dst, float32(math.NaN()))
		return
	}
	inv := 1 / b
	for i := range dst {
		a, c := s0[i], sb[i]
		if !(a > floor) || !(c > floor) {
			dst[i] = float32(math.NaN())
			continue
		}
		dst[i] = float32(math.Log(float64(a)/float64(c)) * inv)
	}
}

// FitWLS fits ln S = ln S0 - b·ADC to the signals of every voxel by
// weighted linear least squares with weights S², and writes ADC into dst
// and, when s0fit is not nil, the fitted S0 into s0fit. signals[k] is the
// image at b[k] (s/mm²), in any order.
//
// The weights S² make each point count by the inverse of the variance
// its logarithm has under Gaussian noise (var ln S ≈ σ²/S²), so the weak
// high-b signals do not dominate the fit the way they do unweighted
// (Chad & Pasternak, ISMRM 2020 #4415; docs/references.md#chad-pasternak-2020). The weights are the
// measured signals (one pass, no iteration).
//
// Points at or below floor are left out. A voxel with fewer than two
// distinct b-values left is NaN (in s0fit too).
func FitWLS(dst, s0fit []float32, signals [][]float32, b []float64, floor float32) {
	if len(signals) != len(b) {
		panic(fmt.Sprintf("adc: FitWLS: %d signals for %d b-values", len(signals), len(b)))
	}
	sameLen("FitWLS", len(dst), signals...)
	if s0fit != nil {
		sameLen("FitWLS", len(dst), s0fit)
	}
	nan := float32(math.NaN())
	for i := range dst {
		// Sums of the normal equations of the weighted fit y = a + m·b.
		var sw, swb, swy, swbb, swby float64
		for k, sig := range signals {
			s := sig[i]
			if !(s > floor) {
				continue
			}
			v := float64(s)
			w := v * v
			y := math.Log(v)
			bk := b[k]
			sw += w
			swb += w * bk
			swy += w * y
			swbb += w * bk * bk
			swby += w * bk * y
		}
		// det is sw² times the weighted variance of b: zero (to rounding)
		// when fewer than two distinct b-values remain.
		det := sw*swbb - swb*swb
		if !(sw > 0) || !(det > minRelativeSpread*sw*swbb) {
			dst[i] = nan
			if s0fit != nil {
				s0fit[i] = nan
			}
			continue
		}
		m := (sw*swby - swb*swy) / det
		dst[i] = float32(-m)
		if s0fit != nil {
			s0fit[i] = float32(math.Exp((swy - m*swb) / sw))
		}
	}
}

// minRelativeSpread is the smallest weighted variance of the b-values,
// relative to their weighted mean square, that FitWLS accepts as two
// distinct b-values. Rounding leaves about 1e-16 of relative residue
// when all b are equal; clinical b-value sets (0 and 50..3000 s/mm²)
// give 1e-3 and more, so 1e-9 separates the two with room to spare.
const minRelativeSpread = 1e-9

// EADC writes the exponential ADC Sb/S0 = exp(-b·ADC) into dst
// (docs/references.md#eadc). A voxel is NaN where S0 is not positive or either signal is
// NaN.
func EADC(dst, s0, sb []float32) {
	sameLen("EADC", len(dst), s0, sb)
	for i := range dst {
		a := s0[i]
		if !(a > 0) {
			dst[i] = float32(math.NaN())
			continue
		}
		dst[i] = float32(float64(sb[i]) / float64(a)) // NaN sb stays NaN
	}
}

func fill(dst []float32, v float32) {
	for i := range dst {
		dst[i] = v
	}
}
