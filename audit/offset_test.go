package audit_test

import (
	"fmt"
	"math"
	"slices"
	"strings"
	"testing"

	"dwiaudit/audit/phantom"
	"dwiaudit/rules"
)

// TestOffsetB0IsGeometryMismatch is issue 15's held-out geometry case
// through the whole audit: a b0 volume inside the DWI series whose
// slices lie a fraction of the slice spacing off the DWI's (the
// phantom's Truth.B0SliceZ − Truth.SliceZ) gives geometry-mismatch with
// the offset in mm, and never incomplete-series or missing-b0. Classic
// and multi-frame.
func TestOffsetB0IsGeometryMismatch(t *testing.T) {
	for _, shift := range []float64{0.25, 0.5, -0.3, 0.75} {
		for _, multi := range []bool{false, true} {
			t.Run(fmt.Sprintf("a b0 %+g of a slice off, %s", shift, modeName(multi)), func(t *testing.T) {
				t.Parallel()
				opt := phantom.Options{Case: phantom.CaseSlicePositions, B0InSeries: true, B0SliceShift: shift,
					Matrix: 64, Slices: acceptanceSlices, Seed: 1, MultiFrame: multi}
				st, err := phantom.Write(t.TempDir(), opt)
				if err != nil {
					t.Fatal(err)
				}
				mm := st.Truth.B0SliceZ[0] - st.Truth.SliceZ[0]
				exp := expectation{
					phantom: opt.Case, fires: []string{rules.IDGeometryMismatch},
					silent: []string{rules.IDIncompleteSeries, rules.IDMissingB0},
				}
				rep := auditWritten(t, st, opt, exp)
				i := slices.IndexFunc(rep.Findings, func(f rules.Finding) bool { return f.Rule == rules.IDGeometryMismatch })
				if i < 0 {
					return // reported by auditWritten
				}
				if want := fmt.Sprintf("%+.2f mm", mm); !strings.Contains(rep.Findings[i].Message, want) || math.Abs(mm) < 1 {
					t.Errorf("geometry-mismatch %q does not give the offset %s", rep.Findings[i].Message, want)
				}
			})
		}
	}
}
