package rules

import (
	"fmt"
	"math"
	"slices"
	"strings"

	"dwiaudit/audit/dwi"
)

// incompleteSeries is rule incomplete-series: slice positions missing
// from some volume (volumes of one series with different slice counts),
// or from every volume (a gap in an otherwise regular slab,
// Facts.GridGaps).
//
//   - Missing from some volumes: error where the computed ADC at such a
//     position is undefined (the trace needs every direction), warning
//     where it is defined (it then rests on the scanner's trace image
//     alone, which the incomplete directions cannot confirm) or the
//     series was not computed.
//   - A gap in the slab: warning; images were lost or never
//     reconstructed, and there is no ADC there.
//
// Positions missing from the b0 only are missing-b0's to report (unless
// that rule is disabled).
type incompleteSeries struct{}

// NewIncompleteSeries returns rule incomplete-series.
func NewIncompleteSeries() Rule { return incompleteSeries{} }

func (incompleteSeries) ID() string { return IDIncompleteSeries }

func (incompleteSeries) Check(st *Study, cfg *Config) []Finding {
	var out []Finding
	for _, sa := range st.Series {
		s := sa.Series
		if s == nil || len(acquired(s)) == 0 {
			continue
		}
		e := expectFor(sa, cfg)
		skipRefs := cfg.Enabled(IDMissingB0)
		vols := acquired(s)
		var lacking []string
		var idx []int
		minPresent := len(s.Grid)
		for _, v := range vols {
			if skipRefs && e.isReference(v) {
				continue
			}
			var pos []float64
			present := 0
			for z, fr := range v.Slices {
				switch {
				case fr != nil:
					present++
				case !slices.Contains(s.Facts.GridGaps, s.Grid[z]):
					pos = append(pos, s.Grid[z])
					if !slices.Contains(idx, z) {
						idx = append(idx, z)
					}
				}
			}
			if len(pos) > 0 {
				lacking = append(lacking, fmt.Sprintf("%v lacks %s", v, fmtPositions(pos)))
				minPresent = min(minPresent, present)
			}
		}
		if len(lacking) > 0 {
			slices.Sort(idx)
			out = append(out, missingFromSome(sa, vols, lacking, idx, minPresent))
		}
		if gaps := s.Facts.GridGaps; len(gaps) > 0 {
			f := NewFinding(sa, IDIncompleteSeries, SeverityWarning)
			f.Message = fmt.Sprintf("%s missing from every volume, a gap in an otherwise regular slab of %.1f mm spacing: %s. "+
				"Images were lost in transfer or never reconstructed; there is no ADC there.",
				plural(len(gaps), "slice position", "slice positions"), s.Facts.SliceSpacing, fmtPositions(gaps))
			f.Measured = float64(len(s.Grid) - len(gaps))
			f.Expected = float64(len(s.Grid))
			var gi []int
			for z, p := range s.Grid {
				if slices.Contains(gaps, p) {
					gi = append(gi, z)
				}
			}
			f.Region = &Region{Slices: gi, SlicesMM: slices.Clone(gaps), Description: "slice positions missing from every volume"}
			out = append(out, f)
		}
	}
	return out
}

func missingFromSome(sa *SeriesAudit, vols []*dwi.Volume, lacking []string, idx []int, minPresent int) Finding {
	s := sa.Series
	pos := make([]float64, len(idx))
	for i, z := range idx {
		pos[i] = s.Grid[z]
	}
	undefined := sa.Computed() && slices.ContainsFunc(idx, func(z int) bool { return adcUndefined(sa, z) })
	sev, consequence := SeverityWarning, "the ADC there rests on the scanner's trace image alone, which the incomplete directional images cannot confirm"
	switch {
	case undefined:
		sev, consequence = SeverityError, "the trace-weighted image needs every direction, so the ADC there cannot be computed"
	case !sa.Computed():
		consequence = "the trace and ADC there lack images"
	}
	f := NewFinding(sa, IDIncompleteSeries, sev)
	f.Message = fmt.Sprintf("%s missing from %d of the %d volumes, which should all hold the series' %d (the most incomplete holds %d): %s. %s.",
		plural(len(idx), "slice position", "slice positions"), len(lacking), len(vols), len(s.Grid), minPresent,
		strings.Join(lacking, "; "), strings.ToUpper(consequence[:1])+consequence[1:])
	f.Measured = float64(minPresent)
	f.Expected = float64(len(s.Grid))
	f.Region = &Region{Slices: idx, SlicesMM: pos, Description: "slice positions missing from some volumes"}
	return f
}

// adcUndefined says whether the computed ADC of slice z has no defined
// voxel.
func adcUndefined(sa *SeriesAudit, z int) bool {
	a := sa.Result.ADC
	if a == nil || z >= a.Slices {
		return true
	}
	for _, v := range a.Slice(z) {
		if !math.IsNaN(float64(v)) {
			return false
		}
	}
	return true
}
