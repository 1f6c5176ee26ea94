package phantom

import (
	"cmp"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"sync"
)

// Acquisition geometry, chosen to look like a clinical axial brain DWI
// (common practice): 240 mm field of view, 5 mm gapless slices centred on
// the isocentre.
const (
	fieldOfViewMM    = 240.0
	sliceThicknessMM = 5.0
)

// Pixel storage: 16 bits allocated, 12 stored (PS3.3 C.8.3.1.1.4 and
// C.8.13.1.1.4 allow 12 or 16 for MR, from memory); signals are clamped
// to the stored range.
const (
	bitsStored = 12
	maxPixel   = 1<<bitsStored - 1
)

// The scanner ADC map stores ADC as integers of adcUnit mm^2/s
// (1e-6 mm^2/s, the common vendor convention, common practice), zero
// outside its mask: where the low-b signal is below adcMaskFraction of
// the reference tissue's S0 or below adcMaskSigmas noise deviations.
const (
	adcUnit         = 1e-6
	adcMaskFraction = 0.1
	adcMaskSigmas   = 5.0
)

// Planted artifacts on the b0 (docs/references.md#b0-only-artifacts: a b0 scaled by k shifts ADC by
// ln(k)/b). Both are smooth ellipses (cos^2 taper) in the central slices.
const (
	// Aliasing: signal of a structure outside the field of view wrapped
	// into the posterior brain, adding aliasAmplitude at its centre (k
	// about 1.6 in white matter).
	aliasX, aliasY         = 0.0, 50.0
	aliasSemiX, aliasSemiY = 30.0, 15.0
	aliasAmplitude         = 400.0
	// Dropout: susceptibility signal loss in the frontal lobe, the b0
	// multiplied by dropoutFactor at its centre (k = 0.6, the
	// example in docs/references.md#b0-only-artifacts that looks like restriction: -0.51e-3 at b = 1000).
	dropoutX, dropoutY         = 0.0, -55.0
	dropoutSemiX, dropoutSemiY = 35.0, 20.0
	dropoutFactor              = 0.6
	// artifactLabelFraction: voxels whose b0 the artifact changes by more
	// than this fraction are labelled LabelArtifact.
	artifactLabelFraction = 0.05
)

// Role is what a series of a study holds.
type Role int

const (
	RoleDWI Role = iota // the diffusion-weighted images and their trace, and the b0 unless it has its own series
	RoleB0              // the b0 in a series of its own
	RoleADC             // the scanner's ADC map
)

func (r Role) String() string {
	switch r {
	case RoleDWI:
		return "dwi"
	case RoleB0:
		return "b0"
	case RoleADC:
		return "adc"
	}
	return fmt.Sprintf("Role(%d)", int(r))
}

// volKind is what one volume (every slice of one weighting) is.
type volKind int

const (
	volB0          volKind = iota // b = 0, Diffusion Directionality NONE
	volDirectional                // one gradient direction, DIRECTIONAL
	volTrace                      // the scanner's isotropic trace (geometric mean), ISOTROPIC
	volADC                        // the scanner's ADC map
)

// volume is every slice of one weighting, as written.
type volume struct {
	kind     volKind
	role     Role
	bIndex   int        // index in the protocol's b-values (keys the noise)
	dirIndex int        // gradient index, directional volumes only
	bHeader  float64    // b-value written
	bApplied float64    // b-value applied to the pixels
	dir      [3]float64 // unit gradient, directional volumes only
	zShift   float64    // added to the slice positions (slice-positions-differ b0)
	missing  []bool     // per slice: not written
	pixels   []uint16   // rows*cols per slice, slice after slice
}

// present reports whether slice s of v is written.
func (v *volume) present(s int) bool { return !v.missing[s] }

// acquisition is a whole study's images before they become DICOM.
type acquisition struct {
	opt                Options
	rows, cols, slices int
	spacing            float64
	sliceZ             []float64
	vols               []*volume
	truth              *Truth

	// Set by acquire before the slices are computed, read-only after.
	anat     anatomy
	b0       *volume // the b = 0 volume, nil when none
	adcMask  float64 // low-b signal below which the scanner ADC map is 0
	artSlice []bool  // slices the b0 artifact touches
}

// directionSet is the gradient scheme of n directions (patient axes).
// 30 is a DTI scheme: points of a golden-angle spiral on the upper
// half-sphere (common practice for spreading directions evenly; any
// distinct unit vectors serve the phantom).
func directionSet(n int) [][3]float64 {
	switch n {
	case ManyDirs:
		out := make([][3]float64, n)
		golden := math.Pi * (3 - math.Sqrt(5))
		for i := range out {
			z := 1 - (float64(i)+0.5)/float64(n)
			r := math.Sqrt(1 - z*z)
			out[i] = [3]float64{r * math.Cos(golden*float64(i)), r * math.Sin(golden*float64(i)), z}
		}
		return out
	case 1:
		return [][3]float64{{0, 0, 1}}
	case 6:
		h := 1 / math.Sqrt2
		return [][3]float64{{h, h, 0}, {h, -h, 0}, {h, 0, h}, {h, 0, -h}, {0, h, h}, {0, h, -h}}
	}
	return [][3]float64{{1, 0, 0}, {0, 1, 0}, {0, 0, 1}}
}

// centralSlices is k slices around the middle of n.
func centralSlices(n, k int) []int {
	k = min(k, n)
	start := (n - k) / 2
	out := make([]int, k)
	for i := range out {
		out[i] = start + i
	}
	return out
}

// artifactSlices are the slices a b0 artifact touches: "a few".
func artifactSlices(n int) []int { return centralSlices(n, max(2, n/6)) }

// missingSlices are the slices the missing-slices case drops.
func missingSlices(n int) []int {
	if n >= 4 {
		return centralSlices(n, 2)
	}
	return centralSlices(n, 1)
}

// plan decides which volumes the study has; o has its defaults.
func plan(o Options) *acquisition {
	a := &acquisition{
		opt:  o,
		rows: o.Matrix, cols: o.Matrix, slices: o.Slices,
		spacing: fieldOfViewMM / float64(o.Matrix),
	}
	a.sliceZ = make([]float64, o.Slices)
	for s := range a.sliceZ {
		a.sliceZ[s] = (float64(s) - float64(o.Slices-1)/2) * sliceThicknessMM
	}

	header := append([]float64(nil), o.BValues...)
	applied := append([]float64(nil), o.BValues...)
	first := 0
	last := len(header) - 1
	switch o.Case {
	case CaseNoB0:
		first = 1
	case CaseBValueSetDiffers:
		header[last] *= setDiffersFactor
		applied[last] *= setDiffersFactor
	case CaseBValueHeaderWrong:
		applied[last] *= headerWrongFactor
	}
	for i := range applied {
		applied[i] *= o.AppliedBScale
	}
	b0Role := RoleDWI
	if o.B0Series || (o.Case == CaseSlicePositions && !o.B0InSeries) {
		b0Role = RoleB0
	}
	dirs := directionSet(o.Directions)
	newVol := func(v volume) *volume {
		v.missing = make([]bool, o.Slices)
		a.vols = append(a.vols, &v)
		return &v
	}
	for i := first; i <= last; i++ {
		if header[i] == 0 {
			v := newVol(volume{kind: volB0, role: b0Role, bIndex: i, bHeader: 0, bApplied: applied[i]})
			if o.Case == CaseSlicePositions {
				v.zShift = cmp.Or(o.B0SliceShift, 0.5) * sliceThicknessMM
			}
			continue
		}
		for d, g := range dirs {
			v := newVol(volume{kind: volDirectional, role: RoleDWI, bIndex: i, dirIndex: d,
				bHeader: header[i], bApplied: applied[i], dir: g})
			if o.Case == CaseMissingSlices && i == last && d == 0 {
				for _, s := range missingSlices(o.Slices) {
					v.missing[s] = true
				}
			}
		}
		if !o.OmitTrace {
			newVol(volume{kind: volTrace, role: RoleDWI, bIndex: i, bHeader: header[i], bApplied: applied[i]})
		}
	}
	if o.Case.scannerADC() {
		newVol(volume{kind: volADC, role: RoleADC, bIndex: last, bHeader: header[last], bApplied: applied[last]})
	}

	t := &Truth{
		Rows: a.rows, Cols: a.cols, Slices: a.slices,
		PixelSpacing: a.spacing, SliceThickness: sliceThicknessMM,
		SliceZ:   a.sliceZ,
		AppliedB: applied[first:], HeaderB: header[first:],
		SNR: o.SNR, Sigma: o.noiseSigma(),
	}
	for i := first; i <= last; i++ {
		if header[i] != 0 {
			t.Directions = dirs
		}
	}
	if o.Case.scannerADC() {
		t.ADCMapSlope, t.ADCMapTrueSlope = adcUnit, adcUnit
		if o.Case == CaseScannerADCScaled {
			t.ADCMapSlope = adcUnit * misscaleFactor
		}
	}
	a.truth = t
	return a
}

// noiseKey keys the noise stream of one image, so that an image's noise
// does not depend on which other images exist (the clean study and a
// defect study share every image they have in common).
func noiseKey(v *volume, slice int) uint64 {
	return uint64(v.kind)<<48 | uint64(v.bIndex)<<32 | uint64(v.dirIndex)<<16 | uint64(slice)
}

// acquire computes every pixel and the Truth. Slices are independent
// (each image's noise has its own stream, see noiseKey), so they are
// computed in parallel; the result does not depend on the schedule.
func (a *acquisition) acquire() {
	o := a.opt
	n := a.rows * a.cols
	nv := n * a.slices
	t := a.truth
	t.Labels = make([]uint8, nv)
	t.ADC = make([]float32, nv)
	t.Tensor = make([][3]float32, nv)
	t.S0 = make([]float32, nv)
	for _, v := range a.vols {
		v.pixels = make([]uint16, nv)
	}
	a.anat = newAnatomy(o.Case, o.Anisotropic)
	if a.anat.iceWater {
		t.WaterADC = a.anat.waterADC
	}
	ref := S0WhiteMatter
	if a.anat.iceWater {
		ref = S0Water
	}
	a.adcMask = max(adcMaskFraction*ref, adcMaskSigmas*t.Sigma)
	for _, v := range a.vols {
		if v.kind == volB0 {
			a.b0 = v
		}
	}
	if a.b0 != nil {
		t.B0 = make([]float32, nv)
		t.B0SliceZ = make([]float64, a.slices)
		for s := range t.B0SliceZ {
			t.B0SliceZ[s] = a.sliceZ[s] + a.b0.zShift
		}
	}
	a.artSlice = make([]bool, a.slices)
	if o.Case.b0Artifact() {
		for _, s := range artifactSlices(a.slices) {
			a.artSlice[s] = true
		}
	}

	next := make(chan int)
	var wg sync.WaitGroup
	for range min(runtime.GOMAXPROCS(0), a.slices) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			sc := a.newScratch()
			for s := range next {
				a.acquireSlice(s, sc)
			}
		}()
	}
	for s := 0; s < a.slices; s++ {
		next <- s
	}
	close(next)
	wg.Wait()
	a.plant()
}

// scratch is one worker's per-slice buffers.
type scratch struct {
	tissue, b0Tissue []voxel
	logSum           []float64 // sum of log noisy directional magnitudes of one b-value
	low, high        []float64 // the scanner's low-b and high-b trace magnitudes, for its ADC map
}

func (a *acquisition) newScratch() *scratch {
	n := a.rows * a.cols
	sc := &scratch{tissue: make([]voxel, n), logSum: make([]float64, n), low: make([]float64, n), high: make([]float64, n)}
	sc.b0Tissue = sc.tissue
	if a.b0 != nil && a.b0.zShift != 0 {
		sc.b0Tissue = make([]voxel, n)
	}
	return sc
}

// pixelXY is the patient (x, y) of pixel i of a slice, mm.
func (a *acquisition) pixelXY(i int) (float64, float64) {
	x0 := -float64(a.cols-1) / 2 * a.spacing // centre of the first column
	y0 := -float64(a.rows-1) / 2 * a.spacing // centre of the first row
	return x0 + float64(i%a.cols)*a.spacing, y0 + float64(i/a.cols)*a.spacing
}

// acquireSlice computes slice s of every volume and of the Truth.
func (a *acquisition) acquireSlice(s int, sc *scratch) {
	o, t := a.opt, a.truth
	n := a.rows * a.cols
	sigma := t.Sigma
	z := a.sliceZ[s]
	for i := range sc.tissue {
		x, y := a.pixelXY(i)
		vx := a.anat.at(x, y, z)
		sc.tissue[i] = vx
		j := s*n + i
		t.Labels[j] = vx.label
		t.S0[j] = float32(vx.s0)
		t.Tensor[j] = [3]float32{float32(vx.d[0]), float32(vx.d[1]), float32(vx.d[2])}
		t.ADC[j] = float32((vx.d[0] + vx.d[1] + vx.d[2]) / 3)
	}
	if a.b0 != nil && a.b0.zShift != 0 {
		for i := range sc.b0Tissue {
			x, y := a.pixelXY(i)
			sc.b0Tissue[i] = a.anat.at(x, y, z+a.b0.zShift)
		}
	}
	lowB, highB := math.NaN(), math.NaN() // header b-values of low and high
	dirCount := 0
	for _, v := range a.vols {
		out := v.pixels[s*n : (s+1)*n]
		var rnd *rand.Rand
		if sigma > 0 && (v.kind == volB0 || v.kind == volDirectional) {
			rnd = rand.New(rand.NewPCG(uint64(o.Seed), noiseKey(v, s)))
		}
		noisy := func(sig float64) float64 {
			if rnd == nil {
				return sig
			}
			n1, n2 := rnd.NormFloat64(), rnd.NormFloat64()
			return rician(sig, sigma, n1, n2)
		}
		switch v.kind {
		case volB0:
			for i := range out {
				sig := sc.b0Tissue[i].s0
				if a.artSlice[s] {
					x, y := a.pixelXY(i)
					sig = a.b0Artifact(sig, x, y)
					if vx := sc.tissue[i]; vx.label != LabelBackground && vx.label != LabelSolid &&
						math.Abs(sig-vx.s0) > artifactLabelFraction*vx.s0 {
						t.Labels[s*n+i] = LabelArtifact
					}
				}
				t.B0[s*n+i] = float32(sig)
				m := noisy(sig)
				out[i] = store(m)
				sc.low[i] = m
			}
			lowB = v.bHeader
		case volDirectional:
			if dirCount == 0 {
				clear(sc.logSum)
			}
			dirCount++
			for i := range out {
				vx := sc.tissue[i]
				sig := 0.0
				if vx.s0 != 0 {
					sig = signal(vx.s0, v.bApplied, vx.d, v.dir)
				}
				m := noisy(sig)
				out[i] = store(m)
				sc.logSum[i] += math.Log(m)
			}
			if dirCount == o.Directions {
				traceInto(sc.high, sc.logSum, dirCount)
				dirCount = 0
				if math.IsNaN(lowB) {
					copy(sc.low, sc.high)
					lowB = v.bHeader
				} else {
					highB = v.bHeader
				}
			}
		case volTrace:
			// The trace of this b-value was computed when its last
			// direction was (high holds it).
			for i := range out {
				out[i] = store(sc.high[i])
			}
		case volADC:
			for i := range out {
				if sc.low[i] < a.adcMask || math.IsNaN(highB) {
					out[i] = 0
					continue
				}
				adc := math.Log(sc.low[i]/sc.high[i]) / (highB - lowB)
				out[i] = uint16(min(maxPixel, max(0, math.Round(adc/adcUnit))))
			}
		}
	}
}

// traceInto writes the geometric mean of n directional magnitudes, given
// the sum of their logarithms: the scanner's isotropic trace image
// (Basser & Pierpaoli; docs/references.md#basser-pierpaoli).
func traceInto(dst, logSum []float64, n int) {
	for i := range dst {
		dst[i] = math.Exp(logSum[i] / float64(n))
	}
}

// store rounds a magnitude to a stored pixel value, clamped to the stored
// bits.
func store(m float64) uint16 {
	return uint16(min(maxPixel, max(0, math.Round(m))))
}

// b0Artifact is the b0 signal sig at (x, y) mm with the case's artifact.
func (a *acquisition) b0Artifact(sig, x, y float64) float64 {
	k := a.opt.B0ArtifactK
	switch a.opt.Case {
	case CaseB0ArtifactAliasing:
		amplitude := aliasAmplitude
		if k != 0 {
			amplitude = (k - 1) * S0WhiteMatter
		}
		return sig + amplitude*taper((x-aliasX)/aliasSemiX, (y-aliasY)/aliasSemiY)
	case CaseB0ArtifactDropout:
		factor := dropoutFactor
		if k != 0 {
			factor = k
		}
		return sig * (1 - (1-factor)*taper((x-dropoutX)/dropoutSemiX, (y-dropoutY)/dropoutSemiY))
	}
	return sig
}

// taper is 1 at the centre of the unit circle, falling as cos^2 to 0 at
// its edge, 0 outside.
func taper(u, v float64) float64 {
	r := math.Hypot(u, v)
	if r >= 1 {
		return 0
	}
	c := math.Cos(math.Pi / 2 * r)
	return c * c
}

// plant records the case's defect in the Truth.
func (a *acquisition) plant() {
	o, t := a.opt, a.truth
	d := PlantedDefect{Kind: o.Case}
	switch o.Case {
	case CaseClean, CaseIceWater0C, CaseScannerADCCorrect:
		return
	case CaseNoB0:
		d.Detail = fmt.Sprintf("no image at the protocol's lowest b-value %g", o.BValues[0])
	case CaseBValueSetDiffers:
		d.Detail = fmt.Sprintf("b-values %v acquired and labelled; the protocol %q has %v", t.HeaderB, o.Protocol, o.BValues)
	case CaseBValueHeaderWrong:
		d.Detail = fmt.Sprintf("header b-values %v, weighting applied %v", t.HeaderB, t.AppliedB)
	case CaseB0ArtifactAliasing, CaseB0ArtifactDropout, CaseRestrictionLesion, CaseT2ShineThrough:
		label := uint8(LabelArtifact)
		d.Detail = "b0 only, DWI unchanged"
		if o.Case.lesion() {
			label = LabelLesion
			d.Detail = fmt.Sprintf("lesion sphere radius %g mm at (%g, %g, %g) mm, ADC %g mm2/s",
				lesionRadius, lesionX, lesionY, lesionZ, t.ADC[a.firstLabelled(label)])
		}
		d.Slices, d.BBox = a.labelExtent(label)
	case CaseMissingSlices:
		d.Slices = missingSlices(a.slices)
		d.Detail = fmt.Sprintf("slices %v missing from b = %g direction %v", d.Slices, t.HeaderB[len(t.HeaderB)-1], directionSet(o.Directions)[0])
	case CaseSlicePositions:
		where := "b0 series"
		if a.opt.B0InSeries {
			where = "b0 volume of the DWI series,"
		}
		d.Detail = fmt.Sprintf("%s slice positions shifted %+g mm along the slice normal", where, cmp.Or(a.opt.B0SliceShift, 0.5)*sliceThicknessMM)
	case CaseScannerADCScaled:
		d.Detail = fmt.Sprintf("ADC map Real World Value Mapping slope %g mm2/s, should be %g", adcUnit*misscaleFactor, adcUnit)
	case CaseLowSNR:
		d.Detail = fmt.Sprintf("b0 SNR %g in the reference tissue", o.SNR)
	case CaseIceWaterWarm:
		d.Detail = fmt.Sprintf("water at %g C: ADC %.4g mm2/s instead of %.4g at 0 C", IceWarmC, WaterADC(IceWarmC), WaterADC(IceWaterC))
	}
	t.Planted = append(t.Planted, d)
}

func (a *acquisition) firstLabelled(l uint8) int {
	for i, v := range a.truth.Labels {
		if v == l {
			return i
		}
	}
	return 0
}

// labelExtent is the slices holding label l and the union bounding box.
func (a *acquisition) labelExtent(l uint8) ([]int, Box) {
	t := a.truth
	var slices []int
	box := Box{Row0: t.Rows, Col0: t.Cols}
	for s := 0; s < t.Slices; s++ {
		found := false
		for r := 0; r < t.Rows; r++ {
			for c := 0; c < t.Cols; c++ {
				if t.Labels[t.Index(r, c, s)] != l {
					continue
				}
				found = true
				box.Row0, box.Col0 = min(box.Row0, r), min(box.Col0, c)
				box.Row1, box.Col1 = max(box.Row1, r+1), max(box.Col1, c+1)
			}
		}
		if found {
			slices = append(slices, s)
		}
	}
	if slices == nil {
		box = Box{}
	}
	return slices, box
}
