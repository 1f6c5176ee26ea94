package phantom_test

import (
	"fmt"
	"math"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"dwiaudit/audit/dwi"
	"dwiaudit/audit/header"
	"dwiaudit/audit/phantom"
)

// This file reads the phantom back with the audit's own readers: every
// layout must extract and assemble into the series the standard layout
// gives (same b-values, directions, slices and pixels), which is what a
// reader of that layout is for.

// assembled extracts every file of st and assembles the study.
func assembled(t *testing.T, st *phantom.Study) *dwi.Study {
	t.Helper()
	var frames []dwi.Frame
	for _, p := range st.Files {
		fs, err := header.ExtractFile(p, header.ExtractOptions{LoadPixels: true})
		if err != nil {
			t.Fatalf("%s: %v", p, err)
		}
		frames = append(frames, fs...)
	}
	s, err := dwi.AssembleStudy(frames, dwi.DefaultTolerances())
	if err != nil {
		t.Fatal(err)
	}
	if len(s.Failed) > 0 {
		t.Fatalf("failed series: %v", s.Failed)
	}
	return s
}

// direction names d with its sign fixed (first non-zero component
// positive: a gradient and its opposite weight diffusion alike), "iso"
// for none.
func direction(d dwi.Direction) string {
	if d == (dwi.Direction{}) {
		return "iso"
	}
	for _, c := range d {
		if math.Abs(c) > 1e-6 {
			if c < 0 {
				d = dwi.Direction{-d[0], -d[1], -d[2]}
			}
			break
		}
	}
	return fmt.Sprintf("%.3f,%.3f,%.3f", d[0]+0, d[1]+0, d[2]+0)
}

// summary is what must agree between layouts, one line per volume slice
// and one per series.
func summary(s *dwi.Study) []string {
	var out []string
	for _, se := range s.Series {
		dirs := map[float64][]string{}
		for b, ds := range se.Facts.Directions {
			for _, d := range ds {
				dirs[b] = append(dirs[b], direction(d))
			}
			slices.Sort(dirs[b])
		}
		out = append(out, fmt.Sprintf("series %d: b-values %v directions %v slices %d per volume %v maps %d",
			se.SeriesNumber, se.Facts.BValues, dirs, len(se.Grid), se.Facts.SlicesPerVolume, len(se.Maps)))
		for _, vs := range [][]*dwi.Volume{se.Volumes, se.Maps} {
			for _, v := range vs {
				for i, f := range v.Slices {
					sum := "absent"
					if f != nil {
						var x float64
						for _, p := range f.Pixels {
							x += float64(p)
						}
						sum = fmt.Sprintf("%.0f", x)
					}
					out = append(out, fmt.Sprintf("series %d %s b %g %s isotropic %t slice %d at %.3f: pixel sum %s",
						se.SeriesNumber, v.Kind, v.BValue, direction(v.Direction), v.Isotropic, i, se.Grid[i], sum))
				}
			}
		}
	}
	slices.Sort(out)
	return out
}

// roundTripLayouts are the layouts compared with the standard one, each
// read back by its maker's reader in audit/header.
func roundTripLayouts() []phantom.Layout {
	return []phantom.Layout{
		phantom.LayoutEnhanced, phantom.LayoutSiemensMosaic, phantom.LayoutGE,
		phantom.LayoutPhilips, phantom.LayoutCanon, phantom.LayoutUIH,
	}
}

func TestPhantomLayoutsRoundTripThroughTheReaders(t *testing.T) {
	for _, c := range []phantom.Case{phantom.CaseClean, phantom.CaseScannerADCCorrect, phantom.CaseSlicePositions} {
		opt := phantom.Options{Case: c, Matrix: 32, Slices: 5, Seed: 3}
		std, err := phantom.Write(filepath.Join(t.TempDir(), "standard"), opt)
		if err != nil {
			t.Fatal(err)
		}
		want := summary(assembled(t, std))
		t.Run(fmt.Sprintf("case %s in the standard layout assembles as written", c), func(t *testing.T) {
			// The generator's truth: b-values as written in the header,
			// three directions, every slice (audit/phantom Truth).
			head := fmt.Sprintf("b-values %v directions map[1000:[0.000,0.000,1.000 0.000,1.000,0.000 1.000,0.000,0.000]] slices %d", std.Truth.HeaderB, opt.Slices)
			if c == phantom.CaseSlicePositions {
				head = fmt.Sprintf("b-values [1000] directions map[1000:[0.000,0.000,1.000 0.000,1.000,0.000 1.000,0.000,0.000]] slices %d", opt.Slices)
			}
			if !slices.ContainsFunc(want, func(s string) bool { return strings.Contains(s, head) }) {
				t.Fatalf("no series with %q in\n%s", head, strings.Join(want, "\n"))
			}
		})
		for _, l := range roundTripLayouts() {
			t.Run(fmt.Sprintf("case %s in layout %s assembles as the standard layout", c, l), func(t *testing.T) {
				o := opt
				o.Layout = l
				st, err := phantom.Write(filepath.Join(t.TempDir(), string(l)), o)
				if err != nil {
					t.Fatal(err)
				}
				got := summary(assembled(t, st))
				if !slices.Equal(got, want) {
					t.Fatalf("assembled as\n%s\nthe standard layout as\n%s", diffLines(got, want), diffLines(want, got))
				}
			})
		}
	}
}

// diffLines is the lines of a not in b, at most ten.
func diffLines(a, b []string) string {
	var out []string
	for _, x := range a {
		if !slices.Contains(b, x) && len(out) < 10 {
			out = append(out, "  "+x)
		}
	}
	return strings.Join(out, "\n")
}
