package dwi

import (
	"cmp"
	"fmt"
	"math"
	"slices"
	"strings"

	"dwiaudit/audit/adc"
)

// Geometry sanity and grid inference.
const (
	// unitTolerance is how far Image Orientation (Patient) may be from
	// two orthogonal unit vectors (PS3.3 C.7.6.2.1.1) before it is
	// refused as geometry: DS rounding of the cosines is far smaller
	// (1e-6 or better), a broken header far larger.
	unitTolerance = 0.01

	// maxInferredGap is the longest run of slice positions missing from
	// every volume that the grid fills in from the regular slice
	// spacing. A longer run is more likely two slabs than lost images.
	maxInferredGap = 8
)

// AssembleSeries groups the images of one series into volumes: one per
// b-value (within tol.BValue/BValueRelative) and gradient direction
// (within tol.Direction; isotropic and b = 0 images form their own
// volume), each ordered on the common slice grid: Image Position
// (Patient) projected on the normal of the row and column direction
// cosines (PS3.3 C.7.6.2.1.1), positions within tol.SlicePosition being
// one slice. A gradient g and its opposite -g are two directions: they
// are two acquisitions, even though they weight diffusion alike. Scanner
// ADC and eADC maps go to Series.Maps; other derived images (FA, colour
// FA, tensor b0: MapKind.Audited false) are left out, and AssembleStudy
// lists a series made only of them in Study.Derived. The Series points into frames, which must not
// change while it is in use.
//
// Errors: ErrNoImages when no image can be placed, ErrMissingGeometry
// (naming the first) when no image has usable geometry, ErrMixedSeries,
// ErrInvalidOptions for bad tolerances. Everything else that is wrong
// with the series is reported in Series.Facts.
func AssembleSeries(frames []Frame, tol Tolerances) (*Series, error) {
	ptrs := make([]*Frame, len(frames))
	for i := range frames {
		ptrs[i] = &frames[i]
	}
	return assembleSeries(ptrs, tol)
}

func assembleSeries(frames []*Frame, tol Tolerances) (*Series, error) {
	if err := tol.Validate(); err != nil {
		return nil, err
	}
	if len(frames) == 0 {
		return nil, ErrNoImages
	}
	seriesUID := frames[0].SeriesInstanceUID
	for _, f := range frames {
		if f.SeriesInstanceUID != seriesUID {
			return nil, fmt.Errorf("%w: %s and %s", ErrMixedSeries, seriesUID, f.SeriesInstanceUID)
		}
	}
	// A fixed order, whatever order the images arrived in: the first of
	// two repeats gives the combined slice its header.
	sorted := slices.Clone(frames)
	slices.SortStableFunc(sorted, func(a, b *Frame) int {
		return cmp.Or(cmp.Compare(a.InstanceNumber, b.InstanceNumber),
			strings.Compare(a.SOPInstanceUID, b.SOPInstanceUID),
			cmp.Compare(a.FrameNumber, b.FrameNumber))
	})

	s := &Series{SeriesInstanceUID: seriesUID}
	var placed []*Frame
	var geomErr error // the first image without usable geometry
	for _, f := range sorted {
		if !f.Kind.Audited() {
			continue // a derived map the audit does not use (FA, ...): listed, not placed
		}
		if f.Encapsulated {
			s.Facts.Encapsulated = true
		}
		// An image that cannot be placed is left out and named; only a
		// series none of whose images can be placed fails.
		if !f.Geometry.Known {
			s.Facts.NoGeometry = append(s.Facts.NoGeometry, f.ID())
			if geomErr == nil {
				geomErr = fmt.Errorf("%w: image %s has no Image Position and Orientation (Patient)", ErrMissingGeometry, f.ID())
			}
			continue
		}
		if _, ok := normalOf(f.Geometry.Orientation); !ok {
			s.Facts.NoGeometry = append(s.Facts.NoGeometry, f.ID())
			if geomErr == nil {
				geomErr = fmt.Errorf("%w: image %s: Image Orientation (Patient) %v is not two orthogonal unit vectors", ErrMissingGeometry, f.ID(), f.Geometry.Orientation)
			}
			continue
		}
		if f.Kind == KindAcquired && !f.HasBValue && f.Directionality != DirectionalityNone {
			s.Facts.NoBValue = append(s.Facts.NoBValue, f.ID())
			continue
		}
		placed = append(placed, f)
	}
	if len(placed) == 0 && geomErr != nil {
		return nil, geomErr
	}
	if len(placed) == 0 {
		return nil, fmt.Errorf("%w: none of the %d images of series %s has a b-value or is a diffusion map", ErrNoImages, len(frames), seriesUID)
	}

	// The reference: the first image of the lowest b-value (the b0 when
	// there is one), else the first map.
	ref := placed[0]
	for _, f := range placed {
		if f.Kind == KindAcquired && (ref.Kind != KindAcquired || bOf(f) < bOf(ref)) {
			ref = f
		}
	}
	s.StudyInstanceUID = ref.StudyInstanceUID
	s.SeriesNumber = ref.SeriesNumber
	s.SeriesDescription = ref.SeriesDescription
	s.ProtocolName = ref.ProtocolName
	s.BodyPartExamined = ref.BodyPartExamined
	s.Scanner = ref.Scanner
	s.Normal, _ = normalOf(ref.Geometry.Orientation)

	// The slice grid.
	pos := make([]float64, len(placed))
	for i, f := range placed {
		pos[i] = dot(f.Geometry.Position, s.Normal)
	}
	slot, grid := cluster1D(pos, func(float64) float64 { return tol.SlicePosition })
	s.Grid, s.Facts.GridGaps, s.Facts.SliceSpacing = inferGaps(grid, tol)
	if len(s.Facts.GridGaps) > 0 {
		// Re-index onto the grid with the gaps filled in.
		for i := range slot {
			slot[i] = nearest(s.Grid, grid[slot[i]])
		}
	}

	// b-value clusters, over acquired images and maps apart.
	var acq, maps []int
	for i, f := range placed {
		if f.Kind == KindAcquired {
			acq = append(acq, i)
		} else {
			maps = append(maps, i)
		}
	}
	volumes := s.group(placed, acq, slot, tol, false)
	if off, main := offGridVolumes(volumes, s.Grid, tol); len(off) > 0 {
		// Place the offset volumes' images on the others' slices (those
		// beyond the others' coverage are left out) and build the grid
		// again without their positions, so that an offset is a
		// geometry mismatch, not missing slices.
		shift := map[*Frame]float64{}
		drop := map[*Frame]bool{}
		for _, o := range off {
			so := SliceOffset{Volume: o.v.String(), MM: o.mm, Spacing: o.spacing, Tilted: o.tilted}
			for z := range o.v.Slices {
				for _, f := range o.v.ImagesAt(z) {
					p := dot(f.Geometry.Position, s.Normal) - o.mm
					if math.Abs(p-main[nearest(main, p)]) > tol.SlicePosition {
						drop[f] = true
						so.Outside++
						continue
					}
					shift[f] = o.mm
				}
			}
			s.Facts.SliceOffsets = append(s.Facts.SliceOffsets, so)
		}
		placed = slices.DeleteFunc(placed, func(f *Frame) bool { return drop[f] })
		pos = pos[:len(placed)]
		acq, maps = acq[:0], maps[:0]
		for i, f := range placed {
			pos[i] = dot(f.Geometry.Position, s.Normal) - shift[f]
			if f.Kind == KindAcquired {
				acq = append(acq, i)
			} else {
				maps = append(maps, i)
			}
		}
		slot, grid = cluster1D(pos, func(float64) float64 { return tol.SlicePosition })
		s.Grid, s.Facts.GridGaps, s.Facts.SliceSpacing = inferGaps(grid, tol)
		if len(s.Facts.GridGaps) > 0 {
			for i := range slot {
				slot[i] = nearest(s.Grid, grid[slot[i]])
			}
		}
		s.Facts.Repeats, s.Facts.Duplicates, s.Facts.UnknownDirections = nil, nil, nil
		volumes = s.group(placed, acq, slot, tol, false)
	}
	s.Maps = s.group(placed, maps, slot, tol, true)
	s.Volumes = volumes

	// Images whose b-value disagrees with their volume's or with their
	// b-matrix trace (XX + YY + ZZ = b, PS3.3 C.8.13.5.9). The measured
	// mean is the reference: the nominal value is rounded.
	for _, v := range s.Volumes {
		for z := range v.Slices {
			for _, f := range v.ImagesAt(z) {
				b := bOf(f)
				off := math.Abs(b-v.BValueMeasured) > tol.bTolerance(v.BValueMeasured)
				if f.HasBMatrix {
					tr := f.BMatrix[0] + f.BMatrix[3] + f.BMatrix[5]
					off = off || math.Abs(tr-b) > tol.bTolerance(b)
				}
				if off {
					s.Facts.InconsistentB = append(s.Facts.InconsistentB, f.ID())
				}
			}
		}
	}
	s.refresh(tol)
	return s, nil
}

// group makes the volumes of the images idx of placed: by b-value
// cluster, then (acquired images only) by gradient direction. Images of
// one volume on one slice are combined (combine).
func (s *Series) group(placed []*Frame, idx []int, slot []int, tol Tolerances, maps bool) []*Volume {
	if len(idx) == 0 {
		return nil
	}
	// Direction keys of images without a direction.
	const (
		dirNone       = -1 // b0, or the scanner's trace
		dirUnlabelled = -2 // weighted, no direction, no isotropic label
	)
	type key struct {
		kind MapKind
		b    int // b-value cluster
		dir  int // direction cluster, or dirNone / dirUnlabelled
	}
	bs := make([]float64, len(idx))
	for i, j := range idx {
		bs[i] = bOf(placed[j])
	}
	bslot, measured := cluster1D(bs, tol.bTolerance)
	nominal := nominalValues(bs, bslot, measured, tol)
	cosMax := math.Cos(tol.Direction * math.Pi / 180)

	dirs := map[int][]Direction{} // per b cluster
	byKey := map[key]*Volume{}
	var out []*Volume
	for i, j := range idx {
		f := placed[j]
		k := key{kind: f.Kind, b: bslot[i], dir: dirNone}
		b := nominal[k.b]
		var d Direction
		if !maps && measured[k.b] > tol.BValue {
			if dd, ok := directionOf(f); ok {
				d = dd
				k.dir = -1
				for n, rep := range dirs[k.b] {
					if dot(rep, dd) >= cosMax {
						k.dir, d = n, rep
						break
					}
				}
				if k.dir < 0 {
					k.dir = len(dirs[k.b])
					dirs[k.b] = append(dirs[k.b], dd)
				}
			}
		}
		w := WeightingB0
		switch {
		case maps || b <= tol.B0Max:
		case k.dir >= 0:
			w = WeightingDirection
		case labelledTrace(f):
			w = WeightingTrace
		default:
			w, k.dir = WeightingIsotropic, dirUnlabelled
		}
		v := byKey[k]
		if v == nil {
			v = &Volume{
				BValue: b, BValueMeasured: measured[k.b], Direction: d, Isotropic: k.dir < 0, Weighting: w, Kind: f.Kind,
				SeriesUID: s.SeriesInstanceUID, Slices: make([]*Frame, len(s.Grid)), Images: make([][]*Frame, len(s.Grid)),
			}
			byKey[k] = v
			out = append(out, v)
		}
		z := slot[j]
		if slices.ContainsFunc(v.Images[z], func(g *Frame) bool { return g.ID() == f.ID() }) {
			s.Facts.Duplicates = append(s.Facts.Duplicates, f.ID())
			continue
		}
		v.Images[z] = append(v.Images[z], f)
	}
	slices.SortStableFunc(out, func(a, b *Volume) int {
		return cmp.Or(cmp.Compare(a.Kind, b.Kind), cmp.Compare(a.BValue, b.BValue),
			-cmpBool(a.Isotropic, b.Isotropic), cmp.Compare(a.Weighting, b.Weighting),
			cmp.Compare(a.Direction[0], b.Direction[0]), cmp.Compare(a.Direction[1], b.Direction[1]),
			cmp.Compare(a.Direction[2], b.Direction[2]))
	})
	for _, v := range out {
		s.combine(v, tol)
		v.Geometry = firstGeometry(v)
	}
	return out
}

// combine makes each slice of v from its images: the one image as it
// is; repeats of a b-value, direction and slice averaged (their
// arithmetic mean, CombinedMean); images without a direction above B0Max
// combined as a trace (their geometric mean, CombinedGeometricMean) and
// reported in Facts.UnknownDirections. A repeat whose geometry differs
// from the first image's is not combined: it is named in
// Facts.GeometryMismatch.
func (s *Series) combine(v *Volume, tol Tolerances) {
	geometric := v.Weighting == WeightingIsotropic
	images, perSlice := 0, 0
	for z, imgs := range v.Images {
		images += len(imgs)
		perSlice = max(perSlice, len(imgs))
		if len(imgs) == 0 {
			continue
		}
		first := imgs[0]
		use := []*Frame{first}
		for _, f := range imgs[1:] {
			if why := geometryDiff(f.Geometry, first.Geometry, tol); why != "" {
				s.Facts.GeometryMismatch = append(s.Facts.GeometryMismatch, fmt.Sprintf("%v: repeat %s of image %s: %s", v, f.ID(), first.ID(), why))
				continue
			}
			use = append(use, f)
		}
		if len(use) == 1 {
			v.Slices[z] = first
			continue
		}
		if !geometric {
			for _, f := range use[1:] {
				s.Facts.Repeats = append(s.Facts.Repeats, f.ID())
			}
			v.Combined = CombinedMean
		} else {
			v.Combined = CombinedGeometricMean
		}
		c := *first
		c.Pixels = combinePixels(use, geometric)
		v.Slices[z] = &c
	}
	if geometric && perSlice > 1 {
		s.Facts.UnknownDirections = append(s.Facts.UnknownDirections, UnknownDirections{BValue: v.BValue, Images: images, PerSlice: perSlice})
	}
}

// combinePixels is the pixel-wise arithmetic (or geometric) mean of the
// images' pixels; nil when some image has none or they differ in length
// (the analysis then says the pixels are missing).
func combinePixels(fs []*Frame, geometric bool) []float32 {
	n := len(fs[0].Pixels)
	for _, f := range fs {
		if f.Pixels == nil || len(f.Pixels) != n {
			return nil
		}
	}
	out := make([]float32, n)
	if geometric {
		in := make([][]float32, len(fs))
		for i, f := range fs {
			in[i] = f.Pixels
		}
		adc.GeometricMean(out, in...)
		return out
	}
	for i := range out {
		sum := 0.0
		for _, f := range fs {
			sum += float64(f.Pixels[i])
		}
		out[i] = float32(sum / float64(len(fs)))
	}
	return out
}

// labelledTrace says whether an image says it is the scanner's trace:
// Diffusion Directionality ISOTROPIC (PS3.3 C.8.13.5.9), or Image Type
// value TRACEW (common practice).
func labelledTrace(f *Frame) bool {
	if f.Directionality == DirectionalityIsotropic {
		return true
	}
	return slices.ContainsFunc(f.ImageType, func(v string) bool { return strings.EqualFold(v, "TRACEW") })
}

// nominalValues are the nominal b-values of the clusters: 0 for a
// cluster whose mean is within tol.BValue of 0; else the whole number
// more than half of its values round to, when there is one; else its
// mean rounded to a whole number. So 999.998 reads 1000, and a cluster
// of 995, 1000, 1000 reads 1000.
func nominalValues(bs []float64, slot []int, means []float64, tol Tolerances) []float64 {
	out := make([]float64, len(means))
	counts := make([]map[float64]int, len(means))
	sizes := make([]int, len(means))
	for i, b := range bs {
		if counts[slot[i]] == nil {
			counts[slot[i]] = map[float64]int{}
		}
		counts[slot[i]][math.Round(b)]++
		sizes[slot[i]]++
	}
	for k, mean := range means {
		if mean <= tol.BValue {
			continue
		}
		out[k] = math.Round(mean)
		for v, n := range counts[k] {
			if 2*n > sizes[k] {
				out[k] = v
			}
		}
	}
	return out
}

// refresh recomputes what depends on the volumes: the reference
// geometry, the b-values and directions present, slices per volume,
// missing slices and geometry mismatches. Facts read from the images
// (duplicates, inconsistent b-values, ...) are kept.
func (s *Series) refresh(tol Tolerances) {
	f := &s.Facts
	f.BValues, f.Directions, f.SlicesPerVolume, f.MissingSlices, f.GeometryMismatch = nil, nil, nil, nil, nil
	for _, o := range f.SliceOffsets {
		f.GeometryMismatch = append(f.GeometryMismatch, o.String())
	}
	switch {
	case len(s.Volumes) > 0:
		s.Reference = s.Volumes[0].Geometry
	case len(s.Maps) > 0:
		s.Reference = s.Maps[0].Geometry
	}
	for _, v := range s.Volumes {
		if !slices.Contains(f.BValues, v.BValue) {
			f.BValues = append(f.BValues, v.BValue)
		}
		if !v.Isotropic {
			if f.Directions == nil {
				f.Directions = map[float64][]Direction{}
			}
			f.Directions[v.BValue] = append(f.Directions[v.BValue], v.Direction)
		}
		n := 0
		for i, sl := range v.Slices {
			if sl != nil {
				n++
				continue
			}
			f.MissingSlices = append(f.MissingSlices, MissingSlice{BValue: v.BValue, Direction: v.Direction, Position: s.Grid[i]})
		}
		f.SlicesPerVolume = append(f.SlicesPerVolume, n)
	}
	slices.Sort(f.BValues)

	// Geometry of every slice against the reference volume's slice at the
	// same position (or the reference geometry where it has none).
	var refVol *Volume
	if len(s.Volumes) > 0 {
		refVol = s.Volumes[0]
	}
	for _, v := range append(slices.Clone(s.Volumes), s.Maps...) {
		for i, sl := range v.Slices {
			if sl == nil {
				continue
			}
			want := s.Reference
			if refVol != nil && refVol.Slices[i] != nil {
				want = refVol.Slices[i].Geometry
			}
			if why := geometryDiff(sl.Geometry, want, tol); why != "" {
				f.GeometryMismatch = append(f.GeometryMismatch, fmt.Sprintf("%v: %s (image %s)", v, why, sl.ID()))
				break
			}
		}
	}
}

// String names a volume in facts: "b=1000 (0.707,0.707,0.000)", "b=0
// isotropic", "ADC map b=1000".
func (v *Volume) String() string {
	switch v.Kind {
	case KindADC:
		return fmt.Sprintf("ADC map b=%g", v.BValue)
	case KindEADC:
		return fmt.Sprintf("eADC map b=%g", v.BValue)
	case KindOtherDerived:
		return fmt.Sprintf("derived map b=%g", v.BValue)
	}
	switch {
	case v.Weighting == WeightingIsotropic:
		return fmt.Sprintf("b=%g without direction", v.BValue)
	case v.Isotropic:
		return fmt.Sprintf("b=%g isotropic", v.BValue)
	}
	return fmt.Sprintf("b=%g (%.3f,%.3f,%.3f)", v.BValue, v.Direction[0], v.Direction[1], v.Direction[2])
}

// geometryDiff says how a differs from b beyond tolerance, "" if not:
// matrix, pixel spacing, orientation, and position within the plane.
func geometryDiff(a, b Geometry, tol Tolerances) string {
	if a.Rows != b.Rows || a.Columns != b.Columns {
		return fmt.Sprintf("matrix %dx%d, reference %dx%d", a.Rows, a.Columns, b.Rows, b.Columns)
	}
	for i := range 2 {
		if math.Abs(a.PixelSpacing[i]-b.PixelSpacing[i]) > tol.Spacing {
			return fmt.Sprintf("pixel spacing %v, reference %v", a.PixelSpacing, b.PixelSpacing)
		}
	}
	for i := range 6 {
		if d := math.Abs(a.Orientation[i] - b.Orientation[i]); d > tol.Orientation {
			return fmt.Sprintf("orientation differs from the reference by %.4g", d)
		}
	}
	d := [3]float64{a.Position[0] - b.Position[0], a.Position[1] - b.Position[1], a.Position[2] - b.Position[2]}
	row := [3]float64{b.Orientation[0], b.Orientation[1], b.Orientation[2]}
	col := [3]float64{b.Orientation[3], b.Orientation[4], b.Orientation[5]}
	if r, c := dot(d, row), dot(d, col); math.Abs(r) > tol.SlicePosition || math.Abs(c) > tol.SlicePosition {
		return fmt.Sprintf("shifted in plane by %.3g mm along rows, %.3g mm along columns", r, c)
	}
	return ""
}

func firstGeometry(v *Volume) Geometry {
	for _, f := range v.Slices {
		if f != nil {
			return f.Geometry
		}
	}
	return Geometry{}
}

// bOf is the b-value of an image; an image without one that says
// Diffusion Directionality NONE is b = 0 (PS3.3 C.8.13.5.9).
func bOf(f *Frame) float64 {
	if f.HasBValue {
		return f.BValue
	}
	return 0
}

// directionOf is the unit gradient direction of an image, from Diffusion
// Gradient Orientation, else from the b-matrix; false for isotropic
// images and images that give none.
func directionOf(f *Frame) (Direction, bool) {
	switch f.Directionality {
	case DirectionalityIsotropic, DirectionalityNone:
		return Direction{}, false
	}
	if f.HasGradient {
		if d, ok := unit(f.Gradient); ok {
			return d, true
		}
	}
	if f.HasBMatrix {
		return directionFromBMatrix(f.BMatrix)
	}
	return Direction{}, false
}

// directionFromBMatrix recovers g from B = b g g^T (one gradient
// direction; PS3.3 C.8.13.5.9 gives XX XY XZ YY YZ ZZ): |g_i| =
// sqrt(B_ii / tr B), signs from the off-diagonal terms, with the first
// non-zero component taken positive (g and -g weight diffusion alike).
func directionFromBMatrix(m [6]float64) (Direction, bool) {
	tr := m[0] + m[3] + m[5]
	if !(tr > 0) {
		return Direction{}, false
	}
	d := Direction{math.Sqrt(max(m[0], 0) / tr), math.Sqrt(max(m[3], 0) / tr), math.Sqrt(max(m[5], 0) / tr)}
	switch {
	case d[0] > 0:
		if m[1] < 0 {
			d[1] = -d[1]
		}
		if m[2] < 0 {
			d[2] = -d[2]
		}
	case d[1] > 0:
		if m[4] < 0 {
			d[2] = -d[2]
		}
	}
	return unit(d)
}

func unit(v [3]float64) (Direction, bool) {
	n := math.Sqrt(dot(v, v))
	if !(n > 1e-6) || math.IsInf(n, 0) {
		return Direction{}, false
	}
	return Direction{v[0] / n, v[1] / n, v[2] / n}, true
}

func dot(a, b [3]float64) float64 { return a[0]*b[0] + a[1]*b[1] + a[2]*b[2] }

// normalOf is the slice normal, row x column direction cosines (PS3.3
// C.7.6.2.1.1); false unless they are orthogonal unit vectors.
func normalOf(o [6]float64) ([3]float64, bool) {
	r := [3]float64{o[0], o[1], o[2]}
	c := [3]float64{o[3], o[4], o[5]}
	if math.Abs(dot(r, r)-1) > unitTolerance || math.Abs(dot(c, c)-1) > unitTolerance || math.Abs(dot(r, c)) > unitTolerance {
		return [3]float64{}, false
	}
	n := [3]float64{r[1]*c[2] - r[2]*c[1], r[2]*c[0] - r[0]*c[2], r[0]*c[1] - r[1]*c[0]}
	u, ok := unit(n)
	return [3]float64(u), ok
}

// offGrid is a volume whose slices lie off the others' grid.
type offGrid struct {
	v       *Volume
	mm      float64 // median offset along the normal
	spacing float64 // the others' slice spacing
	tilted  bool
}

// offGridVolumes finds the acquired volumes whose slice positions lie
// off the others' by less than one slice spacing: the positions held by
// most volumes of the highest b-value are the series' own (the DWI is
// what the ADC is read from), and a volume most of whose slices are
// farther than tol.SlicePosition from every one of them, all by about
// the same amount, is offset, by the median of those distances. A
// volume that is merely missing slices has its slices on the grid and
// is not one of these.
//
// Offsets are found modulo the spacing, then placed where most of the
// volume's slices meet the others'. It returns the offset volumes and
// the series' own positions.
func offGridVolumes(vols []*Volume, grid []float64, tol Tolerances) ([]offGrid, []float64) {
	if len(vols) < 2 || len(grid) < 2 {
		return nil, nil
	}
	highB := 0.0
	for _, v := range vols {
		highB = max(highB, v.BValue)
	}
	count := make([]int, len(grid))
	most := 0
	for _, v := range vols {
		if v.BValue != highB {
			continue
		}
		for i, sl := range v.Slices {
			if sl != nil {
				count[i]++
				most = max(most, count[i])
			}
		}
	}
	var main []float64
	for i, c := range count {
		if 2*c > most {
			main = append(main, grid[i])
		}
	}
	if len(main) == 0 {
		return nil, nil
	}
	spacing := 0.0
	if len(main) > 1 {
		steps := make([]float64, len(main)-1)
		for i := range steps {
			steps[i] = main[i+1] - main[i]
		}
		slices.Sort(steps)
		spacing = steps[(len(steps)-1)/2]
	}
	var refOrient [6]float64
	for _, v := range vols {
		if v.BValue == highB {
			refOrient = firstGeometry(v).Orientation
			break
		}
	}
	var out []offGrid
	for _, v := range vols {
		var d []float64
		n := 0
		for i, sl := range v.Slices {
			if sl == nil {
				continue
			}
			n++
			off := grid[i] - main[nearest(main, grid[i])]
			if spacing > 0 && math.Abs(off) > spacing/2+tol.SlicePosition {
				off -= spacing * math.Round(off/spacing) // beyond the others' coverage
			}
			if math.Abs(off) > tol.SlicePosition {
				d = append(d, off)
			}
		}
		if n == 0 || 2*len(d) <= n {
			continue
		}
		slices.Sort(d)
		med := d[len(d)/2]
		// All by about the same amount: a constant offset, not slices
		// scattered over the grid.
		if d[len(d)-1]-d[0] > 2*tol.SlicePosition+0.5*math.Abs(med) {
			continue
		}
		// Of the offset and its neighbours one spacing away, the one
		// that puts most of the volume's slices on the others' (a b0
		// three quarters of a slice off covers every DWI slice at
		// +0.75, not all at -0.25).
		if spacing > 0 {
			best, bestN := med, -1
			for _, c := range []float64{med, med - spacing, med + spacing} {
				on := 0
				for i, sl := range v.Slices {
					if sl != nil {
						p := grid[i] - c
						if math.Abs(p-main[nearest(main, p)]) <= tol.SlicePosition {
							on++
						}
					}
				}
				if on > bestN || (on == bestN && math.Abs(c) < math.Abs(best)) {
					best, bestN = c, on
				}
			}
			med = best
		}
		tilted := false
		o := firstGeometry(v).Orientation
		for i := range 6 {
			tilted = tilted || math.Abs(o[i]-refOrient[i]) > tol.Orientation
		}
		out = append(out, offGrid{v: v, mm: med, spacing: spacing, tilted: tilted})
	}
	return out, main
}

// cluster1D groups values whose sorted neighbours are at most within(a)
// apart (a the lower of the two), and returns each value's cluster and
// the clusters' means, ascending.
func cluster1D(v []float64, within func(float64) float64) ([]int, []float64) {
	order := make([]int, len(v))
	for i := range order {
		order[i] = i
	}
	slices.SortStableFunc(order, func(a, b int) int { return cmp.Compare(v[a], v[b]) })
	slot := make([]int, len(v))
	var means []float64
	sum, n := 0.0, 0
	for k, i := range order {
		if k > 0 && v[i]-v[order[k-1]] > within(v[order[k-1]]) {
			means = append(means, sum/float64(n))
			sum, n = 0, 0
		}
		sum += v[i]
		n++
		slot[i] = len(means)
	}
	if n > 0 {
		means = append(means, sum/float64(n))
	}
	return slot, means
}

// inferGaps fills in grid positions missing from every volume: where the
// grid is regular (most neighbours one spacing apart) and a step is a
// whole number k of spacings (2 <= k <= maxInferredGap+1), the k-1
// positions between are added. It returns the full grid, the positions
// added and the spacing (median step).
func inferGaps(grid []float64, tol Tolerances) ([]float64, []float64, float64) {
	if len(grid) < 2 {
		return grid, nil, 0
	}
	steps := make([]float64, len(grid)-1)
	for i := range steps {
		steps[i] = grid[i+1] - grid[i]
	}
	sorted := slices.Clone(steps)
	slices.Sort(sorted)
	spacing := sorted[(len(sorted)-1)/2] // lower median: never a step that is not there
	if len(grid) < 3 || spacing <= tol.SlicePosition {
		return grid, nil, spacing
	}
	regular := 0
	for _, d := range steps {
		k := math.Round(d / spacing)
		if math.Abs(d-k*spacing) > tol.SlicePosition*max(1, k) {
			return grid, nil, spacing // irregular: nothing to infer from
		}
		if k == 1 {
			regular++
		}
	}
	if 2*regular <= len(steps) {
		return grid, nil, spacing
	}
	var full, gaps []float64
	for i, d := range steps {
		full = append(full, grid[i])
		k := int(math.Round(d / spacing))
		if k < 2 || k > maxInferredGap+1 {
			continue
		}
		for j := 1; j < k; j++ {
			p := grid[i] + float64(j)*d/float64(k)
			full = append(full, p)
			gaps = append(gaps, p)
		}
	}
	full = append(full, grid[len(grid)-1])
	return full, gaps, spacing
}

// nearest is the index of the grid position closest to p.
func nearest(grid []float64, p float64) int {
	best := 0
	for i, g := range grid {
		if math.Abs(g-p) < math.Abs(grid[best]-p) {
			best = i
		}
	}
	return best
}

func cmpBool(a, b bool) int {
	switch {
	case a == b:
		return 0
	case a:
		return 1
	}
	return -1
}
