package adc

import (
	"errors"
	"fmt"
	"math"
)

// MaskOptions tune TissueMask. DefaultMaskOptions gives the values the
// audit uses; the zero value is not useful.
type MaskOptions struct {
	// K is the threshold, in standard deviations of the background
	// above its median, both measured in the corner regions of the image
	// thresholded (the b0, or its 3×3 median at low SNR; see
	// TissueMask) as the median and 1.4826·MAD (robust to a ghost in a
	// few corners; 1.4826 makes the MAD a standard deviation for normal
	// data, from memory). On the raw b0 that puts the threshold near
	// 4.4σ, where the Rayleigh tail exp(-x²/2) (from memory) leaves 6e-5
	// of background voxels; on the filtered b0, close to normal, 5
	// deviations leave about 3e-7. The opening removes those isolated
	// voxels. Measuring the spread on the image itself, not deriving it
	// from σ, also holds when the scanner interpolated the image and
	// neighbouring noise is correlated.
	K float64
	// OpenRadius is the half-side, in pixels, of the square used for the
	// in-plane opening (erosion, largest connected component, dilation).
	// It removes noise specks and cuts bridges up to 2·OpenRadius-1
	// pixels wide (see coreFraction) between the brain and a bright
	// scalp ring; rings thinner than that vanish, thicker ones are a
	// component of their own and go with the largest-component step. 2 pixels (5×5) is about 4-5 mm at clinical DWI pixel
	// sizes of 0.9-2 mm (common practice), the order of the skull's
	// thickness.
	OpenRadius int
	// EdgeErosion is how many pixels of the outer ring of the final mask
	// to drop, in-plane: those voxels mix tissue with air or bone
	// (partial volume), and their ADC is noise.
	EdgeErosion int
}

// Limits on MaskOptions.
const (
	// maxMaskRadius bounds OpenRadius and EdgeErosion: beyond 16 pixels
	// the opening would erase a small head on a 64×64 matrix.
	maxMaskRadius = 16
	// coreFraction is the share of a voxel's square that must be above
	// the threshold for the voxel to be core. A band k pixels wide
	// crossing a w×w square fills k/w of it, so with w = 5 bands up to 3
	// pixels wide (60%) are cut and solid tissue with up to 20% of its
	// pixels lost to noise (SNR about 3 at a threshold near half the
	// signal) stays whole.
	coreFraction = 0.8
	// otsuBins is the histogram resolution of the fallback threshold:
	// 4096 bins over the data range keep one bin below 1% of tissue
	// signal even when a spike stretches the range a hundredfold.
	otsuBins = 4096
)

// DefaultMaskOptions returns the audit's mask settings (see the fields).
func DefaultMaskOptions() MaskOptions {
	return MaskOptions{K: 5, OpenRadius: 2, EdgeErosion: 1}
}

// Validate reports every problem with o at once.
func (o MaskOptions) Validate() error {
	var errs []error
	if !(o.K > 0) || math.IsInf(o.K, 0) {
		errs = append(errs, fmt.Errorf("adc: MaskOptions.K = %v, want a positive number", o.K))
	}
	if o.OpenRadius < 0 || o.OpenRadius > maxMaskRadius {
		errs = append(errs, fmt.Errorf("adc: MaskOptions.OpenRadius = %d, want 0..%d", o.OpenRadius, maxMaskRadius))
	}
	if o.EdgeErosion < 0 || o.EdgeErosion > maxMaskRadius {
		errs = append(errs, fmt.Errorf("adc: MaskOptions.EdgeErosion = %d, want 0..%d", o.EdgeErosion, maxMaskRadius))
	}
	return errors.Join(errs...)
}

// TissueMask finds the head (or phantom) in a b0 volume and returns one
// bool per voxel, with the background noise estimate it used. The method:
//
//  1. σ from the background corners (BackgroundNoise: NEMA MS 1-2008
//     background method, Rayleigh mean): the NoiseEstimate returned.
//  2. At low SNR (the typical head signal under rawSNRMin·σ), a 3×3
//     in-plane median filter of the b0, for the decisions below only:
//     it cuts the noise of tissue and background about threefold without
//     moving edges, so tissue at SNR 4 still separates from the
//     background. It is not used at higher SNR because it closes a
//     one-pixel dark gap between bright regions, such as a thin skull
//     between brain and scalp fat.
//  3. Threshold (the b0 or its filtered copy) at K background standard
//     deviations above the background's median, both measured in the
//     corner regions (see MaskOptions.K and MaskThreshold); at Otsu's
//     threshold only when the image is too small for corner regions
//     (Otsu would split pure noise, or a head of air, parenchyma and
//     bright CSF between the two tissues, so it is no fallback for low
//     SNR). A background the scanner set to zero has zero spread:
//     everything above zero is kept.
//  4. An in-plane opening with a (2·OpenRadius+1)² square, made robust
//     to noise: a voxel is in the core when at least coreFraction of
//     its square is above the threshold (a rank erosion, so a few noise
//     holes do not break tissue apart at low SNR); keep the largest 3D
//     connected component of the core (4-connected in-plane, to the
//     adjacent slice through-plane; slices left empty, such as missing
//     ones, are bridged so a gap does not cut the head in two); dilate
//     it by the same square and keep only voxels above the threshold.
//     This drops noise specks, a thin scalp ring and whatever touches
//     the brain only by a thin bridge.
//  5. Fill holes slice by slice (background not reachable from the image
//     border): dark structures inside the head, such as a dropout, stay
//     in the head.
//  6. Erode the outer ring by EdgeErosion pixels (partial volume).
//
// NaN voxels (missing slices) are never in the mask. opt must be valid
// (MaskOptions.Validate); TissueMask panics otherwise.
func TissueMask(b0 Volume3, opt MaskOptions) ([]bool, NoiseEstimate) {
	b0.check()
	if err := opt.Validate(); err != nil {
		panic(err)
	}
	noise := BackgroundNoise(b0)
	src, t := maskSource(b0, noise, opt)
	n := len(b0.Data)
	mask := make([]bool, n)
	for i, v := range src.Data {
		mask[i] = v > t
	}
	m := morphology{rows: b0.Rows, cols: b0.Cols, slices: b0.Slices, counts: make([]uint8, n)}
	core := make([]bool, n)
	w := 2*opt.OpenRadius + 1
	m.rank(core, mask, opt.OpenRadius, int(math.Ceil(coreFraction*float64(w*w))))
	if !m.keepLargest(core) {
		// Nothing survives the erosion (an object thinner than the
		// square): fall back to the largest component of the threshold.
		copy(core, mask)
		m.keepLargest(core)
	} else {
		m.dilate(core, core, opt.OpenRadius)
		for i := range core {
			core[i] = core[i] && mask[i]
		}
	}
	m.fillHoles(core)
	m.erode(mask, core, opt.EdgeErosion)
	for i, v := range b0.Data {
		if v != v {
			mask[i] = false
		}
	}
	return mask, noise
}

// MaskThreshold is the level TissueMask keeps voxels above, and
// whether it applies to the 3×3 median-filtered b0 (filtered) or to the
// b0 itself (see TissueMask).
func MaskThreshold(b0 Volume3, opt MaskOptions) (level float32, filtered bool) {
	b0.check()
	src, t := maskSource(b0, BackgroundNoise(b0), opt)
	return t, len(b0.Data) > 0 && &src.Data[0] != &b0.Data[0]
}

// rawSNRMin is the head SNR (median signal above the raw threshold over
// σ) from which TissueMask decides on the raw b0. The raw threshold is
// about 4.4σ (Rayleigh median 1.18σ plus 5 deviations of 0.65σ, from
// memory), 0.44 of the typical head signal at SNR 10; the darkest brain
// tissue on a b0, white matter, is about 0.75 of it (the phantom's S0
// values; common practice), 7.5σ, three deviations above the threshold:
// 0.1% of its voxels lost, which the hole filling restores.
const rawSNRMin = 10

// maskSource picks the image TissueMask thresholds and the threshold:
// the b0 itself when the head is at least rawSNRMin above the noise (no
// filter, so a one-pixel dark gap between the brain and the scalp stays
// open), else its 3×3 median (see TissueMask).
func maskSource(b0 Volume3, noise NoiseEstimate, opt MaskOptions) (Volume3, float32) {
	t := maskThreshold(b0, opt)
	if !noise.Valid() {
		// A zeroed background (or none): nothing to filter against.
		return b0, t
	}
	// The typical head signal: the median above the raw threshold, on
	// every levelStride-th voxel (a median needs no more).
	const levelStride = 4
	sample := make([]float32, 0, len(b0.Data)/levelStride+1)
	for i := 0; i < len(b0.Data); i += levelStride {
		if v := b0.Data[i]; v > t {
			sample = append(sample, v)
		}
	}
	if len(sample) > 0 && float64(PercentileInPlace(sample, 50)) >= rawSNRMin*noise.Sigma {
		return b0, t
	}
	filtered := median3x3(b0)
	return *filtered, maskThreshold(*filtered, opt)
}

// maskThreshold is MaskThreshold on an already filtered volume.
func maskThreshold(filtered Volume3, opt MaskOptions) float32 {
	images := make([][]float32, filtered.Slices)
	for z := range images {
		images[z] = filtered.Slice(z)
	}
	bg := cornerPixels(filtered.Rows, filtered.Cols, images)
	if len(bg) == 0 {
		return otsu(filtered.Data)
	}
	level := PercentileInPlace(bg, 50)
	for i, v := range bg {
		bg[i] = float32(math.Abs(float64(v - level)))
	}
	spread := madToSD * float64(PercentileInPlace(bg, 50))
	return float32(float64(level) + opt.K*spread)
}

// madToSD turns a median absolute deviation into a standard deviation
// for normally distributed data: 1/Φ⁻¹(3/4) (from memory).
const madToSD = 1.4826

// median3x3 returns the in-plane 3×3 median of v, the image border
// replicated; NaN counts as 0 (no signal).
func median3x3(v Volume3) *Volume3 {
	out := NewVolume3(v.Rows, v.Cols, v.Slices)
	rows, cols := v.Rows, v.Cols
	var p [9]float32
	for z := 0; z < v.Slices; z++ {
		src, dst := v.Slice(z), out.Slice(z)
		for y := 0; y < rows; y++ {
			up, down := max(y-1, 0)*cols, min(y+1, rows-1)*cols
			mid := y * cols
			for x := 0; x < cols; x++ {
				l, r := max(x-1, 0), min(x+1, cols-1)
				p = [9]float32{src[up+l], src[up+x], src[up+r], src[mid+l], src[mid+x], src[mid+r], src[down+l], src[down+x], src[down+r]}
				for k, q := range p {
					if q != q {
						p[k] = 0
					}
				}
				dst[mid+x] = median9(&p)
			}
		}
	}
	return out
}

// median9 is the median of nine values by a 19-exchange sorting network
// (Paeth, Graphics Gems, from memory; a test checks it against sorting).
// It reorders p.
func median9(p *[9]float32) float32 {
	s := func(i, j int) {
		if p[i] > p[j] {
			p[i], p[j] = p[j], p[i]
		}
	}
	s(1, 2)
	s(4, 5)
	s(7, 8)
	s(0, 1)
	s(3, 4)
	s(6, 7)
	s(1, 2)
	s(4, 5)
	s(7, 8)
	s(0, 3)
	s(5, 8)
	s(4, 7)
	s(3, 6)
	s(1, 4)
	s(2, 5)
	s(4, 7)
	s(4, 2)
	s(6, 4)
	s(4, 2)
	return p[4]
}

// otsu returns the threshold that maximises the between-class variance
// of the histogram of the non-NaN values (Otsu, IEEE SMC 1979; from
// memory), over otsuBins bins spanning their range. Values above the
// returned threshold form the bright class. NaN when fewer than two
// distinct values exist.
func otsu(vals []float32) float32 {
	lo, hi := float32(math.Inf(1)), float32(math.Inf(-1))
	for _, v := range vals {
		if v != v {
			continue
		}
		lo = min(lo, v)
		hi = max(hi, v)
	}
	if !(hi > lo) {
		return float32(math.NaN())
	}
	var hist [otsuBins]float64
	scale := float64(otsuBins) / (float64(hi) - float64(lo))
	var total, sum float64
	for _, v := range vals {
		if v != v {
			continue
		}
		k := int((float64(v) - float64(lo)) * scale)
		k = min(k, otsuBins-1)
		hist[k]++
	}
	for k, c := range hist {
		total += c
		sum += c * float64(k)
	}
	var w0, sum0, best float64
	bestK := 0
	for k, c := range hist[:otsuBins-1] {
		w0 += c
		sum0 += c * float64(k)
		w1 := total - w0
		if w0 == 0 || w1 == 0 {
			continue
		}
		d := sum0/w0 - (sum-sum0)/w1
		if between := w0 * w1 * d * d; between > best {
			best, bestK = between, k
		}
	}
	// The threshold is the top edge of bin bestK.
	return float32(float64(lo) + float64(bestK+1)/scale)
}

// morphology holds the geometry and scratch space of the binary
// operations on one volume.
type morphology struct {
	rows, cols, slices int
	counts             []uint8 // volume-sized: set pixels in each row window
	stack              []int32 // flood-fill stack, grown once
}

// erode writes into dst the in-plane erosion of src by a square of
// half-side r (outside the image counts as background). dst may be src.
func (m *morphology) erode(dst, src []bool, r int) {
	w := 2*r + 1
	m.rank(dst, src, r, w*w)
}

// dilate is the in-plane dilation by the same square. dst may be src.
func (m *morphology) dilate(dst, src []bool, r int) { m.rank(dst, src, r, 1) }

// rank sets dst where at least need pixels of the in-plane square of
// half-side r around the pixel are set in src (outside the image counts
// as clear): need = (2r+1)² is erosion, need = 1 dilation. Separable:
// a running count along each row into counts, then a running sum of
// those down each column. dst may be src.
func (m *morphology) rank(dst, src []bool, r, need int) {
	if r == 0 {
		copy(dst, src)
		return
	}
	rows, cols := m.rows, m.cols
	for z := 0; z < m.slices; z++ {
		base := z * rows * cols
		for y := 0; y < rows; y++ {
			line := src[base+y*cols : base+(y+1)*cols]
			out := m.counts[base+y*cols : base+(y+1)*cols]
			count := 0
			for x := 0; x < r && x < cols; x++ {
				if line[x] {
					count++
				}
			}
			for x := 0; x < cols; x++ {
				if in := x + r; in < cols && line[in] {
					count++
				}
				if o := x - r - 1; o >= 0 && line[o] {
					count--
				}
				out[x] = uint8(count) // ≤ 2·maxMaskRadius+1 < 256
			}
		}
		for x := 0; x < cols; x++ {
			sum := 0
			for y := 0; y < r && y < rows; y++ {
				sum += int(m.counts[base+y*cols+x])
			}
			for y := 0; y < rows; y++ {
				if in := y + r; in < rows {
					sum += int(m.counts[base+in*cols+x])
				}
				if o := y - r - 1; o >= 0 {
					sum -= int(m.counts[base+o*cols+x])
				}
				dst[base+y*cols+x] = sum >= need
			}
		}
	}
}

// keepLargest clears every voxel of set outside its largest connected
// component: 4-connected in-plane, and linked through-plane to the same
// pixel of the nearest non-empty slice above and below (empty slices are
// bridged). It reports whether set had any voxel.
func (m *morphology) keepLargest(set []bool) bool {
	plane := m.rows * m.cols
	// prev[z], next[z]: nearest non-empty slice before and after z, or -1.
	prev := make([]int, m.slices)
	next := make([]int, m.slices)
	nonEmpty := make([]bool, m.slices)
	found := false
	for z := 0; z < m.slices; z++ {
		for _, v := range set[z*plane : (z+1)*plane] {
			if v {
				nonEmpty[z] = true
				found = true
				break
			}
		}
	}
	if !found {
		return false
	}
	last := -1
	for z := 0; z < m.slices; z++ {
		prev[z] = last
		if nonEmpty[z] {
			last = z
		}
	}
	last = -1
	for z := m.slices - 1; z >= 0; z-- {
		next[z] = last
		if nonEmpty[z] {
			last = z
		}
	}
	// labels: 0 not yet visited, otherwise the component number.
	labels := make([]int32, len(set))
	var best, bestSize, label int32
	for seed, v := range set {
		if !v || labels[seed] != 0 {
			continue
		}
		label++
		size := int32(0)
		labels[seed] = label
		m.stack = append(m.stack[:0], int32(seed))
		for len(m.stack) > 0 {
			i := int(m.stack[len(m.stack)-1])
			m.stack = m.stack[:len(m.stack)-1]
			size++
			z, rem := i/plane, i%plane
			y, x := rem/m.cols, rem%m.cols
			visit := func(j int) {
				if set[j] && labels[j] == 0 {
					labels[j] = label
					m.stack = append(m.stack, int32(j))
				}
			}
			if x > 0 {
				visit(i - 1)
			}
			if x < m.cols-1 {
				visit(i + 1)
			}
			if y > 0 {
				visit(i - m.cols)
			}
			if y < m.rows-1 {
				visit(i + m.cols)
			}
			if p := prev[z]; p >= 0 {
				visit(p*plane + rem)
			}
			if q := next[z]; q >= 0 {
				visit(q*plane + rem)
			}
		}
		if size > bestSize {
			best, bestSize = label, size
		}
	}
	for i := range set {
		set[i] = labels[i] == best
	}
	return true
}

// fillHoles sets, slice by slice, every clear pixel that a 4-connected
// walk over clear pixels from the image border cannot reach.
func (m *morphology) fillHoles(set []bool) {
	plane := m.rows * m.cols
	outside := make([]bool, plane) // reached from the border
	for z := 0; z < m.slices; z++ {
		s := set[z*plane : (z+1)*plane]
		clear(outside)
		push := func(j int) {
			if !s[j] && !outside[j] {
				outside[j] = true
				m.stack = append(m.stack, int32(j))
			}
		}
		m.stack = m.stack[:0]
		for x := 0; x < m.cols; x++ {
			push(x)
			push((m.rows-1)*m.cols + x)
		}
		for y := 0; y < m.rows; y++ {
			push(y * m.cols)
			push(y*m.cols + m.cols - 1)
		}
		for len(m.stack) > 0 {
			i := int(m.stack[len(m.stack)-1])
			m.stack = m.stack[:len(m.stack)-1]
			y, x := i/m.cols, i%m.cols
			if x > 0 {
				push(i - 1)
			}
			if x < m.cols-1 {
				push(i + 1)
			}
			if y > 0 {
				push(i - m.cols)
			}
			if y < m.rows-1 {
				push(i + m.cols)
			}
		}
		for i := range s {
			if !s[i] && !outside[i] {
				s[i] = true
			}
		}
	}
}
