package rules

import (
	"fmt"
	"math"
	"slices"
	"strings"

	"dwiaudit/audit/dwi"
)

// geometryMismatch is rule geometry-mismatch (error): b0 and DWI
// volumes that do not image the same voxels, so the ADC, a ratio of the
// two, mixes different tissue.
//
//   - Inside a series: the volumes the assembly found differing from the
//     reference volume beyond its tolerances (Facts.GeometryMismatch:
//     matrix, pixel spacing, orientation, in-plane position).
//   - Across series: another series of the study with a b0 that this
//     series, lacking one, could not borrow because its slices or
//     geometry differ (Facts.B0Unmatched); the finding says how: slice
//     positions along the normal, in-plane shift, orientation, spacing or
//     matrix. Measured is the largest distance (mm) between the b0's
//     slices and this series' positions when that is the difference.
//
// The tolerances are the assembly's (dwi.Tolerances); the descriptions
// below use dwi.DefaultTolerances to say which property differs.
type geometryMismatch struct{}

// NewGeometryMismatch returns rule geometry-mismatch.
func NewGeometryMismatch() Rule { return geometryMismatch{} }

func (geometryMismatch) ID() string { return IDGeometryMismatch }

func (geometryMismatch) Check(st *Study, cfg *Config) []Finding {
	var out []Finding
	for _, sa := range st.Series {
		s := sa.Series
		if s == nil {
			continue
		}
		if gm := s.Facts.GeometryMismatch; len(gm) > 0 {
			f := NewFinding(sa, IDGeometryMismatch, SeverityError)
			f.Message = fmt.Sprintf("%s of this series differ in geometry from its reference (lowest-b) volume: %s. "+
				"Their voxels do not lie over the same tissue as the b0's, so the ADC mixes neighbouring tissue.",
				plural(len(gm), "volume", "volumes"), strings.Join(gm, "; "))
			f.Measured = slices.Clone(gm)
			f.Expected = "the position, orientation, pixel spacing and matrix of the reference volume"
			out = append(out, f)
		}
		e := expectFor(sa, cfg)
		for _, uid := range s.Facts.B0Unmatched {
			donor := findSeries(st, uid)
			if donor == nil {
				continue
			}
			out = append(out, unmatchedB0(sa, e, donor))
		}
	}
	return out
}

func unmatchedB0(sa *SeriesAudit, e expectation, donor *dwi.Series) Finding {
	s := sa.Series
	f := NewFinding(sa, IDGeometryMismatch, SeverityError)
	var b0 *dwi.Volume
	for _, v := range donor.Volumes {
		if v.SeriesUID == donor.SeriesInstanceUID && e.isReference(v) {
			b0 = v
			break
		}
	}
	what, offset := "its slices or geometry differ", math.NaN()
	if b0 != nil {
		what, offset = describeDifference(s, b0)
	}
	f.Message = fmt.Sprintf("this series has no b0 of its own, and the b0 of %s in the same frame of reference does not fit it: %s. "+
		"b0 and DWI do not image the same voxels, so no ADC can be computed from them.", seriesName(donor), what)
	if !math.IsNaN(offset) {
		f.Measured = offset
		f.Expected = 0.0
	} else {
		f.Measured = what
		f.Expected = "the slice positions and geometry of this series"
	}
	return f
}

// describeDifference says how the slices of a volume of another series
// differ from series s, and the largest distance of its slices from
// s's slice positions along the normal (NaN when that is not the
// difference).
func describeDifference(s *dwi.Series, v *dwi.Volume) (string, float64) {
	tol := dwi.DefaultTolerances()
	var why []string
	worst := 0.0
	var pos []float64
	for _, fr := range v.Slices {
		if fr == nil {
			continue
		}
		g := fr.Geometry
		p := dot3(g.Position, s.Normal)
		pos = append(pos, p)
		if len(s.Grid) > 0 {
			d := math.Inf(1)
			for _, q := range s.Grid {
				d = min(d, math.Abs(p-q))
			}
			worst = max(worst, d)
		}
		ref := s.Reference
		if g.Rows != ref.Rows || g.Columns != ref.Columns {
			why = appendOnce(why, fmt.Sprintf("matrix %d×%d against %d×%d", g.Rows, g.Columns, ref.Rows, ref.Columns))
		}
		if math.Abs(g.PixelSpacing[0]-ref.PixelSpacing[0]) > tol.Spacing || math.Abs(g.PixelSpacing[1]-ref.PixelSpacing[1]) > tol.Spacing {
			why = appendOnce(why, fmt.Sprintf("pixel spacing %g×%g mm against %g×%g mm", g.PixelSpacing[0], g.PixelSpacing[1], ref.PixelSpacing[0], ref.PixelSpacing[1]))
		}
		dOri := 0.0
		for i := range 6 {
			dOri = max(dOri, math.Abs(g.Orientation[i]-ref.Orientation[i]))
		}
		if dOri > tol.Orientation {
			why = appendOnce(why, fmt.Sprintf("orientation differing by up to %.3g in its direction cosines", dOri))
		}
		d := [3]float64{g.Position[0] - ref.Position[0], g.Position[1] - ref.Position[1], g.Position[2] - ref.Position[2]}
		r := dot3(d, [3]float64{ref.Orientation[0], ref.Orientation[1], ref.Orientation[2]})
		c := dot3(d, [3]float64{ref.Orientation[3], ref.Orientation[4], ref.Orientation[5]})
		if math.Abs(r) > tol.SlicePosition || math.Abs(c) > tol.SlicePosition {
			why = appendOnce(why, fmt.Sprintf("shifted in plane by %.2f mm along rows and %.2f mm along columns", r, c))
		}
	}
	offset := math.NaN()
	if worst > tol.SlicePosition && len(pos) > 0 {
		slices.Sort(pos)
		why = append([]string{fmt.Sprintf("its %d b0 slices (%.1f to %.1f mm) lie up to %.2f mm from this series' %d slice positions (%.1f to %.1f mm) along the slice normal",
			len(pos), pos[0], pos[len(pos)-1], worst, len(s.Grid), s.Grid[0], s.Grid[len(s.Grid)-1])}, why...)
		offset = worst
	}
	if len(why) == 0 {
		return "its slices overlap this series' positions twice or leave the grid", math.NaN()
	}
	return strings.Join(why, "; "), offset
}

func appendOnce(list []string, s string) []string {
	if slices.Contains(list, s) {
		return list
	}
	return append(list, s)
}

func dot3(a, b [3]float64) float64 { return a[0]*b[0] + a[1]*b[1] + a[2]*b[2] }
