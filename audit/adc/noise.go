package adc

import (
	"math"
)

// NoiseMethod says how a NoiseEstimate was made. Its value is the text
// reports print.
type NoiseMethod string

const (
	// NoiseBackgroundRayleigh: the mean of magnitude pixels in background
	// regions of interest, divided by √(π/2). Magnitude noise where the
	// true signal is zero follows a Rayleigh distribution (Gudbjartsson &
	// Patz, MRM 1995;34:910; docs/references.md#gudbjartsson-patz-1995) whose mean is σ·√(π/2) (from
	// memory), σ being the standard deviation of the noise on each of the
	// real and imaginary channels. This is the background-region method
	// of NEMA MS 1-2008 (from memory, not re-read), computed per region
	// and combined by the median across regions (see BackgroundNoise).
	NoiseBackgroundRayleigh NoiseMethod = "background mean / sqrt(pi/2) (Rayleigh; NEMA MS 1-2008 background method)"
	// NoiseDifference: the standard deviation of the difference of two
	// repeated acquisitions inside tissue, divided by √2: the difference
	// of two independent images with noise σ has noise σ·√2, and in
	// tissue at useful SNR magnitude noise is close to Gaussian
	// (Gudbjartsson & Patz 1995). This is the two-acquisition method of
	// NEMA MS 1-2008 (from memory, not re-read).
	NoiseDifference NoiseMethod = "difference of two repeats / sqrt(2) (NEMA MS 1-2008 difference method)"
	// NoiseZeroedBackground: the background is mostly exact zeros, as
	// when a scanner masks the air outside the body; there is no noise to
	// measure, and Sigma is NaN.
	NoiseZeroedBackground NoiseMethod = "unavailable: background set to zero by the scanner"
	// NoiseNoBackground: the volume is too small, or has no slices with
	// data, for background regions.
	NoiseNoBackground NoiseMethod = "unavailable: no background region"
)

// NoiseEstimate is the standard deviation of the image noise and how it
// was found.
type NoiseEstimate struct {
	Sigma  float64 // σ of the Gaussian noise on each channel, pixel units; NaN when unavailable
	Method NoiseMethod
	Pixels int // pixels the estimate rests on
}

// Valid reports whether Sigma is a usable positive number.
func (n NoiseEstimate) Valid() bool { return n.Sigma > 0 && !math.IsInf(n.Sigma, 0) }

// Background regions of BackgroundNoise.
const (
	// cornerFraction is the side of each corner square as a fraction of
	// the shorter side of the image. An ellipse inscribed in the field of
	// view (a head filling it) leaves a square of side (1-1/√2) ≈ 0.146
	// of the side free in each corner, so 0.1 stays in air for any head
	// that does not overflow the field of view.
	cornerFraction = 0.1
	// minCorner is the smallest corner square, in pixels, worth a mean:
	// 16 pixels give a mean within about 13% of σ·√(π/2) (the Rayleigh
	// standard deviation is 0.52 of its mean; 0.52/√16).
	minCorner = 4
	// zeroedFraction: a corner region whose pixels are mostly exact
	// zeros has been masked by the scanner, not measured.
	zeroedFraction = 0.5
)

// rayleighMeanFactor is √(π/2), the mean of a Rayleigh distribution in
// units of σ (from memory; it is E|X+iY| for X, Y ~ N(0, σ²)). A test
// checks the digits against math.Sqrt(math.Pi/2).
const rayleighMeanFactor = 1.2533141373155002

// BackgroundNoise estimates σ from the four corner squares of every slice
// of v (NoiseBackgroundRayleigh). Corners, not "everything outside the
// head", because the Nyquist N/2 ghost and wrap-around lie along the
// phase-encoding direction across the middle of the background, and a
// corner region is the usual place to avoid them (common practice).
// Each region gives one mean; σ comes from the median of the region
// means over all slices, so a few regions hit by a ghost, an aliased
// nose or a spike do not move it. Slices whose corner pixels are all NaN
// (missing slices) are skipped.
func BackgroundNoise(v Volume3) NoiseEstimate {
	v.check()
	images := make([][]float32, v.Slices)
	for z := range images {
		images[z] = v.Slice(z)
	}
	return BackgroundNoiseImages(v.Rows, v.Cols, images...)
}

// BackgroundNoiseImages is BackgroundNoise over separate images of
// rows×cols pixels, such as the slices of several volumes of one b-value
// that were never copied into a Volume3. nil images (missing slices) are
// skipped; an image of another size panics.
func BackgroundNoiseImages(rows, cols int, images ...[]float32) NoiseEstimate {
	side := cornerSide(rows, cols)
	if side == 0 {
		return NoiseEstimate{Sigma: math.NaN(), Method: NoiseNoBackground}
	}
	means := make([]float32, 0, 4*len(images))
	zeroed, pixels := 0, 0
	forCorners(rows, cols, side, images, func(region []float32) {
		var sum float64
		n, zeros := 0, 0
		for _, p := range region {
			if p != p {
				continue
			}
			if p == 0 {
				zeros++
			}
			sum += float64(p)
			n++
		}
		if n == 0 {
			return
		}
		if float64(zeros) > zeroedFraction*float64(n) {
			zeroed++
			return
		}
		means = append(means, float32(sum/float64(n)))
		pixels += n
	})
	if zeroed > len(means) {
		return NoiseEstimate{Sigma: math.NaN(), Method: NoiseZeroedBackground}
	}
	if len(means) == 0 {
		return NoiseEstimate{Sigma: math.NaN(), Method: NoiseNoBackground}
	}
	m := PercentileInPlace(means, 50)
	return NoiseEstimate{Sigma: float64(m) / rayleighMeanFactor, Method: NoiseBackgroundRayleigh, Pixels: pixels}
}

// cornerSide is the side of the corner squares of a rows×cols image, 0
// when the image is too small to have four.
func cornerSide(rows, cols int) int {
	side := max(int(cornerFraction*float64(min(rows, cols))), minCorner)
	if 2*side > rows || 2*side > cols {
		return 0
	}
	return side
}

// forCorners calls fn with the pixels of each corner square of each
// non-nil image, gathered into one reused buffer.
func forCorners(rows, cols, side int, images [][]float32, fn func(region []float32)) {
	buf := make([]float32, 0, side*side)
	for _, img := range images {
		if img == nil {
			continue
		}
		sameLen("background", rows*cols, img)
		for _, origin := range [4][2]int{{0, 0}, {0, cols - side}, {rows - side, 0}, {rows - side, cols - side}} {
			buf = buf[:0]
			for r := origin[0]; r < origin[0]+side; r++ {
				buf = append(buf, img[r*cols+origin[1]:r*cols+origin[1]+side]...)
			}
			fn(buf)
		}
	}
}

// cornerPixels returns the non-NaN pixels of every corner square.
func cornerPixels(rows, cols int, images [][]float32) []float32 {
	side := cornerSide(rows, cols)
	if side == 0 {
		return nil
	}
	var out []float32
	forCorners(rows, cols, side, images, func(region []float32) {
		for _, p := range region {
			if p == p {
				out = append(out, p)
			}
		}
	})
	return out
}

// NoiseFromDifference estimates σ from two repeats a and b of the same
// image inside mask (NoiseDifference). Voxels where either is NaN are
// skipped. mask may be nil (every voxel).
func NoiseFromDifference(a, b []float32, mask []bool) NoiseEstimate {
	sameLen("NoiseFromDifference", len(a), b)
	if mask != nil && len(mask) != len(a) {
		panic("adc: NoiseFromDifference: mask length differs")
	}
	// Two passes (mean, then squared deviations) for accuracy.
	var sum float64
	n := 0
	for i := range a {
		if mask != nil && !mask[i] {
			continue
		}
		d := float64(a[i]) - float64(b[i])
		if d != d {
			continue
		}
		sum += d
		n++
	}
	if n < 2 {
		return NoiseEstimate{Sigma: math.NaN(), Method: NoiseDifference, Pixels: n}
	}
	mean := sum / float64(n)
	var ss float64
	for i := range a {
		if mask != nil && !mask[i] {
			continue
		}
		d := float64(a[i]) - float64(b[i])
		if d != d {
			continue
		}
		ss += (d - mean) * (d - mean)
	}
	sd := math.Sqrt(ss / float64(n-1))
	return NoiseEstimate{Sigma: sd / math.Sqrt2, Method: NoiseDifference, Pixels: n}
}

// NoiseLaplacian: the median absolute response of the 3×3 Laplacian
// difference mask [1 −2 1; −2 4 −2; 1 −2 1] over tissue pixels, divided
// by 6·0.6745. The mask is the difference of two Laplacians, which
// cancels smooth signal (Immerkær, "Fast noise variance estimation",
// CVIU 1996;64:300, from memory, not re-read); its coefficients' squares
// sum to 36, so Gaussian noise of σ gives responses of standard
// deviation 6σ, whose median absolute value is 0.6745·6σ (the normal
// distribution's quartile, common practice). The median, not
// Immerkær's mean, so that the minority of pixels on an edge does not
// move it; what edges remain make σ high, never low. Used where a
// scanner zeroes the background and leaves no air to measure.
const NoiseLaplacian NoiseMethod = "median |3x3 Laplacian difference| / (6 x 0.6745) inside tissue (Immerkaer 1996, robust form)"

// laplacianMADFactor is 6·Φ⁻¹(0.75): the median absolute response of
// the Laplacian difference mask to unit Gaussian noise.
const laplacianMADFactor = 6 * 0.6744897501960817

// NoiseFromLaplacian estimates σ from the images inside their masks
// (NoiseLaplacian): images[k] is one rows×cols image and masks[k] the
// tissue pixels of it; a pixel counts when it and its eight neighbours
// are in the mask and none is NaN. nil images are skipped. Gives NaN
// with fewer than minLaplacianPixels pixels.
func NoiseFromLaplacian(rows, cols int, images [][]float32, masks [][]bool) NoiseEstimate {
	if len(masks) != len(images) {
		panic("adc: NoiseFromLaplacian: one mask per image")
	}
	var resp []float32
	for k, img := range images {
		m := masks[k]
		if img == nil || m == nil {
			continue
		}
		sameLen("NoiseFromLaplacian", rows*cols, img)
		if len(m) != rows*cols {
			panic("adc: NoiseFromLaplacian: mask length differs")
		}
		for r := 1; r < rows-1; r++ {
			for c := 1; c < cols-1; c++ {
				i := r*cols + c
				if !(m[i-cols-1] && m[i-cols] && m[i-cols+1] && m[i-1] && m[i] && m[i+1] && m[i+cols-1] && m[i+cols] && m[i+cols+1]) {
					continue
				}
				l := img[i-cols-1] - 2*img[i-cols] + img[i-cols+1] -
					2*img[i-1] + 4*img[i] - 2*img[i+1] +
					img[i+cols-1] - 2*img[i+cols] + img[i+cols+1]
				if l != l {
					continue
				}
				if l < 0 {
					l = -l
				}
				resp = append(resp, l)
			}
		}
	}
	if len(resp) < minLaplacianPixels {
		return NoiseEstimate{Sigma: math.NaN(), Method: NoiseLaplacian, Pixels: len(resp)}
	}
	n := len(resp)
	return NoiseEstimate{Sigma: float64(PercentileInPlace(resp, 50)) / laplacianMADFactor, Method: NoiseLaplacian, Pixels: n}
}

// minLaplacianPixels is the fewest tissue pixels NoiseFromLaplacian
// takes a median over: 100 give it within about 12% (the median's
// standard error, 1.25σ/√n for a normal sample, common practice, on a
// half-normal of spread comparable to its median).
const minLaplacianPixels = 100
