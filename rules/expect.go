package rules

import (
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"

	"dwiaudit/audit/dwi"
)

// expectation is what the rules hold a series to: its protocol's
// values, or the defaults for a series no protocol matches (phantoms
// included):
//
//   - b0: any acquired image at b <= thresholds.missing_b0.unmatched_max_b
//     (200) serves, as it does for the computation;
//   - no expected b-value set, no minimum direction count, no parenchyma
//     range, no CSF check: the anatomy and protocol are unknown;
//   - what physics says of any series still applies: b-values
//     consistent inside a volume and with the b-matrix, no tissue above
//     free water, no negative ADC, SNR, the scanner map, geometry.
type expectation struct {
	protocol *Protocol // nil when unmatched
	name     string    // for messages: `protocol "brain"` or "no protocol matched"
	lowestB  float64
	refMaxB  float64 // an acquired volume at b <= refMaxB is a reference (b0)
	absTol   float64
	relTol   float64
}

func expectFor(sa *SeriesAudit, cfg *Config) expectation {
	e := expectation{
		name:    "no protocol matched",
		absTol:  DefaultBTolerance,
		relTol:  cfg.Thresholds.BValueMismatch.RelativeTolerance,
		refMaxB: cfg.Thresholds.MissingB0.UnmatchedMaxB,
	}
	if sa.Phantom != nil {
		e.name = fmt.Sprintf("phantom profile %q", sa.Phantom.Name)
	}
	if p := sa.Protocol; p != nil {
		e.protocol = p
		e.name = fmt.Sprintf("protocol %q", p.Name)
		e.lowestB = p.LowestB
		if p.BTolerance > 0 {
			e.absTol = p.BTolerance
		}
		e.refMaxB = p.LowestB + e.tol(p.LowestB)
	}
	return e
}

// tol is the b-value tolerance at b: max(absolute, relative*b), the
// form of dwi.Tolerances.
func (e expectation) tol(b float64) float64 { return max(e.absTol, e.relTol*math.Abs(b)) }

// bTolerance is a protocol's tolerance at b, with relTol for the
// relative part.
func (p *Protocol) bTolerance(b, relTol float64) float64 {
	abs := p.BTolerance
	if abs <= 0 {
		abs = DefaultBTolerance
	}
	return max(abs, relTol*math.Abs(b))
}

// isReference says whether v is one of the series' b0 volumes under e.
func (e expectation) isReference(v *dwi.Volume) bool {
	return v.Kind == dwi.KindAcquired && v.BValue <= e.refMaxB
}

// acquired is the series' acquired volumes (maps are in Series.Maps).
func acquired(s *dwi.Series) []*dwi.Volume {
	var out []*dwi.Volume
	for _, v := range s.Volumes {
		if v != nil && v.Kind == dwi.KindAcquired {
			out = append(out, v)
		}
	}
	return out
}

// referenceOnly says whether every acquired volume of s is a reference
// (a b0 series of its own, donating its b0 to the DWI series).
func (e expectation) referenceOnly(s *dwi.Series) bool {
	vs := acquired(s)
	return len(vs) > 0 && !slices.ContainsFunc(vs, func(v *dwi.Volume) bool { return !e.isReference(v) })
}

// Formatting for messages.

// fmtADC writes an ADC in the units of docs/references.md#units: "0.71e-3 mm²/s".
func fmtADC(v float64) string { return fmt.Sprintf("%.2fe-3 mm²/s", v*1e3) }

// fmtB writes b-values: "0, 1000 s/mm²".
func fmtB(bs ...float64) string {
	parts := make([]string, len(bs))
	for i, b := range bs {
		// Nominal values are whole numbers; a measured one (an image's
		// own b-value) reads to a tenth, never 999.9979999999283.
		parts[i] = strconv.FormatFloat(math.Round(b*10)/10, 'f', -1, 64)
	}
	return strings.Join(parts, ", ") + " s/mm²"
}

// maxListed is how many slice positions a message lists before "and N
// more": enough for the usual one or two, short enough to read.
const maxListed = 6

// fmtPositions writes slice positions: "12.5 mm and 15.0 mm",
// "-5.0 mm, 0.0 mm, 5.0 mm and 3 more".
func fmtPositions(ps []float64) string {
	parts := make([]string, 0, min(len(ps), maxListed))
	for i, p := range ps {
		if i == maxListed {
			break
		}
		parts = append(parts, fmt.Sprintf("%.1f mm", p))
	}
	switch {
	case len(ps) > maxListed:
		return strings.Join(parts, ", ") + fmt.Sprintf(" and %d more", len(ps)-maxListed)
	case len(parts) <= 1:
		return strings.Join(parts, "")
	}
	return strings.Join(parts[:len(parts)-1], ", ") + " and " + parts[len(parts)-1]
}

// plural writes "1 image", "3 images".
func plural(n int, one, many string) string {
	if n == 1 {
		return "1 " + one
	}
	return fmt.Sprintf("%d %s", n, many)
}

// seriesName names another series of the study: `series 1 ("DWI b0")`.
func seriesName(s *dwi.Series) string {
	if s.SeriesDescription == "" {
		return fmt.Sprintf("series %d", s.SeriesNumber)
	}
	return fmt.Sprintf("series %d (%q)", s.SeriesNumber, s.SeriesDescription)
}

// findSeries is the assembled series with this UID in the study, nil if
// none.
func findSeries(st *Study, uid string) *dwi.Series {
	if st == nil {
		return nil
	}
	for _, sa := range st.Series {
		if sa.Series != nil && sa.Series.SeriesInstanceUID == uid {
			return sa.Series
		}
	}
	if st.Assembly != nil {
		for _, s := range st.Assembly.Series {
			if s.SeriesInstanceUID == uid {
				return s
			}
		}
	}
	return nil
}
