package dwi

import (
	"testing"

	"dwiaudit/audit/phantom"
)

// TestBodyPartExaminedReachesTheSeries: Body Part Examined (0018,0015),
// of the General Series module (PS3.3 C.7.3.1), is read from classic and
// multi-frame files and carried to the assembled series, where the rules
// match protocols on it.
func TestBodyPartExaminedReachesTheSeries(t *testing.T) {
	cases := []struct {
		name string
		c    phantom.Case
		want string // what audit/phantom writes (phantom.go, common)
	}{
		{"the digital brain says BRAIN", phantom.CaseClean, "BRAIN"},
		{"the ice-water phantom says HEAD", phantom.CaseIceWater0C, "HEAD"},
	}
	for _, c := range cases {
		for _, multi := range []bool{false, true} {
			layout := "in classic files"
			if multi {
				layout = "in multi-frame files"
			}
			t.Run(c.name+" "+layout, func(t *testing.T) {
				ps, st := phantomStudy(t, phantom.Options{Case: c.c, Matrix: 16, Slices: 4, MultiFrame: multi})
				s := dwiSeries(t, ps, st)
				if s.BodyPartExamined != c.want {
					t.Errorf("series body part %q, want %q", s.BodyPartExamined, c.want)
				}
				for _, v := range s.Volumes {
					for _, f := range v.Slices {
						if f != nil && f.BodyPartExamined != c.want {
							t.Fatalf("image %s body part %q, want %q", f.ID(), f.BodyPartExamined, c.want)
						}
					}
				}
			})
		}
	}
}
