package rules

import (
	"fmt"
	"strings"
)

// unknownDirections is rule unknown-directions: at some b-value above
// the reference range the series' diffusion-weighted images carry no
// gradient direction (no Diffusion Gradient Orientation (0018,9089), no
// b-matrix, no private source the reader knows; PS3.3 C.8.13.5.9) and
// do not say they are the scanner's trace (Diffusion Directionality
// ISOTROPIC), with several of them on one slice (dwi
// Facts.UnknownDirections).
//
// The audit cannot tell distinct directions from repeats of one. The
// assembly takes their geometric mean per slice as the trace: right when
// they are distinct directions whose second moment is isotropic (three
// orthogonal ones, a balanced scheme; Basser & Pierpaoli, docs/references.md#basser-pierpaoli),
// biased by how the fibres lie when they are repeats of fewer
// directions or an unbalanced set. Warning: the ADC may be wrong, and
// the direction count cannot be checked against the protocol.
type unknownDirections struct{}

// NewUnknownDirections returns rule unknown-directions.
func NewUnknownDirections() Rule { return unknownDirections{} }

func (unknownDirections) ID() string { return IDUnknownDirections }

func (unknownDirections) Check(st *Study, cfg *Config) []Finding {
	var out []Finding
	for _, sa := range st.Series {
		s := sa.Series
		if s == nil || len(s.Facts.UnknownDirections) == 0 {
			continue
		}
		var parts []string
		images := 0
		for _, u := range s.Facts.UnknownDirections {
			parts = append(parts, fmt.Sprintf("b = %s: %s, up to %d on one slice", fmtB(u.BValue), plural(u.Images, "image", "images"), u.PerSlice))
			images += u.Images
		}
		f := NewFinding(sa, IDUnknownDirections, SeverityWarning)
		f.Message = fmt.Sprintf("diffusion-weighted images carry no gradient direction and do not say they are the scanner's trace (%s). "+
			"Without directions the audit cannot tell distinct gradient directions from repeats of one: it combined them per slice as a trace "+
			"(their geometric mean), which is right only for distinct directions of a balanced scheme such as three orthogonal ones. "+
			"If some are repeats or the scheme is unbalanced, the trace depends on how the fibres lie and the ADC may be wrong, in white matter especially; "+
			"the number of directions cannot be checked either. The directions may sit in private elements this node does not read.",
			strings.Join(parts, "; "))
		f.Measured = float64(images)
		f.Expected = 0.0
		out = append(out, f)
	}
	return out
}
