package adc

import "fmt"

// Volume3 is a stack of equally sized slices stored in one slice,
// row-major within a slice: the voxel (slice z, row r, column c) is
// Data[(z*Rows+r)*Cols+c].
type Volume3 struct {
	Rows, Cols, Slices int
	Data               []float32
}

// NewVolume3 returns a zeroed volume of the given size.
func NewVolume3(rows, cols, slices int) *Volume3 {
	return &Volume3{Rows: rows, Cols: cols, Slices: slices, Data: make([]float32, rows*cols*slices)}
}

// SliceLen is the number of voxels in one slice.
func (v Volume3) SliceLen() int { return v.Rows * v.Cols }

// Slice returns slice z as a sub-slice of Data (no copy).
func (v Volume3) Slice(z int) []float32 {
	n := v.Rows * v.Cols
	return v.Data[z*n : (z+1)*n : (z+1)*n]
}

// check panics unless Data holds exactly Rows×Cols×Slices voxels.
func (v Volume3) check() {
	if v.Rows < 0 || v.Cols < 0 || v.Slices < 0 || len(v.Data) != v.Rows*v.Cols*v.Slices {
		panic(fmt.Sprintf("adc: volume %d×%d×%d holds %d voxels", v.Rows, v.Cols, v.Slices, len(v.Data)))
	}
}

// sameLen panics unless every slice has length n.
func sameLen(op string, n int, s ...[]float32) {
	for _, x := range s {
		if len(x) != n {
			panic(fmt.Sprintf("adc: %s: slice lengths differ (%d and %d)", op, n, len(x)))
		}
	}
}
