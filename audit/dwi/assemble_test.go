package dwi

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"
	"testing"
)

// volumeSummary is what must agree between two assemblies of the same
// content: b-values, directions, the grid and every pixel.
type volumeSummary struct {
	b         float64
	dir       Direction
	isotropic bool
	kind      MapKind
	slices    []float64 // slice positions present, NaN where missing
	geometry  Geometry
	pixels    [][]float32
}

func summarise(s *Series) []volumeSummary {
	var out []volumeSummary
	for _, v := range append(slices.Clone(s.Volumes), s.Maps...) {
		vs := volumeSummary{b: v.BValue, dir: v.Direction, isotropic: v.Isotropic, kind: v.Kind, geometry: v.Geometry}
		for i, f := range v.Slices {
			if f == nil {
				vs.slices = append(vs.slices, math.NaN())
				vs.pixels = append(vs.pixels, nil)
				continue
			}
			vs.slices = append(vs.slices, s.Grid[i])
			vs.pixels = append(vs.pixels, f.Pixels)
		}
		out = append(out, vs)
	}
	return out
}

func sameSummaries(t *testing.T, a, b []volumeSummary) {
	t.Helper()
	if len(a) != len(b) {
		t.Fatalf("%d volumes against %d", len(a), len(b))
	}
	for i := range a {
		x, y := a[i], b[i]
		if x.b != y.b || x.dir != y.dir || x.isotropic != y.isotropic || x.kind != y.kind || x.geometry != y.geometry {
			t.Errorf("volume %d: b %v dir %v iso %v kind %v geometry %+v against b %v dir %v iso %v kind %v geometry %+v",
				i, x.b, x.dir, x.isotropic, x.kind, x.geometry, y.b, y.dir, y.isotropic, y.kind, y.geometry)
		}
		if !slices.EqualFunc(x.slices, y.slices, func(p, q float64) bool { return p == q || math.IsNaN(p) && math.IsNaN(q) }) {
			t.Errorf("volume %d: slices %v against %v", i, x.slices, y.slices)
		}
		for j := range x.pixels {
			if !slices.Equal(x.pixels[j], y.pixels[j]) {
				t.Errorf("volume %d slice %d: pixels differ", i, j)
			}
		}
	}
}

func TestClassicAndMultiframeGiveTheSameVolumes(t *testing.T) {
	images := dwiImages(4, 500, 1000)
	for s := range 4 {
		images = append(images, img{b: 1000, iso: true, slice: float64(s)})
	}
	s := newSeries("same", images...)
	s.slope, s.intercept = 0.5, 3
	for _, ts := range allSyntaxes {
		t.Run("classic and Enhanced MR in "+ts+" give the same b-values, directions, grid and pixels", func(t *testing.T) {
			classic, err := AssembleSeries(extractAll(t, s.classic(t, ts)), DefaultTolerances())
			if err != nil {
				t.Fatal(err)
			}
			multi, err := AssembleSeries(extractAll(t, [][]byte{s.enhanced(t, ts)}), DefaultTolerances())
			if err != nil {
				t.Fatal(err)
			}
			if !slices.Equal(classic.Grid, multi.Grid) || classic.Normal != multi.Normal {
				t.Errorf("grid %v normal %v against %v %v", classic.Grid, classic.Normal, multi.Grid, multi.Normal)
			}
			if fmt.Sprint(classic.Facts) != fmt.Sprint(multi.Facts) {
				t.Errorf("facts\n%+v\n%+v", classic.Facts, multi.Facts)
			}
			sameSummaries(t, summarise(classic), summarise(multi))
			// b0, three directions at 500, trace and three directions at
			// 1000: 8 volumes of 4 slices.
			if len(classic.Volumes) != 8 || !slices.Equal(classic.Facts.BValues, []float64{0, 500, 1000}) ||
				len(classic.Facts.Directions[500]) != 3 || len(classic.Facts.Directions[1000]) != 3 ||
				!slices.Equal(classic.Facts.SlicesPerVolume, []int{4, 4, 4, 4, 4, 4, 4, 4}) {
				t.Errorf("%d volumes, facts %+v", len(classic.Volumes), classic.Facts)
			}
		})
	}
}

// frames builds a series' frames from its classic files.
func framesOf(t *testing.T, s testSeries) []Frame {
	t.Helper()
	return extractAll(t, s.classic(t, tsExplicitLE))
}

func TestBValuesWithinToleranceFormOneVolume(t *testing.T) {
	x := [3]float64{1, 0, 0}
	tests := []struct {
		name    string
		images  []img
		want    []float64 // nominal b-values of the volumes
		slices  []int
		inconst int
	}{
		// docs/references.md#bvalue-tolerance: a nominal 900 seen as 895-905 (common practice).
		{"895, 900 and 905 on three slices", []img{{b: 895, dir: x, slice: 0}, {b: 905, dir: x, slice: 1}, {b: 900, dir: x, slice: 2}}, []float64{900}, []int{3}, 0},
		{"895 and 905 only", []img{{b: 895, dir: x, slice: 0}, {b: 905, dir: x, slice: 1}}, []float64{900}, []int{2}, 0},
		// IVIM protocols step by 10 s/mm^2 at the low end (common practice).
		{"IVIM b-values 0, 10, 20", []img{{b: 0}, {b: 10, dir: x}, {b: 20, dir: x}}, []float64{0, 10, 20}, []int{1, 1, 1}, 0},
		// Within the b-value tolerance of 0, a b0 reads 0 (DefaultTolerances).
		{"a b0 written as 0 and as 4", []img{{b: 0, slice: 0}, {b: 4, directionality: "NONE", slice: 1}}, []float64{0}, []int{2}, 0},
		{"a b0 written as 0.002 and b 999.998", []img{{b: 0.0020000000717118383, directionality: "NONE"}, {b: 999.9979999999283, dir: x}}, []float64{0, 1000}, []int{1, 1}, 0},
		{"800 and 1000", []img{{b: 800, dir: x}, {b: 1000, dir: x}}, []float64{800, 1000}, []int{1, 1}, 0},
		{"a b-matrix whose trace is not the b-value", []img{{b: 1000, directionality: "BMATRIX", bmatrix: &[6]float64{700, 0, 0, 0, 0, 0}}}, []float64{1000}, []int{1}, 1},
	}
	for _, tt := range tests {
		t.Run(tt.name+" give volumes at "+fmt.Sprint(tt.want), func(t *testing.T) {
			s, err := AssembleSeries(framesOf(t, newSeries("tol", tt.images...)), DefaultTolerances())
			if err != nil {
				t.Fatal(err)
			}
			var got []float64
			for _, v := range s.Volumes {
				got = append(got, v.BValue)
			}
			if !slices.Equal(got, tt.want) || !slices.Equal(s.Facts.SlicesPerVolume, tt.slices) {
				t.Errorf("volumes at %v with %v slices, want %v with %v", got, s.Facts.SlicesPerVolume, tt.want, tt.slices)
			}
			if len(s.Facts.InconsistentB) != tt.inconst {
				t.Errorf("inconsistent b %v, want %d", s.Facts.InconsistentB, tt.inconst)
			}
		})
	}
}

func TestSlicesAreOrderedAlongTheSliceNormal(t *testing.T) {
	c, sn := math.Cos(0.3), math.Sin(0.3)
	tests := []struct {
		name        string
		orientation [6]float64
	}{
		{"axial", [6]float64{1, 0, 0, 0, 1, 0}},
		{"sagittal", [6]float64{0, 1, 0, 0, 0, -1}},
		{"oblique", [6]float64{c, sn, 0, -sn, c, 0}},
		{"axial with rows reversed (normal towards the feet)", [6]float64{-1, 0, 0, 0, 1, 0}},
	}
	for _, tt := range tests {
		t.Run(tt.name+" slices given in reverse order come out ascending along row x column", func(t *testing.T) {
			s := newSeries("order", img{b: 0, slice: 3}, img{b: 0, slice: 1}, img{b: 0, slice: 2}, img{b: 0, slice: 0})
			s.orientation = tt.orientation
			series, err := AssembleSeries(framesOf(t, s), DefaultTolerances())
			if err != nil {
				t.Fatal(err)
			}
			// PS3.3 C.7.6.2.1.1: the normal is row x column; the
			// position along it is Image Position . normal.
			n := s.normal()
			if d := dot(series.Normal, n); math.Abs(d-1) > 1e-12 {
				t.Errorf("normal %v, want %v", series.Normal, n)
			}
			o := dot(s.origin, n)
			want := []float64{o, o + 4, o + 8, o + 12}
			for i := range want {
				if math.Abs(series.Grid[i]-want[i]) > 1e-9 {
					t.Fatalf("grid %v, want %v", series.Grid, want)
				}
			}
			for i, f := range series.Volumes[0].Slices {
				if got := dot(f.Geometry.Position, n); math.Abs(got-want[i]) > 1e-9 {
					t.Errorf("slice %d at %v, want %v", i, got, want[i])
				}
			}
			if series.Facts.SliceSpacing != 4 {
				t.Errorf("slice spacing %v, want 4", series.Facts.SliceSpacing)
			}
		})
	}
}

func TestAssemblyReportsWhatIsWrongAsFacts(t *testing.T) {
	x, y := [3]float64{1, 0, 0}, [3]float64{0, 1, 0}
	without := func(images []img, drop func(img) bool) []img { return slices.DeleteFunc(slices.Clone(images), drop) }
	four := dwiImages(4, 1000)
	tests := []struct {
		name   string
		images []img
		mutate func(fs []Frame)
		check  func(t *testing.T, f Facts, s *Series)
	}{
		{"a slice missing from one volume", without(four, func(m img) bool { return m.b == 1000 && m.dir == y && m.slice == 2 }), nil,
			func(t *testing.T, f Facts, s *Series) {
				if len(f.MissingSlices) != 1 || f.MissingSlices[0].BValue != 1000 || f.MissingSlices[0].Direction != Direction(y) || f.MissingSlices[0].Position != s.Grid[2] {
					t.Errorf("missing %+v", f.MissingSlices)
				}
				if !slices.Equal(f.SlicesPerVolume, []int{4, 4, 3, 4}) && !slices.Equal(f.SlicesPerVolume, []int{4, 4, 4, 3}) {
					t.Errorf("slices per volume %v", f.SlicesPerVolume)
				}
			}},
		{"a slice missing from every volume", without(dwiImages(6, 1000), func(m img) bool { return m.slice == 3 }), nil,
			func(t *testing.T, f Facts, s *Series) {
				if len(s.Grid) != 6 || len(f.GridGaps) != 1 || math.Abs(f.GridGaps[0]-s.Grid[3]) > 1e-9 {
					t.Errorf("grid %v gaps %v", s.Grid, f.GridGaps)
				}
				if len(f.MissingSlices) != 4 {
					t.Errorf("missing %+v, want one per volume", f.MissingSlices)
				}
			}},
		{"a second image of one b-value, direction and slice", append(slices.Clone(four), img{b: 1000, dir: x, slice: 1}), nil,
			func(t *testing.T, f Facts, s *Series) {
				if len(f.Repeats) != 1 || !strings.HasSuffix(f.Repeats[0], ".17") || f.Duplicates != nil {
					t.Errorf("repeats %v, duplicates %v; want the later image (.17) as a repeat", f.Repeats, f.Duplicates)
				}
			}},
		{"an image met twice", four, func(fs []Frame) {
			// The same file read twice: the same SOP Instance UID.
			fs[len(fs)-1] = fs[0]
		}, func(t *testing.T, f Facts, s *Series) {
			if len(f.Duplicates) != 1 || f.Repeats != nil {
				t.Errorf("duplicates %v, repeats %v; want one duplicate and no repeat", f.Duplicates, f.Repeats)
			}
		}},
		{"an image whose b-value is far from its volume's", four, func(fs []Frame) {
			// Chained 1000 -> 1015 -> 1030 -> 1045 keeps one cluster of
			// mean 1022.5; 1000 and 1045 are beyond 2% of it.
			for i, b := range []float64{1000, 1015, 1030, 1045} {
				for j := range fs {
					if fs[j].Gradient == x && fs[j].Geometry.Position[2] == -20+4*float64(i) {
						fs[j].BValue = b
					}
				}
			}
		}, func(t *testing.T, f Facts, s *Series) {
			if len(f.InconsistentB) != 2 {
				t.Errorf("inconsistent %v, want two", f.InconsistentB)
			}
		}},
		{"a volume with another pixel spacing", four, func(fs []Frame) {
			for i := range fs {
				if fs[i].Gradient == y {
					fs[i].Geometry.PixelSpacing = [2]float64{1.6, 1.6}
				}
			}
		}, func(t *testing.T, f Facts, s *Series) {
			if len(f.GeometryMismatch) != 1 || !strings.Contains(f.GeometryMismatch[0], "b=1000 (0.000,1.000,0.000): pixel spacing") {
				t.Errorf("geometry mismatch %v", f.GeometryMismatch)
			}
		}},
		{"a volume shifted in plane", four, func(fs []Frame) {
			for i := range fs {
				if fs[i].Gradient == x {
					fs[i].Geometry.Position[0] += 2
				}
			}
		}, func(t *testing.T, f Facts, s *Series) {
			if len(f.GeometryMismatch) != 1 || !strings.Contains(f.GeometryMismatch[0], "shifted in plane by 2 mm") {
				t.Errorf("geometry mismatch %v", f.GeometryMismatch)
			}
		}},
		{"a volume with a tilted orientation", four, func(fs []Frame) {
			for i := range fs {
				if fs[i].Gradient == x {
					c, s := math.Cos(0.01), math.Sin(0.01)
					fs[i].Geometry.Orientation = [6]float64{c, s, 0, -s, c, 0}
				}
			}
		}, func(t *testing.T, f Facts, s *Series) {
			if len(f.GeometryMismatch) != 1 || !strings.Contains(f.GeometryMismatch[0], "orientation") {
				t.Errorf("geometry mismatch %v", f.GeometryMismatch)
			}
		}},
		{"an image without geometry", four, func(fs []Frame) {
			fs[1].Geometry.Known = false // no Image Position (Patient), PS3.3 C.7.6.2
		}, func(t *testing.T, f Facts, s *Series) {
			if len(f.NoGeometry) != 1 || len(s.Volumes) != 4 || len(f.MissingSlices) != 1 {
				t.Errorf("no geometry %v, %d volumes, missing %+v; want the image left out and its slice missing", f.NoGeometry, len(s.Volumes), f.MissingSlices)
			}
		}},
		{"images without a b-value", append(slices.Clone(four), img{noB: true, directionality: "DIRECTIONAL", dir: x, slice: 0}), nil,
			func(t *testing.T, f Facts, s *Series) {
				if len(f.NoBValue) != 1 || len(s.Volumes) != 4 {
					t.Errorf("no b-value %v, %d volumes", f.NoBValue, len(s.Volumes))
				}
			}},
		{"a scanner trace beside the directions", append(slices.Clone(four), img{b: 1000, iso: true, slice: 0}, img{b: 1000, iso: true, slice: 1}), nil,
			func(t *testing.T, f Facts, s *Series) {
				v := s.Volumes[1]
				if len(s.Volumes) != 5 || v.BValue != 1000 || !v.Isotropic || len(f.Directions[1000]) != 3 {
					t.Errorf("volumes %v, directions %v", s.Volumes, f.Directions)
				}
				if len(f.MissingSlices) != 2 {
					t.Errorf("missing %+v: the trace lacks slices 2 and 3", f.MissingSlices)
				}
			}},
		{"a scanner ADC map in the series", append(slices.Clone(four), img{b: 1000, iso: true, slice: 0, imageType: []string{"DERIVED", "PRIMARY", "DIFFUSION", "ADC"}}), nil,
			func(t *testing.T, f Facts, s *Series) {
				if len(s.Maps) != 1 || s.Maps[0].Kind != KindADC || s.Maps[0].Slices[0] == nil || len(s.Volumes) != 4 {
					t.Errorf("maps %v, volumes %v", s.Maps, s.Volumes)
				}
			}},
		{"directions given only as a b-matrix", []img{{b: 0}, {b: 1000, directionality: "BMATRIX", bmatrix: &[6]float64{500, -500, 0, 500, 0, 0}}}, nil,
			func(t *testing.T, f Facts, s *Series) {
				d := f.Directions[1000]
				if len(d) != 1 || math.Abs(d[0][0]-math.Sqrt(0.5)) > 1e-12 || math.Abs(d[0][1]+math.Sqrt(0.5)) > 1e-12 || d[0][2] != 0 {
					t.Errorf("directions %v, want (0.707,-0.707,0)", d)
				}
			}},
	}
	for _, tt := range tests {
		t.Run(tt.name+" shows in the facts", func(t *testing.T) {
			fs := framesOf(t, newSeries("facts", tt.images...))
			if tt.mutate != nil {
				tt.mutate(fs)
			}
			s, err := AssembleSeries(fs, DefaultTolerances())
			if err != nil {
				t.Fatal(err)
			}
			tt.check(t, s.Facts, s)
		})
	}
	t.Run("a clean series has no facts against it", func(t *testing.T) {
		s, err := AssembleSeries(framesOf(t, newSeries("clean", four...)), DefaultTolerances())
		if err != nil {
			t.Fatal(err)
		}
		f := s.Facts
		if f.MissingSlices != nil || f.Duplicates != nil || f.InconsistentB != nil || f.GeometryMismatch != nil || f.NoBValue != nil || f.GridGaps != nil || f.Encapsulated {
			t.Errorf("facts %+v", f)
		}
	})
}

func TestAssembleSeriesRefusesWhatIsNotOneSeries(t *testing.T) {
	a := framesOf(t, newSeries("a", img{b: 0}))
	b := framesOf(t, newSeries("b", img{b: 0}))
	tests := []struct {
		name   string
		frames []Frame
		tol    Tolerances
		want   error
	}{
		{"no images", nil, DefaultTolerances(), ErrNoImages},
		{"images of two series", append(a, b...), DefaultTolerances(), ErrMixedSeries},
		{"a negative tolerance", a, Tolerances{SlicePosition: -1}, ErrInvalidOptions},
		{"images without b-values", framesOf(t, newSeries("nob", img{noB: true, directionality: "DIRECTIONAL", dir: [3]float64{1, 0, 0}})), DefaultTolerances(), ErrNoImages},
	}
	for _, tt := range tests {
		t.Run(tt.name+" is refused", func(t *testing.T) {
			if _, err := AssembleSeries(tt.frames, tt.tol); !errors.Is(err, tt.want) {
				t.Errorf("error %v, want %v", err, tt.want)
			}
		})
	}
}

func TestAssembleStudyLinksSeries(t *testing.T) {
	dwi := func() testSeries {
		var images []img
		for s := range 3 {
			for _, d := range [][3]float64{{1, 0, 0}, {0, 1, 0}, {0, 0, 1}} {
				images = append(images, img{b: 1000, dir: d, slice: float64(s)})
			}
		}
		s := newSeries("dwi", images...)
		s.number = 5
		return s
	}
	b0 := func(shift float64) testSeries {
		s := newSeries(fmt.Sprint("b0", shift), img{b: 0, slice: shift}, img{b: 0, slice: 1 + shift}, img{b: 0, slice: 2 + shift})
		s.number = 4
		return s
	}
	adcMap := func() testSeries {
		adc := []string{"DERIVED", "PRIMARY", "DIFFUSION", "ADC"}
		s := newSeries("adc", img{b: 1000, iso: true, imageType: adc, slice: 0}, img{b: 1000, iso: true, imageType: adc, slice: 1}, img{b: 1000, iso: true, imageType: adc, slice: 2})
		s.number = 6
		return s
	}
	t2 := newSeries("t2", img{plain: true, imageType: []string{"ORIGINAL", "PRIMARY", "T2"}})
	t2.number = 2
	otherFoR := b0(0)
	otherFoR.frameOfRef = "2.25.100.77"

	collect := func(series ...testSeries) []Frame {
		var out []Frame
		for _, s := range series {
			out = append(out, framesOf(t, s)...)
		}
		return out
	}
	t.Run("a series without b0 borrows the b0 of its sibling with the same slices", func(t *testing.T) {
		st, err := AssembleStudy(collect(t2, b0(0), dwi()), DefaultTolerances())
		if err != nil {
			t.Fatal(err)
		}
		if len(st.Series) != 2 || st.Failed != nil {
			t.Fatalf("%d series, failed %v; want the b0 and DWI series (T2 left out)", len(st.Series), st.Failed)
		}
		d := st.Series[1]
		if d.SeriesInstanceUID != dwi().series || d.Facts.B0FromSeries != b0(0).series {
			t.Fatalf("series %s borrowed from %q", d.SeriesInstanceUID, d.Facts.B0FromSeries)
		}
		v := d.Volumes[0]
		if v.BValue != 0 || v.SeriesUID != b0(0).series || slices.Contains(v.Slices, nil) || !slices.Equal(d.Facts.BValues, []float64{0, 1000}) {
			t.Errorf("b0 volume %v from %s with slices %v; b-values %v", v, v.SeriesUID, v.Slices, d.Facts.BValues)
		}
	})
	t.Run("a b0 on other slice positions is not borrowed and is named", func(t *testing.T) {
		st, err := AssembleStudy(collect(b0(0.5), dwi()), DefaultTolerances())
		if err != nil {
			t.Fatal(err)
		}
		d := st.Series[1]
		if d.Facts.B0FromSeries != "" || !slices.Equal(d.Facts.B0Unmatched, []string{b0(0.5).series}) || d.Volumes[0].BValue == 0 {
			t.Errorf("borrowed %q, unmatched %v", d.Facts.B0FromSeries, d.Facts.B0Unmatched)
		}
	})
	t.Run("a b0 in another frame of reference is not borrowed", func(t *testing.T) {
		st, err := AssembleStudy(collect(otherFoR, dwi()), DefaultTolerances())
		if err != nil {
			t.Fatal(err)
		}
		if d := st.Series[1]; d.Facts.B0FromSeries != "" || d.Facts.B0Unmatched != nil {
			t.Errorf("borrowed %q, unmatched %v", d.Facts.B0FromSeries, d.Facts.B0Unmatched)
		}
	})
	t.Run("a scanner ADC map series is attached to the series it matches", func(t *testing.T) {
		st, err := AssembleStudy(collect(b0(0), dwi(), adcMap()), DefaultTolerances())
		if err != nil {
			t.Fatal(err)
		}
		if len(st.Series) != 2 {
			t.Fatalf("%d series, want the map attached rather than kept apart", len(st.Series))
		}
		var attached []*Volume
		for _, s := range st.Series {
			attached = append(attached, s.Maps...)
		}
		if len(attached) != 1 || attached[0].Kind != KindADC || attached[0].SeriesUID != adcMap().series || slices.Contains(attached[0].Slices, nil) {
			t.Errorf("maps %v", attached)
		}
	})
	t.Run("FA and tensor b0 series are listed with their kind, not failed, and the scanner ADC stays attached", func(t *testing.T) {
		// Image Type value 4 DIFFUSION_ANISO (PS3.3 C.8.13.1.1.1) and
		// TENSOR_B0 (common practice, from memory).
		fa := newSeries("fa", img{b: 1000, iso: true, imageType: []string{"DERIVED", "PRIMARY", "DIFFUSION", "DIFFUSION_ANISO"}, slice: 0},
			img{b: 1000, iso: true, imageType: []string{"DERIVED", "PRIMARY", "DIFFUSION", "DIFFUSION_ANISO"}, slice: 1})
		fa.number = 7
		tb0 := newSeries("tb0", img{b: 0, imageType: []string{"DERIVED", "PRIMARY", "TENSOR_B0"}, slice: 0})
		tb0.number = 8
		st, err := AssembleStudy(collect(b0(0), dwi(), adcMap(), fa, tb0), DefaultTolerances())
		if err != nil {
			t.Fatal(err)
		}
		want := []DerivedSeries{
			{SeriesInstanceUID: fa.series, SeriesNumber: 7, SeriesDescription: "DWI test", Kind: KindFA, Images: 2},
			{SeriesInstanceUID: tb0.series, SeriesNumber: 8, SeriesDescription: "DWI test", Kind: KindTensorB0, Images: 1},
		}
		slices.SortFunc(st.Derived, func(a, b DerivedSeries) int { return a.SeriesNumber - b.SeriesNumber })
		if !slices.Equal(st.Derived, want) || st.Failed != nil || len(st.Series) != 2 {
			t.Errorf("derived %+v, failed %v, %d series; want %+v, none failed, b0 and DWI", st.Derived, st.Failed, len(st.Series), want)
		}
		var attached int
		for _, s := range st.Series {
			attached += len(s.Maps)
		}
		if attached != 1 {
			t.Errorf("%d maps attached, want the scanner ADC", attached)
		}
	})
	t.Run("a map series matching nothing stays a series of its own", func(t *testing.T) {
		m := adcMap()
		m.frameOfRef = "2.25.100.78"
		st, err := AssembleStudy(collect(dwi(), m), DefaultTolerances())
		if err != nil {
			t.Fatal(err)
		}
		if len(st.Series) != 2 || len(st.Series[1].Maps) != 1 || len(st.Series[1].Volumes) != 0 {
			t.Errorf("series %+v", st.Series)
		}
	})
	t.Run("a broken series is listed and the others still assembled", func(t *testing.T) {
		broken := b0(0)
		broken.noGeometry = true
		st, err := AssembleStudy(collect(broken, dwi()), DefaultTolerances())
		if err != nil {
			t.Fatal(err)
		}
		if len(st.Failed) != 1 || st.Failed[0].SeriesInstanceUID != broken.series || !errors.Is(st.Failed[0], ErrMissingGeometry) || len(st.Series) != 1 {
			t.Errorf("failed %v, %d series", st.Failed, len(st.Series))
		}
	})
	t.Run("images of two studies are refused", func(t *testing.T) {
		other := b0(0)
		other.study = "2.25.101"
		if _, err := AssembleStudy(collect(other, dwi()), DefaultTolerances()); !errors.Is(err, ErrMixedSeries) {
			t.Errorf("error %v, want ErrMixedSeries", err)
		}
	})
}

func TestIsDiffusion(t *testing.T) {
	tests := []struct {
		name string
		f    Frame
		want bool
	}{
		{"an image with a b-value", Frame{HasBValue: true}, true},
		{"an image with a directionality", Frame{Directionality: DirectionalityNone}, true},
		{"an ADC map", Frame{Kind: KindADC}, true},
		{"an Enhanced MR frame of diffusion contrast", Frame{AcquisitionContrast: "DIFFUSION"}, true},
		{"a classic image typed DIFFUSION", Frame{ImageType: []string{"DERIVED", "PRIMARY", "DIFFUSION", "TRACEW"}}, true},
		{"a T2 image", Frame{ImageType: []string{"ORIGINAL", "PRIMARY", "T2"}}, false},
	}
	for _, tt := range tests {
		t.Run(fmt.Sprintf("%s is diffusion: %v", tt.name, tt.want), func(t *testing.T) {
			if got := IsDiffusion([]Frame{tt.f}); got != tt.want {
				t.Errorf("got %v", got)
			}
		})
	}
}

func TestDirectionFromBMatrix(t *testing.T) {
	for _, g := range [][3]float64{{1, 0, 0}, {0, 0, 1}, {0.6, 0.8, 0}, {0.6, -0.8, 0}, {0, 0.6, -0.8}, {0.48, -0.6, 0.64}} {
		t.Run(fmt.Sprintf("B = b g g^T gives back g = %v", g), func(t *testing.T) {
			const b = 1000
			m := [6]float64{b * g[0] * g[0], b * g[0] * g[1], b * g[0] * g[2], b * g[1] * g[1], b * g[1] * g[2], b * g[2] * g[2]}
			d, ok := directionFromBMatrix(m)
			if !ok {
				t.Fatal("no direction")
			}
			for i := range 3 {
				if math.Abs(d[i]-g[i]) > 1e-12 {
					t.Errorf("got %v", d)
				}
			}
		})
	}
	if _, ok := directionFromBMatrix([6]float64{}); ok {
		t.Error("a zero b-matrix gave a direction")
	}
}

func TestDefaultTolerancesAreValid(t *testing.T) {
	tol := DefaultTolerances()
	if err := tol.Validate(); err != nil {
		t.Fatal(err)
	}
	// docs/references.md#bvalue-tolerance: a nominal 900 seen as 895-905 must match.
	if tol.bTolerance(900) < 5 || tol.bTolerance(0) >= 10 {
		t.Errorf("b tolerance %v at 900, %v at 0", tol.bTolerance(900), tol.bTolerance(0))
	}
	if err := (Tolerances{BValue: math.NaN(), Direction: -1}).Validate(); err == nil || !strings.Contains(err.Error(), "BValue") || !strings.Contains(err.Error(), "Direction") {
		t.Errorf("error %v", err)
	}
}
