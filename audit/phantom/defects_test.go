package phantom

import (
	"math"
	"slices"
	"testing"
)

// mean is the mean pixel of the images over the voxels labelled l.
func meanOver(tr *Truth, vol map[int]image, l uint8) float64 {
	sum, n := 0.0, 0
	np := tr.Rows * tr.Cols
	for s, im := range vol {
		for p, v := range im.pixels {
			if tr.Labels[s*np+p] == l {
				sum += float64(v)
				n++
			}
		}
	}
	return sum / float64(n)
}

func bValues(imgs []image) []float64 {
	var out []float64
	for _, im := range imgs {
		if im.hasB && !slices.Contains(out, im.b) {
			out = append(out, im.b)
		}
	}
	slices.Sort(out)
	return out
}

func TestPhantomPlantsEachDefectInTheFiles(t *testing.T) {
	x := [3]float64{1, 0, 0}
	zero := [3]float64{}
	cases := []struct {
		c     Case
		check func(t *testing.T, st *Study, imgs []image)
	}{
		{CaseClean, func(t *testing.T, st *Study, imgs []image) {
			tr := st.Truth
			if len(tr.Planted) != 0 || len(st.Series) != 1 || st.Series[0].Role != RoleDWI {
				t.Fatalf("planted %v, series %v", tr.Planted, st.Series)
			}
			if got := bValues(imgs); !slices.Equal(got, []float64{0, 1000}) {
				t.Fatalf("b-values %v", got)
			}
			if n := len(imgs); n != testSlices*5 {
				t.Fatalf("%d images, want b0 + 3 directions + trace per slice", n)
			}
		}},
		{CaseNoB0, func(t *testing.T, st *Study, imgs []image) {
			for _, im := range imgs {
				if im.b == 0 || im.kind() == volB0 {
					t.Fatalf("%s frame %d has b = 0", im.path, im.frame)
				}
			}
			if st.Truth.B0 != nil || slices.Contains(st.Truth.HeaderB, 0) {
				t.Fatal("truth has a b0")
			}
		}},
		{CaseBValueSetDiffers, func(t *testing.T, st *Study, imgs []image) {
			if got := bValues(imgs); !slices.Equal(got, []float64{0, 800}) {
				t.Fatalf("b-values %v, want [0 800]", got)
			}
			if !slices.Equal(st.Truth.AppliedB, st.Truth.HeaderB) {
				t.Fatal("applied and header b-values differ")
			}
			tr := st.Truth
			if got := medianADC(tr, volumeOf(t, tr, imgs, volB0, 0, zero), volumeOf(t, tr, imgs, volTrace, 800, zero), 800, LabelWM); !within(got, ADCWhiteMatter, 0.005) {
				t.Fatalf("white matter ADC at b 800: %v", got)
			}
		}},
		{CaseBValueHeaderWrong, func(t *testing.T, st *Study, imgs []image) {
			tr := st.Truth
			if got := bValues(imgs); !slices.Equal(got, []float64{0, 1000}) {
				t.Fatalf("header b-values %v, want [0 1000]", got)
			}
			b0, trace := volumeOf(t, tr, imgs, volB0, 0, zero), volumeOf(t, tr, imgs, volTrace, 1000, zero)
			// The pixel ratio follows the applied b (700), not the header's.
			if got := medianADC(tr, b0, trace, 700, LabelWM); !within(got, ADCWhiteMatter, 0.005) {
				t.Fatalf("white matter ln(S0/Sb)/700 = %v, want %v", got, ADCWhiteMatter)
			}
			if got := medianADC(tr, b0, trace, 1000, LabelWM); within(got, ADCWhiteMatter, 0.1) {
				t.Fatalf("white matter ln(S0/Sb)/1000 = %v, should be far from %v", got, ADCWhiteMatter)
			}
		}},
		{CaseB0ArtifactAliasing, func(t *testing.T, st *Study, imgs []image) { checkB0Artifact(t, st, imgs, 1.5) }},
		{CaseB0ArtifactDropout, func(t *testing.T, st *Study, imgs []image) { checkB0Artifact(t, st, imgs, dropoutFactor) }},
		{CaseRestrictionLesion, func(t *testing.T, st *Study, imgs []image) {
			tr := st.Truth
			b0, trace := volumeOf(t, tr, imgs, volB0, 0, zero), volumeOf(t, tr, imgs, volTrace, 1000, zero)
			if got := tr.MedianADC(LabelLesion); got != float64(float32(ADCRestriction)) {
				t.Fatalf("lesion truth ADC %v", got)
			}
			if r := meanOver(tr, trace, LabelLesion) / meanOver(tr, trace, LabelWM); r < 1.3 {
				t.Fatalf("lesion DWI / white matter DWI = %v, want bright", r)
			}
			if r := meanOver(tr, b0, LabelLesion) / meanOver(tr, b0, LabelWM); r < 1 || r > 1.3 {
				t.Fatalf("lesion b0 / white matter b0 = %v, want about normal", r)
			}
			if got := medianADC(tr, b0, trace, 1000, LabelLesion); !within(got, ADCRestriction, 0.01) {
				t.Fatalf("lesion ADC from the pixels %v", got)
			}
			checkPlantedRegion(t, tr, LabelLesion)
		}},
		{CaseT2ShineThrough, func(t *testing.T, st *Study, imgs []image) {
			tr := st.Truth
			b0, trace := volumeOf(t, tr, imgs, volB0, 0, zero), volumeOf(t, tr, imgs, volTrace, 1000, zero)
			if r := meanOver(tr, b0, LabelLesion) / meanOver(tr, b0, LabelWM); r < 2 {
				t.Fatalf("lesion b0 / white matter b0 = %v, want bright", r)
			}
			if r := meanOver(tr, trace, LabelLesion) / meanOver(tr, trace, LabelWM); r < 2 {
				t.Fatalf("lesion DWI / white matter DWI = %v, want bright", r)
			}
			// Normal parenchyma range 0.6-1.1e-3 (docs/references.md#parenchyma-range, Helenius 2002 widened).
			if got := medianADC(tr, b0, trace, 1000, LabelLesion); got < 0.6e-3 || got > 1.1e-3 {
				t.Fatalf("lesion ADC from the pixels %v, want normal", got)
			}
			checkPlantedRegion(t, tr, LabelLesion)
		}},
		{CaseMissingSlices, func(t *testing.T, st *Study, imgs []image) {
			tr := st.Truth
			missing := tr.Planted[0].Slices
			if len(missing) != 2 {
				t.Fatalf("planted %v", tr.Planted)
			}
			vx := volumeOf(t, tr, imgs, volDirectional, 1000, x)
			if len(vx) != testSlices-2 {
				t.Fatalf("direction x has %d slices, want %d", len(vx), testSlices-2)
			}
			for _, s := range missing {
				if _, ok := vx[s]; ok {
					t.Fatalf("slice %d is present", s)
				}
			}
			if vy := volumeOf(t, tr, imgs, volDirectional, 1000, [3]float64{0, 1, 0}); len(vy) != testSlices {
				t.Fatalf("direction y has %d slices", len(vy))
			}
		}},
		{CaseSlicePositions, func(t *testing.T, st *Study, imgs []image) {
			tr := st.Truth
			if len(st.Series) != 2 || st.Series[0].Role != RoleB0 {
				t.Fatalf("series %v, want a b0 series and a DWI series", st.Series)
			}
			n := 0
			for _, im := range imgs {
				if im.kind() != volB0 {
					continue
				}
				n++
				if im.series != seriesNumberB0 || sliceOf(tr, im.z) >= 0 || sliceOf(tr, im.z-sliceThicknessMM/2) < 0 {
					t.Fatalf("b0 in series %d at z %g, want series %d half a slice off %v", im.series, im.z, seriesNumberB0, tr.SliceZ)
				}
			}
			if n != testSlices {
				t.Fatalf("%d b0 images", n)
			}
		}},
		{CaseScannerADCCorrect, func(t *testing.T, st *Study, imgs []image) { checkADCMap(t, st, imgs, 1) }},
		{CaseScannerADCScaled, func(t *testing.T, st *Study, imgs []image) { checkADCMap(t, st, imgs, misscaleFactor) }},
		{CaseLowSNR, func(t *testing.T, st *Study, imgs []image) {
			tr := st.Truth
			if !within(tr.Sigma, S0WhiteMatter/LowSNR, 1e-12) {
				t.Fatalf("sigma %v", tr.Sigma)
			}
			// Background is Rayleigh distributed with mean sigma sqrt(pi/2)
			// (Gudbjartsson & Patz 1995).
			if got, want := meanOver(tr, volumeOf(t, tr, imgs, volB0, 0, zero), LabelBackground), tr.Sigma*math.Sqrt(math.Pi/2); !within(got, want, 0.05) {
				t.Fatalf("b0 background mean %v, want %v", got, want)
			}
		}},
		{CaseIceWater0C, func(t *testing.T, st *Study, imgs []image) { checkIceWater(t, st, imgs, IceWaterC) }},
		{CaseIceWaterWarm, func(t *testing.T, st *Study, imgs []image) { checkIceWater(t, st, imgs, IceWarmC) }},
	}
	if len(cases) != len(Cases()) {
		t.Fatalf("%d cases tested, %d exist", len(cases), len(Cases()))
	}
	for _, c := range cases {
		for _, multi := range []bool{false, true} {
			t.Run(string(c.c)+" "+mode(multi), func(t *testing.T) {
				o := Options{Case: c.c, MultiFrame: multi, Seed: 11}
				if c.c != CaseLowSNR {
					o.SNR = math.Inf(1)
				}
				st := write(t, o)
				c.check(t, st, readStudy(t, st))
			})
		}
	}
}

// TestPhantomB0ArtifactStrength: Options.B0ArtifactK sets the b0 ratio
// of white matter at the artifact's centre, for both artifact cases, and
// leaves the DWI alone.
func TestPhantomB0ArtifactStrength(t *testing.T) {
	cases := []struct {
		name string
		c    Case
		k    float64
	}{
		{"weak aliasing adds a tenth of white matter's signal", CaseB0ArtifactAliasing, 1.1},
		{"strong aliasing triples white matter's signal", CaseB0ArtifactAliasing, 3},
		{"mild dropout loses a fifth of the signal", CaseB0ArtifactDropout, 0.8},
		{"deep dropout loses nine tenths", CaseB0ArtifactDropout, 0.1},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			st := write(t, Options{Case: c.c, B0ArtifactK: c.k, SNR: math.Inf(1), Seed: 3})
			tr := st.Truth
			worst := 1.0
			for i, l := range tr.Labels {
				if l == LabelWM || l == LabelArtifact {
					if r := float64(tr.B0[i]) / float64(tr.S0[i]); math.Abs(r-1) > math.Abs(worst-1) {
						worst = r
					}
				}
			}
			// The pixel nearest the centre sees the taper just below 1,
			// and aliasing's added signal is divided by white matter's
			// coil-shaded S0 (up to 2% above S0WhiteMatter there): the
			// largest departure is within 5% of k-1.
			if !within(worst-1, c.k-1, 0.05) {
				t.Fatalf("largest b0 ratio %v, want about %v", worst, c.k)
			}
			// The planted region, the b0 unchanged outside its slices and
			// the DWI unchanged everywhere. The departure bound passed is
			// a loose one (rounding to stored pixels moves the ratio):
			// the tight check is the one above.
			bound := worst
			if c.k > 1 {
				bound = 1 + 0.9*(c.k-1)
			}
			checkB0Artifact(t, st, readStudy(t, st), bound)
		})
	}
}

// checkPlantedRegion checks that the planted defect's slices and box are
// where label l is.
func checkPlantedRegion(t *testing.T, tr *Truth, l uint8) {
	t.Helper()
	if len(tr.Planted) != 1 || len(tr.Planted[0].Slices) == 0 || tr.Planted[0].BBox.Empty() {
		t.Fatalf("planted %+v", tr.Planted)
	}
	d := tr.Planted[0]
	n := 0
	for s := 0; s < tr.Slices; s++ {
		for r := 0; r < tr.Rows; r++ {
			for c := 0; c < tr.Cols; c++ {
				if tr.Labels[tr.Index(r, c, s)] != l {
					continue
				}
				n++
				if !slices.Contains(d.Slices, s) || r < d.BBox.Row0 || r >= d.BBox.Row1 || c < d.BBox.Col0 || c >= d.BBox.Col1 {
					t.Fatalf("voxel (%d, %d, %d) labelled %d is outside %+v", r, c, s, l, d)
				}
			}
		}
	}
	if n == 0 {
		t.Fatalf("no voxel labelled %d", l)
	}
}

// checkB0Artifact checks that the b0 of the planted slices is scaled by
// about k at the artifact's worst voxel, that the b0 is untouched
// elsewhere, and that the DWI is untouched everywhere.
func checkB0Artifact(t *testing.T, st *Study, imgs []image, k float64) {
	t.Helper()
	tr := st.Truth
	zero := [3]float64{}
	checkPlantedRegion(t, tr, LabelArtifact)
	b0, trace := volumeOf(t, tr, imgs, volB0, 0, zero), volumeOf(t, tr, imgs, volTrace, 1000, zero)
	n := tr.Rows * tr.Cols
	worst := 1.0
	for s, im := range b0 {
		planted := slices.Contains(tr.Planted[0].Slices, s)
		for p, v := range im.pixels {
			i := s*n + p
			s0 := float64(tr.S0[i])
			if math.Abs(float64(trace[s].pixels[p])-tr.Signal(i, 1000, zero)) > 0.5+1e-6 {
				t.Fatalf("DWI changed at slice %d pixel %d", s, p)
			}
			if s0 < S0WhiteMatter/2 {
				continue
			}
			r := float64(v) / s0
			if !planted && math.Abs(float64(v)-s0) > 0.5+1e-6 {
				t.Fatalf("b0 changed outside the planted slices: slice %d pixel %d", s, p)
			}
			if math.Abs(r-1) > math.Abs(worst-1) {
				worst = r
			}
		}
	}
	// docs/references.md#b0-only-artifacts: a b0 scaled by k shifts ADC by ln(k)/b.
	if (k > 1 && worst < k) || (k < 1 && !within(worst, k, 0.02)) {
		t.Fatalf("worst b0 ratio %v, want about %v", worst, k)
	}
}

// checkADCMap checks the scanner ADC map: its Real World Value Mapping
// units and slope, and that slope*stored in white matter is factor times
// the truth.
func checkADCMap(t *testing.T, st *Study, imgs []image, factor float64) {
	t.Helper()
	tr := st.Truth
	if len(st.Series) != 2 || st.Series[1].Role != RoleADC {
		t.Fatalf("series %v", st.Series)
	}
	adc := volumeOf(t, tr, imgs, volADC, 0, [3]float64{})
	if len(adc) != testSlices {
		t.Fatalf("%d ADC map slices", len(adc))
	}
	var v []float64
	n := tr.Rows * tr.Cols
	for s, im := range adc {
		// UCUM "mm2/s", the unit docs/references.md#real-world-value-mapping lists for ADC maps.
		if im.rwvmUnits != "mm2/s" || im.rwvmSlope != tr.ADCMapSlope || !within(im.rwvmSlope, adcUnit*factor, 1e-12) {
			t.Fatalf("ADC map mapping %v %q, want %v mm2/s", im.rwvmSlope, im.rwvmUnits, adcUnit*factor)
		}
		for p, x := range im.pixels {
			if tr.Labels[s*n+p] == LabelWM {
				v = append(v, float64(x)*im.rwvmSlope)
			}
		}
	}
	if got := median(v); !within(got, ADCWhiteMatter*factor, 0.01) {
		t.Fatalf("white matter on the ADC map %v, want %v", got, ADCWhiteMatter*factor)
	}
}

// checkIceWater checks that the phantom's water ADC from the pixels is
// the Holz 2000 value at the temperature.
func checkIceWater(t *testing.T, st *Study, imgs []image, celsius float64) {
	t.Helper()
	tr := st.Truth
	zero := [3]float64{}
	if tr.WaterADC != WaterADC(celsius) || tr.LabelCount(LabelWM) != 0 || tr.LabelCount(LabelWater) == 0 {
		t.Fatalf("truth water ADC %v, %d white matter voxels", tr.WaterADC, tr.LabelCount(LabelWM))
	}
	got := medianADC(tr, volumeOf(t, tr, imgs, volB0, 0, zero), volumeOf(t, tr, imgs, volTrace, 1000, zero), 1000, LabelWater)
	if !within(got, WaterADC(celsius), 0.005) {
		t.Fatalf("water ADC from the pixels %v, want %v (Holz 2000 at %g C)", got, WaterADC(celsius), celsius)
	}
}

func TestPhantomAppliedBScaleBiasesTheMeasuredADC(t *testing.T) {
	zero := [3]float64{}
	cases := []struct {
		name  string
		c     Case
		scale float64
		label uint8
		truth float64 // the tissue's true ADC, mm²/s
	}{
		{"ice water on a scanner applying 3% more weighting reads 3% high", CaseIceWater0C, 1.03, LabelWater, WaterADC(IceWaterC)},
		{"white matter on a scanner applying 5% less weighting reads 5% low", CaseClean, 0.95, LabelWM, ADCWhiteMatter},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			st := write(t, Options{Case: c.c, AppliedBScale: c.scale, SNR: math.Inf(1), Seed: 5})
			tr := st.Truth
			if !slices.Equal(tr.HeaderB, []float64{0, 1000}) || !slices.Equal(tr.AppliedB, []float64{0, 1000 * c.scale}) {
				t.Fatalf("header b %v, applied b %v", tr.HeaderB, tr.AppliedB)
			}
			imgs := readStudy(t, st)
			b0, trace := volumeOf(t, tr, imgs, volB0, 0, zero), volumeOf(t, tr, imgs, volTrace, 1000, zero)
			// Read with the header's b = 1000 the pixels give the true ADC
			// times the scale: ln(S0/Sb) = applied b x ADC (the
			// two-point formula in docs/references.md#mono-exponential); 0.5% covers rounding to stored pixels.
			if got, want := medianADC(tr, b0, trace, 1000, c.label), c.truth*c.scale; !within(got, want, 0.005) {
				t.Fatalf("ADC read with the header b %v, want %v", got, want)
			}
			if len(tr.Planted) != 0 {
				t.Fatalf("a calibration drift is no planted defect: %+v", tr.Planted)
			}
		})
	}
}
