package codec

import "encoding/binary"

// emit writes the decoded components into out, pixel by pixel. DCT
// components that are subsampled are upsampled first, and YCbCr is
// turned into RGB where the DICOM header says YBR_FULL or YBR_FULL_422
// (PS3.3 C.7.6.3.1.2), in both cases as the IJG library does by default
// (jdsample.c "fancy" upsampling, jdcolor.c), which is what DCMTK's
// dcmdjpeg gives with its default +cp.
func (d *jpegDecoder) emit(out []byte) error {
	w, h := d.width, d.height
	full := make([][]int32, len(d.comps))
	strides := make([]int, len(d.comps))
	for i := range d.comps {
		c := &d.comps[i]
		if d.sof == markerSOF3 || (c.h == d.hmax && c.v == d.vmax) {
			full[i], strides[i] = c.plane, c.stride
			continue
		}
		strides[i] = w
		p, err := upsample(c, d.hmax, d.vmax, w, h)
		if err != nil {
			return err
		}
		full[i] = p
	}
	maxv := int32(1)<<d.precision - 1
	if len(d.comps) == 3 && d.sof != markerSOF3 && (d.img.Photometric == "YBR_FULL" || d.img.Photometric == "YBR_FULL_422") {
		yccToRGB(full, strides, w, h, d.precision)
	}
	nc := len(d.comps)
	two := d.img.BitsAllocated == 16
	for i := range nc {
		s := strides[i]
		p := full[i]
		for y := range h {
			row := p[y*s : y*s+w]
			o := (y*w*nc + i)
			for _, v := range row {
				if v < 0 || v > maxv {
					v = min(max(v, 0), maxv)
				}
				if two {
					binary.LittleEndian.PutUint16(out[2*o:], uint16(v))
				} else {
					out[o] = byte(v)
				}
				o += nc
			}
		}
	}
	return nil
}

// upsample brings a subsampled DCT component to full size w x h, as
// jdsample.c chooses: fancy (triangle) filtering for 2:1 horizontal and
// 2:1 both ways, replication for other integral factors.
func upsample(c *jpegComponent, hmax, vmax, w, h int) ([]int32, error) {
	if hmax%c.h != 0 || vmax%c.v != 0 {
		return nil, unsupportedf("JPEG sampling factors %dx%d within %dx%d", c.h, c.v, hmax, vmax)
	}
	fx, fy := hmax/c.h, vmax/c.v
	cw, ch := c.width, c.height
	ow := cw * fx // may be a sample wider than w
	outp := make([]int32, ow*ch*fy)
	in := func(x, y int) int32 { return c.plane[y*c.stride+x] }
	switch {
	case fx == 2 && fy == 1 && cw > 2: // h2v1_fancy_upsample
		for y := range ch {
			o := outp[y*ow:]
			v := in(0, y)
			o[0] = v
			o[1] = (v*3 + in(1, y) + 2) >> 2
			for x := 1; x < cw-1; x++ {
				v := in(x, y) * 3
				o[2*x] = (v + in(x-1, y) + 1) >> 2
				o[2*x+1] = (v + in(x+1, y) + 2) >> 2
			}
			v = in(cw-1, y)
			o[2*cw-2] = (v*3 + in(cw-2, y) + 1) >> 2
			o[2*cw-1] = v
		}
	case fx == 2 && fy == 2 && cw > 2: // h2v2_fancy_upsample
		for y := range ch {
			for half := range 2 {
				y1 := y - 1
				if half == 1 {
					y1 = y + 1
				}
				y1 = min(max(y1, 0), ch-1) // context rows beyond the edge repeat it (jdmainct.c)
				col := func(x int) int32 { return in(x, y)*3 + in(x, y1) }
				o := outp[(2*y+half)*ow:]
				this, next := col(0), col(1)
				o[0] = (this*4 + 8) >> 4
				o[1] = (this*3 + next + 7) >> 4
				last := this
				this = next
				for x := 1; x < cw-1; x++ {
					next = col(x + 1)
					o[2*x] = (this*3 + last + 8) >> 4
					o[2*x+1] = (this*3 + next + 7) >> 4
					last, this = this, next
				}
				o[2*cw-2] = (this*3 + last + 8) >> 4
				o[2*cw-1] = (this*4 + 7) >> 4
			}
		}
	default: // int_upsample / h2v1_upsample / h2v2_upsample: replication
		for y := range ch * fy {
			for x := range ow {
				outp[y*ow+x] = in(x/fx, y/fy)
			}
		}
	}
	if ow == w && ch*fy >= h {
		return outp[:w*h], nil
	}
	res := make([]int32, w*h)
	for y := range h {
		copy(res[y*w:(y+1)*w], outp[y*ow:y*ow+w])
	}
	return res, nil
}

// yccToRGB converts in place with jdcolor.c's ycc_rgb_convert tables
// (16-bit fixed point, JFIF / ITU T.871 coefficients).
func yccToRGB(p [][]int32, strides []int, w, h, precision int) {
	const scale = 16
	const half = int64(1) << (scale - 1)
	fix := func(x float64) int64 { return int64(x*(1<<scale) + 0.5) }
	maxv := int64(1)<<precision - 1
	center := (maxv + 1) / 2
	clamp := func(v int64) int32 { return int32(min(max(v, 0), maxv)) }
	for y := range h {
		for x := range w {
			iy, icb, icr := y*strides[0]+x, y*strides[1]+x, y*strides[2]+x
			yy := int64(p[0][iy])
			cb := int64(p[1][icb]) - center
			cr := int64(p[2][icr]) - center
			crr := (fix(1.40200)*cr + half) >> scale
			cbb := (fix(1.77200)*cb + half) >> scale
			g := (-fix(0.34414)*cb + half + -fix(0.71414)*cr) >> scale
			p[0][iy], p[1][icb], p[2][icr] = clamp(yy+crr), clamp(yy+g), clamp(yy+cbb)
		}
	}
}
