package header

// This file lays out a Siemens MOSAIC image's slices. A mosaic holds
// NumberOfImagesInMosaic slices (CSA image header) as tiles of one
// image, row by row in a square grid of ceil(sqrt(n)) tiles per side,
// the last tiles blank (nibabel's dicom_mosaic.rst and
// MosaicWrapper.get_data; common practice). Its Image Position (Patient)
// is not that of any slice: it is the corner of a "slice" the size of
// the whole mosaic centred on the first slice (nibabel's
// dicom_mosaic.rst, after SPM; common practice). Extraction cuts the
// tiles (splitMosaics in makers.go).

import (
	"fmt"
	"math"
	"strings"

	"dwiaudit/audit/dwi"
)

// maxMosaicImages caps NumberOfImagesInMosaic. A mosaic holds the slices
// of one volume; 2D EPI acquisitions have up to about 100-150 slices
// (common practice). 1024 leaves room and keeps a hostile count from
// making a Frame per tile.
const maxMosaicImages = 1024

// IsMosaic says whether Image Type (0008,0008) marks a mosaic: one of
// its values is MOSAIC (common practice; nibabel tells a mosaic by the
// CSA header instead, csareader.is_mosaic).
func IsMosaic(imageType []string) bool {
	for _, v := range imageType {
		if strings.EqualFold(strings.TrimSpace(v), "MOSAIC") {
			return true
		}
	}
	return false
}

// MosaicGrid returns the tiles per side of a mosaic of n slices:
// ceil(sqrt(n)).
func MosaicGrid(n int) int {
	if n < 1 {
		return 0
	}
	g := int(math.Sqrt(float64(n)))
	for g*g < n {
		g++
	}
	for g > 1 && (g-1)*(g-1) >= n {
		g--
	}
	return g
}

func mosaicErrorf(format string, args ...any) error {
	return fmt.Errorf("%w: %s", ErrMosaic, fmt.Sprintf(format, args...))
}

// SliceNormal is the normal of the slices: the cross product of the row
// and column direction cosines of Image Orientation (Patient) (PS3.3
// C.7.6.2.1.1), turned to point the way csaNormal (the CSA
// SliceNormalVector) points when it is given (ok). Siemens orders a
// mosaic's slices along SliceNormalVector, which may be the opposite of
// the cross product (nibabel's SiemensWrapper.slice_normal keeps the
// cross product and takes the sign from the CSA vector; its
// dicom_mosaic.rst says the CSA vector may be flipped).
func SliceNormal(orientation [6]float64, csaNormal [3]float64, ok bool) [3]float64 {
	r := [3]float64{orientation[0], orientation[1], orientation[2]}
	c := [3]float64{orientation[3], orientation[4], orientation[5]}
	n := [3]float64{r[1]*c[2] - r[2]*c[1], r[2]*c[0] - r[0]*c[2], r[0]*c[1] - r[1]*c[0]}
	if ok && n[0]*csaNormal[0]+n[1]*csaNormal[1]+n[2]*csaNormal[2] < 0 {
		n = [3]float64{-n[0], -n[1], -n[2]}
	}
	return n
}

// MosaicLayout lays out the images slices of a mosaic image of geometry
// g: the grid, the tile size and each slice's Image Position (Patient).
// csaNormal (ok when given) is the CSA SliceNormalVector, which decides
// the slice order (SliceNormal). The distance between slices is Spacing
// Between Slices, else Slice Thickness (as nibabel's voxel_sizes reads
// it). Errors wrap ErrMosaic: a count out of range, a grid that does not
// divide the image, no geometry or no slice distance.
//
// The first slice's corner is the mosaic's corner moved by half the
// difference between mosaic and tile size: (Rows-TileRows)/2 rows along
// the column direction cosine times the row spacing, and
// (Columns-TileColumns)/2 columns along the row direction cosine times
// the column spacing (nibabel's MosaicWrapper.image_position and
// dicom_mosaic.rst; common practice). Slice k is the first moved k
// times the slice distance along the normal.
func MosaicLayout(g dwi.Geometry, images int, csaNormal [3]float64, ok bool) (Mosaic, error) {
	if images < 1 || images > maxMosaicImages {
		return Mosaic{}, mosaicErrorf("%d images in the mosaic (want 1..%d)", images, maxMosaicImages)
	}
	n := MosaicGrid(images)
	if g.Rows <= 0 || g.Columns <= 0 || g.Rows%n != 0 || g.Columns%n != 0 {
		return Mosaic{}, mosaicErrorf("a %dx%d image is no grid of %dx%d equal tiles for %d images", g.Rows, g.Columns, n, n, images)
	}
	if !g.Known {
		return Mosaic{}, mosaicErrorf("no Image Position and Orientation (Patient) to place the slices with")
	}
	spacing := g.SpacingBetweenSlices
	if spacing <= 0 {
		spacing = g.SliceThickness
	}
	if !(spacing > 0) || math.IsInf(spacing, 0) {
		return Mosaic{}, mosaicErrorf("neither Spacing Between Slices nor Slice Thickness to place the slices with")
	}
	m := Mosaic{Slices: images, TilesAcross: n, TileRows: g.Rows / n, TileColumns: g.Columns / n}
	normal := SliceNormal(g.Orientation, csaNormal, ok)
	o := g.Orientation
	dr := float64(g.Rows-m.TileRows) / 2 * g.PixelSpacing[0]
	dc := float64(g.Columns-m.TileColumns) / 2 * g.PixelSpacing[1]
	var p0 [3]float64
	for i := range 3 {
		p0[i] = g.Position[i] + o[3+i]*dr + o[i]*dc
	}
	m.Positions = make([][3]float64, images)
	for k := range m.Positions {
		for i := range 3 {
			m.Positions[k][i] = p0[i] + float64(k)*spacing*normal[i]
		}
	}
	return m, nil
}
