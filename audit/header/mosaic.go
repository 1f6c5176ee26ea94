package header

// This file splits a Siemens MOSAIC image into its slices. A mosaic
// holds NumberOfImagesInMosaic slices (CSA image header) as tiles of
// one image, row by row in a square grid of ceil(sqrt(n)) tiles per
// side, the last tiles blank (nibabel's dicom_mosaic.rst and
// MosaicWrapper.get_data; common practice). Its Image Position
// (Patient) is not that of any slice: it is the corner of a "slice" the
// size of the whole mosaic centred on the first slice (nibabel's
// dicom_mosaic.rst, after SPM; common practice).

import (
	"fmt"
	"math"
	"strings"
)

// maxMosaicImages caps NumberOfImagesInMosaic. A mosaic holds the slices
// of one volume; 2D EPI acquisitions have up to about 100-150 slices
// (common practice). 1024 leaves room and keeps a hostile count from
// making a Frame per tile.
const maxMosaicImages = 1024

// Mosaic is the tile layout of a mosaic image.
type Mosaic struct {
	Images             int // slices held: NumberOfImagesInMosaic
	Grid               int // tiles per row and per column: ceil(sqrt(Images))
	Rows, Columns      int // of the whole mosaic image
	TileRows, TileCols int // of one slice
}

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
	g := int(math.Sqrt(float64(n)))
	for g*g < n {
		g++
	}
	for g > 1 && (g-1)*(g-1) >= n {
		g--
	}
	return g
}

// NewMosaic checks that a rows x columns image can hold images slices
// as a square grid of equal tiles. Errors wrap ErrMosaic.
func NewMosaic(rows, columns, images int) (Mosaic, error) {
	if images < 1 || images > maxMosaicImages {
		return Mosaic{}, mosaicErrorf("%d images in the mosaic (want 1..%d)", images, maxMosaicImages)
	}
	g := MosaicGrid(images)
	if rows <= 0 || columns <= 0 || rows%g != 0 || columns%g != 0 {
		return Mosaic{}, mosaicErrorf("a %dx%d image is no grid of %dx%d equal tiles for %d images", rows, columns, g, g, images)
	}
	return Mosaic{Images: images, Grid: g, Rows: rows, Columns: columns, TileRows: rows / g, TileCols: columns / g}, nil
}

func mosaicErrorf(format string, args ...any) error {
	return fmt.Errorf("%w: %s", ErrMosaic, fmt.Sprintf(format, args...))
}

// Tile copies slice k (0-based, in the order of the mosaic: tile rows
// top to bottom, tiles left to right in each) out of the mosaic's
// pixels, row-major, Rows*Columns long. It returns nil when k is out of
// range or pixels is not the mosaic's size.
func (m Mosaic) Tile(pixels []float32, k int) []float32 {
	if k < 0 || k >= m.Images || len(pixels) != m.Rows*m.Columns {
		return nil
	}
	r0, c0 := (k/m.Grid)*m.TileRows, (k%m.Grid)*m.TileCols
	out := make([]float32, m.TileRows*m.TileCols)
	for r := range m.TileRows {
		copy(out[r*m.TileCols:(r+1)*m.TileCols], pixels[(r0+r)*m.Columns+c0:])
	}
	return out
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

// Positions returns the Image Position (Patient) of each slice of the
// mosaic, from the mosaic's own position, orientation and Pixel Spacing
// (row spacing, column spacing), the slice normal (SliceNormal) and the
// distance between slices (Spacing Between Slices, else Slice
// Thickness, as nibabel's voxel_sizes does).
//
// The first slice's corner is the mosaic's corner moved by half the
// difference between mosaic and tile size: (Rows-TileRows)/2 rows along
// the column direction cosine times the row spacing, and
// (Columns-TileCols)/2 columns along the row direction cosine times the
// column spacing (nibabel's MosaicWrapper.image_position and
// dicom_mosaic.rst; common practice). Slice k is the first moved k
// times the slice spacing along the normal.
func (m Mosaic) Positions(position [3]float64, orientation [6]float64, pixelSpacing [2]float64, normal [3]float64, sliceSpacing float64) [][3]float64 {
	dr := float64(m.Rows-m.TileRows) / 2 * pixelSpacing[0]
	dc := float64(m.Columns-m.TileCols) / 2 * pixelSpacing[1]
	var p0 [3]float64
	for i := range 3 {
		p0[i] = position[i] + orientation[3+i]*dr + orientation[i]*dc
	}
	out := make([][3]float64, m.Images)
	for k := range out {
		for i := range 3 {
			out[k][i] = p0[i] + float64(k)*sliceSpacing*normal[i]
		}
	}
	return out
}
