package dwi

import (
	"fmt"
	"math"
	"path/filepath"
	"slices"
	"testing"

	"dwiaudit/audit/phantom"
)

// phantomStudy writes a small phantom case and assembles it.
func phantomStudy(t *testing.T, opt phantom.Options) (*phantom.Study, *Study) {
	t.Helper()
	ps, err := phantom.Write(filepath.Join(t.TempDir(), "study"), opt)
	if err != nil {
		t.Fatal(err)
	}
	var frames []Frame
	for _, p := range ps.Files {
		fs, err := ExtractFileForTest(p)
		if err != nil {
			t.Fatalf("%s: %v", p, err)
		}
		frames = append(frames, fs...)
	}
	st, err := AssembleStudy(frames, DefaultTolerances())
	if err != nil {
		t.Fatal(err)
	}
	if len(st.Failed) > 0 {
		t.Fatalf("failed series: %v", st.Failed)
	}
	return ps, st
}

// dwiSeries is the assembled series of the phantom's DWI series.
func dwiSeries(t *testing.T, ps *phantom.Study, st *Study) *Series {
	t.Helper()
	for _, info := range ps.Series {
		if info.Role != phantom.RoleDWI {
			continue
		}
		for _, s := range st.Series {
			if s.SeriesInstanceUID == info.UID {
				return s
			}
		}
	}
	t.Fatalf("no DWI series among %d", len(st.Series))
	return nil
}

func TestPhantomCasesAssembleAsPlanted(t *testing.T) {
	for _, c := range phantom.Cases() {
		t.Run(fmt.Sprintf("case %s assembles alike from classic and multi-frame files, with its defect in the facts", c), func(t *testing.T) {
			opt := phantom.Options{Case: c, Matrix: 16, Slices: 6}
			ps, classic := phantomStudy(t, opt)
			opt.MultiFrame = true
			_, multi := phantomStudy(t, opt)

			if len(classic.Series) != len(multi.Series) {
				t.Fatalf("%d series from classic files, %d from multi-frame", len(classic.Series), len(multi.Series))
			}
			for i := range classic.Series {
				a, b := classic.Series[i], multi.Series[i]
				if !slices.Equal(a.Grid, b.Grid) || fmt.Sprint(a.Facts.BValues, a.Facts.Directions, a.Facts.SlicesPerVolume, a.Facts.MissingSlices) !=
					fmt.Sprint(b.Facts.BValues, b.Facts.Directions, b.Facts.SlicesPerVolume, b.Facts.MissingSlices) {
					t.Errorf("series %d: grid %v facts %+v\nagainst grid %v facts %+v", i, a.Grid, a.Facts, b.Grid, b.Facts)
				}
				sameSummaries(t, summarise(a), summarise(b))
			}

			s := dwiSeries(t, ps, classic)
			truth := ps.Truth
			// The b-values written in the header, and the directions, are the
			// generator's truth (audit/phantom Truth.HeaderB, Directions).
			wantB := slices.Compact(slices.Clone(truth.HeaderB))
			gotB := slices.Clone(s.Facts.BValues)
			if s.Facts.B0FromSeries == "" && c == phantom.CaseSlicePositions {
				wantB = slices.DeleteFunc(wantB, func(b float64) bool { return b == 0 }) // its b0 is in a series of its own
			}
			if !slices.Equal(gotB, wantB) {
				t.Errorf("b-values %v, want %v", gotB, wantB)
			}
			for b, dirs := range s.Facts.Directions {
				if len(dirs) != len(truth.Directions) {
					t.Errorf("b=%v: %d directions, want %d", b, len(dirs), len(truth.Directions))
				}
			}
			if len(s.Grid) != truth.Slices {
				t.Errorf("grid of %d slices, want %d", len(s.Grid), truth.Slices)
			}

			switch c {
			case phantom.CaseNoB0:
				if slices.Contains(s.Facts.BValues, 0) {
					t.Error("a b0 volume in the no-b0 case")
				}
			case phantom.CaseMissingSlices:
				var want []float64
				for _, sl := range truth.Planted[0].Slices {
					want = append(want, truth.SliceZ[sl])
				}
				var got []float64
				for _, m := range s.Facts.MissingSlices {
					got = append(got, m.Position)
				}
				if len(got) == 0 || !subset(want, got) || !subset(got, want) {
					t.Errorf("missing slices at %v, planted at %v", got, want)
				}
			case phantom.CaseSlicePositions:
				if s.Facts.B0FromSeries != "" || len(s.Facts.B0Unmatched) != 1 {
					t.Errorf("b0 borrowed from %q, unmatched %v: want the shifted b0 refused and named", s.Facts.B0FromSeries, s.Facts.B0Unmatched)
				}
			case phantom.CaseScannerADCCorrect, phantom.CaseScannerADCScaled:
				if len(s.Maps) != 1 || s.Maps[0].Kind != KindADC || slices.Contains(s.Maps[0].Slices, nil) {
					t.Fatalf("maps %v, want the scanner ADC map on every slice", s.Maps)
				}
				if rw := s.Maps[0].Slices[0].RealWorld; len(rw) != 1 || rw[0].Slope != truth.ADCMapSlope {
					t.Errorf("real world values %+v, want slope %v", rw, truth.ADCMapSlope)
				}
			default:
				if s.Facts.MissingSlices != nil || s.Facts.GeometryMismatch != nil || s.Facts.Duplicates != nil || s.Facts.InconsistentB != nil {
					t.Errorf("facts %+v on a case without structural defect", s.Facts)
				}
			}
		})
	}
}

func TestPhantomB0InItsOwnSeriesIsBorrowed(t *testing.T) {
	for _, mf := range []bool{false, true} {
		t.Run(fmt.Sprintf("multi-frame %v: the DWI series borrows the b0 series", mf), func(t *testing.T) {
			ps, st := phantomStudy(t, phantom.Options{Matrix: 16, Slices: 4, B0Series: true, MultiFrame: mf})
			s := dwiSeries(t, ps, st)
			var b0UID string
			for _, info := range ps.Series {
				if info.Role == phantom.RoleB0 {
					b0UID = info.UID
				}
			}
			if b0UID == "" || s.Facts.B0FromSeries != b0UID || s.Volumes[0].BValue != 0 || slices.Contains(s.Volumes[0].Slices, nil) {
				t.Errorf("borrowed from %q (b0 series %q), first volume %v", s.Facts.B0FromSeries, b0UID, s.Volumes[0])
			}
		})
	}
}

func TestPhantomNoiselessB0PixelsAreTheTruth(t *testing.T) {
	// With SNR +Inf the b0 pixels are the generator's noiseless b0
	// (audit/phantom Truth.B0, voxel (slice*Rows+row)*Cols+col), to the
	// rounding of integer pixels: a check of row, column and slice order.
	for _, mf := range []bool{false, true} {
		t.Run(fmt.Sprintf("multi-frame %v: b0 voxel (slice, row, column) is Truth.B0 at the same index", mf), func(t *testing.T) {
			ps, st := phantomStudy(t, phantom.Options{Matrix: 16, Slices: 4, SNR: math.Inf(1), MultiFrame: mf})
			s := dwiSeries(t, ps, st)
			tr := ps.Truth
			b0 := s.Volumes[0]
			if b0.BValue != 0 || len(b0.Slices) != tr.Slices {
				t.Fatalf("first volume %v with %d slices", b0, len(b0.Slices))
			}
			worst, peak := 0.0, 0.0
			for sl, f := range b0.Slices {
				if math.Abs(s.Grid[sl]-tr.B0SliceZ[sl]) > 1e-6 {
					t.Errorf("slice %d at %v, truth %v", sl, s.Grid[sl], tr.B0SliceZ[sl])
				}
				for r := range tr.Rows {
					for c := range tr.Cols {
						d := math.Abs(float64(f.Pixels[r*tr.Cols+c]) - float64(tr.B0[tr.Index(r, c, sl)]))
						worst, peak = max(worst, d), max(peak, float64(f.Pixels[r*tr.Cols+c]))
					}
				}
			}
			if worst > 0.5+1e-3 || peak < phantom.S0WhiteMatter {
				t.Errorf("largest difference %v (brightest pixel %v), want at most the rounding 0.5 on a brain", worst, peak)
			}
		})
	}
}

// subset says whether every value of a is in b (within 1e-6 mm).
func subset(a, b []float64) bool {
	for _, x := range a {
		if !slices.ContainsFunc(b, func(y float64) bool { return math.Abs(x-y) < 1e-6 }) {
			return false
		}
	}
	return true
}

// TestOffsetB0InTheSeriesIsAGeometryMismatch is issue 15's held-out
// case: the b0 volume of a DWI series offset along the normal by a
// fraction of the slice spacing. The truth is the phantom's
// (Truth.B0SliceZ − Truth.SliceZ); the assembly must place the b0 on the
// DWI's slices, report the offset in mm, and find no missing slice.
func TestOffsetB0InTheSeriesIsAGeometryMismatch(t *testing.T) {
	for _, shift := range []float64{0.25, 0.5, -0.4, 0.1, 0.75} {
		for _, multi := range []bool{false, true} {
			t.Run(fmt.Sprintf("a b0 %+g of a slice off, multi-frame %v, is an offset of that many mm and no missing slice", shift, multi), func(t *testing.T) {
				opt := phantom.Options{Case: phantom.CaseSlicePositions, B0InSeries: true, B0SliceShift: shift, Matrix: 16, Slices: 6, MultiFrame: multi}
				ps, st := phantomStudy(t, opt)
				if len(st.Series) != 1 {
					t.Fatalf("%d series, want the DWI series alone", len(st.Series))
				}
				s := st.Series[0]
				want := ps.Truth.B0SliceZ[0] - ps.Truth.SliceZ[0]
				if len(s.Grid) != opt.Slices || len(s.Facts.MissingSlices) != 0 || len(s.Facts.GridGaps) != 0 {
					t.Errorf("grid %v, missing %v, gaps %v: want the %d DWI positions and nothing missing", s.Grid, s.Facts.MissingSlices, s.Facts.GridGaps, opt.Slices)
				}
				if len(s.Facts.SliceOffsets) != 1 || math.Abs(s.Facts.SliceOffsets[0].MM-want) > 0.01 || len(s.Facts.GeometryMismatch) == 0 {
					t.Fatalf("offsets %+v, mismatch %v: want the b0 %+.2f mm off", s.Facts.SliceOffsets, s.Facts.GeometryMismatch, want)
				}
				if o := s.Facts.SliceOffsets[0]; o.Volume != "b=0 isotropic" && o.Volume != "b=0 without direction" {
					t.Errorf("offset volume %q, want the b0", o.Volume)
				}
			})
		}
	}
	t.Run("a tilted b0 is an offset with the tilt named", func(t *testing.T) {
		ps, err := phantom.Write(filepath.Join(t.TempDir(), "study"), phantom.Options{Matrix: 16, Slices: 6})
		if err != nil {
			t.Fatal(err)
		}
		var frames []Frame
		for _, p := range ps.Files {
			fs, err := ExtractFileForTest(p)
			if err != nil {
				t.Fatal(err)
			}
			frames = append(frames, fs...)
		}
		// Tilt every b0 image by 3 degrees about the row direction: the
		// column vector leans into the normal, and the image corner (the
		// Image Position) moves along the normal by the tilt's lever.
		const deg = 3.0
		c, sn := math.Cos(deg*math.Pi/180), math.Sin(deg*math.Pi/180)
		tilted := 0
		for i := range frames {
			f := &frames[i]
			if f.HasBValue && f.BValue == 0 {
				o := f.Geometry.Orientation
				row := [3]float64{o[0], o[1], o[2]}
				col := [3]float64{o[3], o[4], o[5]}
				n := [3]float64{row[1]*col[2] - row[2]*col[1], row[2]*col[0] - row[0]*col[2], row[0]*col[1] - row[1]*col[0]}
				for k := range 3 {
					f.Geometry.Orientation[3+k] = c*col[k] + sn*n[k]
				}
				// A lever of half the field of view moves the corner by
				// its sine along the normal; about 1.1 mm at 21 mm.
				for k := range 3 {
					f.Geometry.Position[k] += 1.1 * n[k]
				}
				tilted++
			}
		}
		if tilted == 0 {
			t.Fatal("no b0 image to tilt")
		}
		st, err := AssembleStudy(frames, DefaultTolerances())
		if err != nil {
			t.Fatal(err)
		}
		s := st.Series[0]
		if len(s.Facts.MissingSlices) != 0 || len(s.Facts.SliceOffsets) != 1 || !s.Facts.SliceOffsets[0].Tilted {
			t.Errorf("missing %v, offsets %+v: want one tilted offset volume and nothing missing", s.Facts.MissingSlices, s.Facts.SliceOffsets)
		}
	})
}

// TestSliceOffsetSitsOnBothSidesOfTheTolerance: a b0 0.05 mm off (half
// of Tolerances.SlicePosition, 0.1 mm) is the same slices; 0.25 mm off
// (2.5 times it) is an offset volume.
func TestSliceOffsetSitsOnBothSidesOfTheTolerance(t *testing.T) {
	for _, c := range []struct {
		mm     float64
		offset bool
	}{{0.05, false}, {0.25, true}} {
		t.Run(fmt.Sprintf("a b0 %.2f mm off is an offset: %v", c.mm, c.offset), func(t *testing.T) {
			// The phantom's slices are 5 mm apart.
			_, st := phantomStudy(t, phantom.Options{Case: phantom.CaseSlicePositions, B0InSeries: true, B0SliceShift: c.mm / 5, Matrix: 16, Slices: 6})
			s := st.Series[0]
			if got := len(s.Facts.SliceOffsets) == 1; got != c.offset || len(s.Facts.MissingSlices) != 0 {
				t.Errorf("offsets %+v, missing %v", s.Facts.SliceOffsets, s.Facts.MissingSlices)
			}
		})
	}
}
