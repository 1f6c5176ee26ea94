package rules

import (
	"fmt"
	"math"
	"slices"

	"dwiaudit/audit/dwi"
)

// bvalueMismatch is rule bvalue-mismatch: the diffusion weighting the
// headers describe is not what the protocol expects, or contradicts
// itself.
//
//   - Set (warning): the acquired b-values differ from the matched
//     protocol's (tolerance max(bvalue_tolerance, relative_tolerance*b)).
//     ADC depends on the b-values used (it falls as b rises in tissue,
//     DeLano et al., AJNR 2000;21:1830; docs/references.md#delano-2000), so such a series is
//     not comparable with the protocol's others. A series holding only
//     b0 images (a b0 series lending its b0) is not held to the set, and
//     a missing lowest b-value is left to missing-b0 (unless disabled).
//   - Directions (warning): fewer gradient directions at a b-value than
//     the protocol's minimum; a trace from fewer than three orthogonal
//     directions depends on fibre orientation (Basser & Pierpaoli;
//     docs/references.md#basser-pierpaoli). Series with only the scanner's trace image say nothing
//     about directions and are not judged.
//   - Inside one volume (error): images of one volume whose b-values
//     differ beyond tolerance; the ADC of their slices uses a b that is
//     not theirs.
//   - b-matrix (error): an image whose header b-value disagrees with the
//     trace of its b-matrix (XX + YY + ZZ = b, PS3.3 C.8.13.5.9).
//   - No b-value (warning): images with no b-value from any source,
//     left out of every volume.
//
// Unmatched series get only the checks that need no protocol.
type bvalueMismatch struct{}

// NewBValueMismatch returns rule bvalue-mismatch.
func NewBValueMismatch() Rule { return bvalueMismatch{} }

func (bvalueMismatch) ID() string { return IDBValueMismatch }

func (bvalueMismatch) Check(st *Study, cfg *Config) []Finding {
	var out []Finding
	for _, sa := range st.Series {
		s := sa.Series
		if s == nil || len(acquired(s)) == 0 {
			continue
		}
		e := expectFor(sa, cfg)
		if e.protocol != nil && !e.referenceOnly(s) {
			if f, ok := bvalueSet(sa, e, cfg.Enabled(IDMissingB0)); ok {
				out = append(out, f)
			}
			out = append(out, tooFewDirections(sa, e)...)
		}
		out = append(out, inconsistentB(sa, e)...)
		if n := len(s.Facts.NoBValue); n > 0 {
			f := NewFinding(sa, IDBValueMismatch, SeverityWarning)
			f.Message = fmt.Sprintf("%s of this series have no b-value in any source (Diffusion b-value (0018,9087), the functional groups, or a configured private source) and are left out of every volume: "+
				"the ADC is computed without them, and if they were diffusion weighted the series is incomplete.", plural(n, "image", "images"))
			f.Measured = float64(n)
			f.Expected = 0.0
			out = append(out, f)
		}
	}
	return out
}

// bvalueSet compares the acquired b-values with the protocol's. A
// missing lowest b-value is missing-b0's to report when that rule runs.
func bvalueSet(sa *SeriesAudit, e expectation, b0Reported bool) (Finding, bool) {
	got := sa.Series.Facts.BValues
	want := e.protocol.BValues
	near := func(list []float64, b float64) bool {
		return slices.ContainsFunc(list, func(x float64) bool { return math.Abs(x-b) <= e.tol(max(x, b)) })
	}
	var missing, extra []float64
	for _, b := range want {
		if b0Reported && math.Abs(b-e.lowestB) <= e.tol(b) {
			continue
		}
		if !near(got, b) {
			missing = append(missing, b)
		}
	}
	for _, b := range got {
		if !near(want, b) {
			extra = append(extra, b)
		}
	}
	if len(missing) == 0 && len(extra) == 0 {
		return Finding{}, false
	}
	why := ""
	if len(missing) > 0 {
		why += fmt.Sprintf("; b = %s expected but not acquired", fmtB(missing...))
	}
	if len(extra) > 0 {
		why += fmt.Sprintf("; b = %s acquired but not in the protocol", fmtB(extra...))
	}
	f := NewFinding(sa, IDBValueMismatch, SeverityWarning)
	f.Message = fmt.Sprintf("acquired b-values %s differ from the %s b-values %s (tolerance ±%g s/mm² at b = %g)%s. "+
		"ADC depends on the b-values used (in tissue it falls as b rises), so this series' ADC is not comparable with the protocol's.",
		fmtB(got...), e.name, fmtB(want...), e.tol(want[len(want)-1]), want[len(want)-1], why)
	f.Measured = slices.Clone(got)
	f.Expected = slices.Clone(want)
	return f, true
}

func tooFewDirections(sa *SeriesAudit, e expectation) []Finding {
	s := sa.Series
	need := e.protocol.MinDirections
	if need <= 0 {
		return nil
	}
	var out []Finding
	for _, b := range s.Facts.BValues {
		n := len(s.Facts.Directions[b])
		if b <= e.refMaxB || n == 0 || n >= need {
			continue
		}
		f := NewFinding(sa, IDBValueMismatch, SeverityWarning)
		f.Message = fmt.Sprintf("b = %s was acquired along %s where %s asks for at least %d: "+
			"a trace from fewer than three orthogonal directions depends on how the fibres lie, so the ADC of anisotropic tissue (white matter) is biased.",
			fmtB(b), plural(n, "gradient direction", "gradient directions"), e.name, need)
		f.Measured = float64(n)
		f.Expected = float64(need)
		out = append(out, f)
	}
	return out
}

// inconsistentB checks every image of every acquired volume against
// its volume's nominal b-value and against its own b-matrix; images the
// assembly listed in Facts.InconsistentB count even when they pass here
// (the assembly may have used a tighter tolerance).
func inconsistentB(sa *SeriesAudit, e expectation) []Finding {
	s := sa.Series
	listed := map[string]bool{}
	for _, id := range s.Facts.InconsistentB {
		listed[id] = true
	}
	var volB, volNominal []float64 // distinct off b-values, and the nominal b of their volumes
	var volImages, volVolumes int
	var trB, trTrace []float64
	trImages := 0
	for _, v := range acquired(s) {
		off := false
		// Every image, repeats included; against the volume's measured
		// mean (its nominal value is rounded).
		ref := v.BValue
		if v.BValueMeasured != 0 {
			ref = v.BValueMeasured
		}
		var images []*dwi.Frame
		for z := range v.Slices {
			images = append(images, v.ImagesAt(z)...)
		}
		for _, fr := range images {
			b := 0.0
			if fr.HasBValue {
				b = fr.BValue
			}
			traceOff := false
			if fr.HasBMatrix {
				tr := fr.BMatrix[0] + fr.BMatrix[3] + fr.BMatrix[5]
				if math.Abs(tr-b) > e.tol(max(tr, b)) {
					traceOff = true
					trImages++
					trB = appendDistinct(trB, b)
					trTrace = appendDistinct(trTrace, math.Round(tr))
				}
			}
			if math.Abs(b-ref) > e.tol(ref) || (listed[fr.ID()] && !traceOff) {
				volImages++
				volB = appendDistinct(volB, b)
				off = true
			}
		}
		if off {
			volVolumes++
			volNominal = appendDistinct(volNominal, v.BValue)
		}
	}
	var out []Finding
	if volImages > 0 {
		f := NewFinding(sa, IDBValueMismatch, SeverityError)
		f.Message = fmt.Sprintf("b-values inconsistent inside one volume: %s of %s nominally at b = %s say b = %s: "+
			"images computed as one weighting were acquired with another, so the trace and ADC of their slices use a b-value that is not theirs.",
			plural(volImages, "image", "images"), plural(volVolumes, "volume", "volumes"), fmtB(volNominal...), fmtB(volB...))
		f.Measured = volB
		f.Expected = volNominal
		out = append(out, f)
	}
	if trImages > 0 {
		f := NewFinding(sa, IDBValueMismatch, SeverityError)
		f.Message = fmt.Sprintf("header b-value disagrees with the b-matrix: %s say b = %s while the trace of their b-matrix (XX+YY+ZZ, which equals b, PS3.3 C.8.13.5.9) is %s: "+
			"the header or the b-matrix is wrong, and an ADC computed with the wrong one is off by their ratio.",
			plural(trImages, "image", "images"), fmtB(trB...), fmtB(trTrace...))
		f.Measured = trTrace
		f.Expected = trB
		out = append(out, f)
	}
	return out
}

func appendDistinct(list []float64, v float64) []float64 {
	if slices.Contains(list, v) {
		return list
	}
	list = append(list, v)
	slices.Sort(list)
	return list
}
