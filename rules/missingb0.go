package rules

import (
	"fmt"
	"slices"

	"dwiaudit/audit/dwi"
)

// missingB0 is rule missing-b0: a diffusion series without an image at
// its protocol's lowest b-value (the b0; 0 by default, 50 in body
// protocols that avoid perfusion, docs/references.md#ivim) for its slice
// positions. The b0 may come from another series of the study: the
// assembly borrows it (dwi.AssembleStudy) when its slices lie on this
// series' grid, so a borrowed b0 counts.
//
//   - No b0 at all: error. ADC = ln(S0/Sb)/b (docs/references.md#mono-exponential) needs S0.
//   - b0 for only some positions where the series has diffusion-weighted
//     images: error, with the positions (Finding.Region): the ADC there
//     cannot be computed. Positions missing from every volume (a gap in
//     the slab) are incomplete-series'.
//   - A series with a b0 that does not fit (Facts.B0Unmatched: another
//     series' b0 on other positions or geometry) is geometry-mismatch's
//     to report, unless that rule is disabled: the b0 is there, but
//     misplaced.
//   - A lowest b-value below the protocol's (b0 where the protocol says
//     50) is a reference all the same; bvalue-mismatch reports the set.
//
// Series holding only scanner maps have no acquired images to judge.
type missingB0 struct{}

// NewMissingB0 returns rule missing-b0.
func NewMissingB0() Rule { return missingB0{} }

func (missingB0) ID() string { return IDMissingB0 }

func (missingB0) Check(st *Study, cfg *Config) []Finding {
	var out []Finding
	for _, sa := range st.Series {
		s := sa.Series
		if s == nil || len(acquired(s)) == 0 {
			continue
		}
		e := expectFor(sa, cfg)
		var refs, weighted []*dwi.Volume
		for _, v := range acquired(s) {
			if e.isReference(v) {
				refs = append(refs, v)
			} else {
				weighted = append(weighted, v)
			}
		}
		if len(refs) == 0 {
			if len(s.Facts.B0Unmatched) > 0 && cfg.Enabled(IDGeometryMismatch) {
				continue
			}
			out = append(out, noB0(sa, e))
			continue
		}
		if f, ok := partialB0(sa, e, refs, weighted); ok {
			out = append(out, f)
		}
	}
	return out
}

// b0Words says what counts as the b0 under e: "image at b = 0 s/mm²
// (the lowest b-value of protocol "brain")".
func b0Words(e expectation) string {
	if e.protocol != nil {
		return fmt.Sprintf("image at b = %s (the lowest b-value of %s)", fmtB(e.lowestB), e.name)
	}
	return fmt.Sprintf("image at b <= %s (%s; above that perfusion no longer dominates and the image cannot serve as b0)", fmtB(e.refMaxB), e.name)
}

func noB0(sa *SeriesAudit, e expectation) Finding {
	s := sa.Series
	f := NewFinding(sa, IDMissingB0, SeverityError)
	f.Message = fmt.Sprintf("no b0: the series has no %s at any of its %s, in this series or another series of the study; it holds b = %s only. "+
		"Without the b0 the ADC cannot be computed: ADC = ln(S0/Sb)/b needs the low-b signal S0 of the same voxels.",
		b0Words(e), plural(len(s.Grid), "slice position", "slice positions"), fmtB(s.Facts.BValues...))
	f.Measured = slices.Clone(s.Facts.BValues)
	f.Expected = []float64{e.lowestB}
	if e.protocol == nil {
		f.Expected = []float64{0}
	}
	return f
}

// partialB0 reports grid positions where the series has diffusion
// weighted images but no reference volume has a slice.
func partialB0(sa *SeriesAudit, e expectation, refs, weighted []*dwi.Volume) (Finding, bool) {
	s := sa.Series
	var idx []int
	var pos []float64
	covered := 0
	for z := range s.Grid {
		if slices.ContainsFunc(refs, func(v *dwi.Volume) bool { return z < len(v.Slices) && v.Slices[z] != nil }) {
			covered++
			continue
		}
		if slices.Contains(s.Facts.GridGaps, s.Grid[z]) {
			continue // missing from every volume: incomplete-series
		}
		if slices.ContainsFunc(weighted, func(v *dwi.Volume) bool { return z < len(v.Slices) && v.Slices[z] != nil }) {
			idx = append(idx, z)
			pos = append(pos, s.Grid[z])
		}
	}
	if len(idx) == 0 {
		return Finding{}, false
	}
	from := ""
	if d := s.Facts.B0FromSeries; d != "" && refs[0].SeriesUID == d {
		from = " (borrowed from another series of the study)"
	}
	f := NewFinding(sa, IDMissingB0, SeverityError)
	f.Message = fmt.Sprintf("b0 (b = %s)%s present for %d of %d slice positions: without it the ADC at %s cannot be computed, since ADC = ln(S0/Sb)/b needs the b0 signal S0 of the same voxels.",
		fmtB(refs[0].BValue), from, covered, covered+len(idx), fmtPositions(pos))
	f.Measured = float64(covered)
	f.Expected = float64(covered + len(idx))
	f.Region = &Region{Slices: idx, SlicesMM: pos, Description: "slice positions without b0"}
	return f, true
}
