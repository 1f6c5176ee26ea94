package dwi

import (
	"fmt"
	"math"
	"slices"
	"testing"
)

// twice lists every image of images two times: an acquisition with two
// averages (repeats) of each b-value, direction and slice.
func twice(images []img) []img {
	var out []img
	for _, m := range images {
		out = append(out, m, m)
	}
	return out
}

// byID finds the frames of fs by their ID.
func byID(fs []Frame) map[string]*Frame {
	out := map[string]*Frame{}
	for i := range fs {
		out[fs[i].ID()] = &fs[i]
	}
	return out
}

func TestRepeatsAreAveragedNeverDropped(t *testing.T) {
	tests := []struct {
		name      string
		images    []img
		weighting []Weighting // of the volumes, in order
	}{
		{"two averages of b0 and of three directions at b 1000", twice(dwiImages(3, 1000)),
			[]Weighting{WeightingB0, WeightingDirection, WeightingDirection, WeightingDirection}},
		{"two averages of the scanner's trace (Diffusion Directionality ISOTROPIC)", twice([]img{{b: 0}, {b: 1000, iso: true}}),
			[]Weighting{WeightingB0, WeightingTrace}},
		// b 50 is a reference weighting (DefaultTolerances: common
		// practice); its images need no direction.
		{"two b 50 images without a direction", twice([]img{{b: 50, directionality: omitDirectionality}, {b: 1000, iso: true}}),
			[]Weighting{WeightingB0, WeightingTrace}},
	}
	for _, tt := range tests {
		t.Run(tt.name+": one volume each, every slice the mean of its repeats", func(t *testing.T) {
			fs := framesOf(t, newSeries("repeats", tt.images...))
			s, err := AssembleSeries(fs, DefaultTolerances())
			if err != nil {
				t.Fatal(err)
			}
			if len(s.Volumes) != len(tt.weighting) {
				t.Fatalf("%d volumes %v, want %d", len(s.Volumes), s.Volumes, len(tt.weighting))
			}
			frames := byID(fs)
			total := 0
			for i, v := range s.Volumes {
				if v.Weighting != tt.weighting[i] || v.Combined != CombinedMean {
					t.Errorf("volume %v: weighting %v combined %v, want %v by mean", v, v.Weighting, v.Combined, tt.weighting[i])
				}
				for z, sl := range v.Slices {
					imgs := v.ImagesAt(z)
					if len(imgs) != 2 {
						t.Fatalf("volume %v slice %d: %d images, want both repeats", v, z, len(imgs))
					}
					a, b := frames[imgs[0].ID()], frames[imgs[1].ID()]
					for p := range sl.Pixels {
						// The arithmetic mean of the two magnitudes (common practice).
						if want := (a.Pixels[p] + b.Pixels[p]) / 2; sl.Pixels[p] != want {
							t.Fatalf("volume %v slice %d pixel %d = %v, want the mean %v of %v and %v", v, z, p, sl.Pixels[p], want, a.Pixels[p], b.Pixels[p])
						}
					}
					if a.Pixels[0] == b.Pixels[0] {
						t.Fatal("the two repeats have equal pixels: the test cannot see the averaging")
					}
				}
				total += v.ImageCount()
			}
			if total != len(tt.images) || len(s.Facts.Repeats) != len(tt.images)/2 || s.Facts.Duplicates != nil || s.Facts.UnknownDirections != nil {
				t.Errorf("%d images in volumes of %d; facts %+v", total, len(tt.images), s.Facts)
			}
		})
	}
}

func TestWeightedImagesWithoutDirectionAreReportedAndCombinedAsATrace(t *testing.T) {
	const slicesN = 3
	var images []img
	for z := range slicesN {
		images = append(images, img{b: 0, slice: float64(z)})
		for range 3 {
			// PS3.3 C.8.13.5.9: without Diffusion Directionality and a
			// Diffusion Gradient Orientation an image gives no direction.
			images = append(images, img{b: 1000, directionality: omitDirectionality, slice: float64(z)})
		}
	}
	fs := framesOf(t, newSeries("nodir", images...))
	s, err := AssembleSeries(fs, DefaultTolerances())
	if err != nil {
		t.Fatal(err)
	}
	if len(s.Volumes) != 2 {
		t.Fatalf("volumes %v, want b0 and one volume of the images without direction", s.Volumes)
	}
	v := s.Volumes[1]
	if v.Weighting != WeightingIsotropic || v.Combined != CombinedGeometricMean || !v.Isotropic || v.ImageCount() != 3*slicesN {
		t.Errorf("volume %v: weighting %v, combined %v, %d images", v, v.Weighting, v.Combined, v.ImageCount())
	}
	want := []UnknownDirections{{BValue: 1000, Images: 3 * slicesN, PerSlice: 3}}
	if !slices.Equal(s.Facts.UnknownDirections, want) || s.Facts.Repeats != nil {
		t.Errorf("unknown directions %+v, repeats %v; want %+v and no repeats", s.Facts.UnknownDirections, s.Facts.Repeats, want)
	}
	frames := byID(fs)
	for z, sl := range v.Slices {
		imgs := v.ImagesAt(z)
		for p := range sl.Pixels {
			// The trace of three directions is their geometric mean
			// (Basser & Pierpaoli; docs/references.md#basser-pierpaoli).
			prod := 1.0
			for _, f := range imgs {
				prod *= float64(frames[f.ID()].Pixels[p])
			}
			if want := math.Cbrt(prod); math.Abs(float64(sl.Pixels[p])-want) > 1e-3 {
				t.Fatalf("slice %d pixel %d = %v, want the geometric mean %v", z, p, sl.Pixels[p], want)
			}
		}
	}

	t.Run("one such image per slice is the trace, with nothing to report", func(t *testing.T) {
		one := framesOf(t, newSeries("nodir1", img{b: 0}, img{b: 1000, directionality: omitDirectionality}))
		s, err := AssembleSeries(one, DefaultTolerances())
		if err != nil {
			t.Fatal(err)
		}
		if len(s.Volumes) != 2 || s.Volumes[1].Weighting != WeightingIsotropic || s.Volumes[1].Combined != CombinedNone || s.Facts.UnknownDirections != nil {
			t.Errorf("volumes %v, facts %+v", s.Volumes, s.Facts)
		}
	})
}

func TestNominalBValuesKeepTheMeasuredOnes(t *testing.T) {
	x := [3]float64{1, 0, 0}
	tests := []struct {
		images             []img
		nominal, measured  float64
		weighting          Weighting
		otherNominal, othM float64
	}{
		{[]img{{b: 0.0020000000717118383, directionality: "NONE"}, {b: 999.9979999999283, dir: x}}, 0, 0.0020000000717118383, WeightingB0, 1000, 999.9979999999283},
		{[]img{{b: 5, directionality: "NONE"}, {b: 995, dir: x, slice: 0}, {b: 1000, dir: x, slice: 1}, {b: 1000, dir: x, slice: 2}}, 0, 5, WeightingB0, 1000, 998.3333333333334},
		// b 50 stays 50: body protocols use it as their reference (docs/references.md#ivim).
		{[]img{{b: 50, dir: x}, {b: 800, dir: x}}, 50, 50, WeightingB0, 800, 800},
	}
	for _, tt := range tests {
		t.Run(fmt.Sprintf("measured %v and %v read %v and %v", tt.measured, tt.othM, tt.nominal, tt.otherNominal), func(t *testing.T) {
			s, err := AssembleSeries(framesOf(t, newSeries("nominal", tt.images...)), DefaultTolerances())
			if err != nil {
				t.Fatal(err)
			}
			if len(s.Volumes) != 2 {
				t.Fatalf("volumes %v", s.Volumes)
			}
			lo, hi := s.Volumes[0], s.Volumes[1]
			if lo.BValue != tt.nominal || lo.BValueMeasured != tt.measured || lo.Weighting != tt.weighting ||
				hi.BValue != tt.otherNominal || math.Abs(hi.BValueMeasured-tt.othM) > 1e-9 {
				t.Errorf("volumes b %v (measured %v, %v) and %v (measured %v)", lo.BValue, lo.BValueMeasured, lo.Weighting, hi.BValue, hi.BValueMeasured)
			}
			if !slices.Equal(s.Facts.BValues, []float64{tt.nominal, tt.otherNominal}) || s.Facts.InconsistentB != nil {
				t.Errorf("b-values %v, inconsistent %v", s.Facts.BValues, s.Facts.InconsistentB)
			}
		})
	}
}

func TestTheGradientTableListsEveryAcquiredVolume(t *testing.T) {
	x, y := [3]float64{1, 0, 0}, [3]float64{0, 1, 0}
	var images []img
	for z := range 2 {
		sl := float64(z)
		images = append(images,
			img{b: 0.0020000000717118383, directionality: "NONE", slice: sl}, img{b: 0, slice: sl}, // two b0 averages
			img{b: 999.9979999999283, dir: x, slice: sl}, img{b: 1000, dir: y, slice: sl},
			img{b: 1000, iso: true, slice: sl},
			img{b: 1000, iso: true, slice: sl, imageType: []string{"DERIVED", "PRIMARY", "DIFFUSION", "ADC"}})
	}
	s, err := AssembleSeries(framesOf(t, newSeries("table", images...)), DefaultTolerances())
	if err != nil {
		t.Fatal(err)
	}
	got := s.GradientTable()
	type row struct {
		b    float64
		w    Weighting
		dir  *Direction
		imgs int
		sl   int
	}
	dx, dy := Direction(x), Direction(y)
	// Diffusion Directionality NONE, DIRECTIONAL with a gradient, and
	// ISOTROPIC (PS3.3 C.8.13.5.9); the ADC map is no acquisition.
	want := []row{{0, WeightingB0, nil, 4, 2}, {1000, WeightingTrace, nil, 2, 2}, {1000, WeightingDirection, &dy, 2, 2}, {1000, WeightingDirection, &dx, 2, 2}}
	if len(got) != len(want) {
		t.Fatalf("table %+v, want %d rows", got, len(want))
	}
	for i, w := range want {
		g := got[i]
		sameDir := (g.Direction == nil) == (w.dir == nil) && (w.dir == nil || *g.Direction == *w.dir)
		if g.BValue != w.b || g.Weighting != w.w || !sameDir || g.Images != w.imgs || g.Slices != w.sl {
			t.Errorf("row %d: %+v (direction %v), want %+v", i, g, g.Direction, w)
		}
	}
	if got[0].BValueMeasured == 0 || got[0].Combined != CombinedMean {
		t.Errorf("b0 row %+v: want the measured mean kept and the averages combined", got[0])
	}
}
