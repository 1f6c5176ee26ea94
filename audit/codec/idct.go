package codec

// The inverse DCT of the IJG library's jidctint.c ("slow but accurate"
// integer method, the library's default and the one DCMTK's decoders
// run), reproduced to the bit so that lossy frames decode to the samples
// DCMTK gives. Constants are FIX(x) = round(x * 2^13).
const (
	idctConstBits = 13
	fix0298631336 = 2446
	fix0390180644 = 3196
	fix0541196100 = 4433
	fix0765366865 = 6270
	fix0899976223 = 7373
	fix1175875602 = 9633
	fix1501321110 = 12299
	fix1847759065 = 15137
	fix1961570560 = 16069
	fix2053119869 = 16819
	fix2562915447 = 20995
	fix3072711026 = 25172
)

// rangeLimit clamps an IDCT output, which is centred on zero, to the
// sample range, wrapping as the library's table does (jdmaster.c
// prepare_range_limit_table: the index is masked to 4 x (MAXJSAMPLE+1)).
type rangeLimit struct {
	center, max, mask, half int64
}

func newRangeLimit(precision int) rangeLimit {
	maxv := int64(1)<<precision - 1
	return rangeLimit{center: (maxv + 1) / 2, max: maxv, mask: 4*(maxv+1) - 1, half: 2 * (maxv + 1)}
}

func (r rangeLimit) limit(x int64) int32 {
	t := x & r.mask
	if t >= r.half {
		t -= 2 * r.half
	}
	t += r.center
	return int32(min(max(t, 0), r.max))
}

func descale(x int64, n uint) int64 { return (x + 1<<(n-1)) >> n }

// idctISlow dequantizes coef with q and writes the 8x8 inverse DCT into
// out (row stride stride). PASS1_BITS is 2 for 8-bit and 1 for 12-bit
// samples, as in jidctint.c.
func idctISlow(coef, q *[64]int32, out []int32, stride, precision int, rl rangeLimit) {
	pass1 := uint(2)
	if precision > 8 {
		pass1 = 1
	}
	var ws [64]int64
	// Pass 1: columns from the input into the work array.
	for col := range 8 {
		in := func(row int) int64 { return int64(coef[row*8+col]) * int64(q[row*8+col]) }
		if coef[8+col] == 0 && coef[16+col] == 0 && coef[24+col] == 0 && coef[32+col] == 0 &&
			coef[40+col] == 0 && coef[48+col] == 0 && coef[56+col] == 0 {
			dc := int64(int32(in(0) << pass1))
			for row := range 8 {
				ws[row*8+col] = dc
			}
			continue
		}
		z2, z3 := in(2), in(6)
		z1 := (z2 + z3) * fix0541196100
		tmp2 := z1 + z3*(-fix1847759065)
		tmp3 := z1 + z2*fix0765366865
		z2, z3 = in(0), in(4)
		tmp0 := (z2 + z3) << idctConstBits
		tmp1 := (z2 - z3) << idctConstBits
		tmp10, tmp13 := tmp0+tmp3, tmp0-tmp3
		tmp11, tmp12 := tmp1+tmp2, tmp1-tmp2

		tmp0, tmp1, tmp2, tmp3 = in(7), in(5), in(3), in(1)
		o0, o1, o2, o3 := oddPart(tmp0, tmp1, tmp2, tmp3)
		sh := idctConstBits - pass1
		ws[0*8+col] = int64(int32(descale(tmp10+o3, sh)))
		ws[7*8+col] = int64(int32(descale(tmp10-o3, sh)))
		ws[1*8+col] = int64(int32(descale(tmp11+o2, sh)))
		ws[6*8+col] = int64(int32(descale(tmp11-o2, sh)))
		ws[2*8+col] = int64(int32(descale(tmp12+o1, sh)))
		ws[5*8+col] = int64(int32(descale(tmp12-o1, sh)))
		ws[3*8+col] = int64(int32(descale(tmp13+o0, sh)))
		ws[4*8+col] = int64(int32(descale(tmp13-o0, sh)))
	}
	// Pass 2: rows from the work array into the output, descaled by 8
	// and by the pass-1 scaling.
	for row := range 8 {
		w := ws[row*8 : row*8+8]
		o := out[row*stride : row*stride+8]
		if w[1] == 0 && w[2] == 0 && w[3] == 0 && w[4] == 0 && w[5] == 0 && w[6] == 0 && w[7] == 0 {
			v := rl.limit(descale(w[0], pass1+3))
			for i := range o {
				o[i] = v
			}
			continue
		}
		z2, z3 := w[2], w[6]
		z1 := (z2 + z3) * fix0541196100
		tmp2 := z1 + z3*(-fix1847759065)
		tmp3 := z1 + z2*fix0765366865
		tmp0 := (w[0] + w[4]) << idctConstBits
		tmp1 := (w[0] - w[4]) << idctConstBits
		tmp10, tmp13 := tmp0+tmp3, tmp0-tmp3
		tmp11, tmp12 := tmp1+tmp2, tmp1-tmp2
		o0, o1, o2, o3 := oddPart(w[7], w[5], w[3], w[1])
		sh := idctConstBits + pass1 + 3
		o[0] = rl.limit(descale(tmp10+o3, sh))
		o[7] = rl.limit(descale(tmp10-o3, sh))
		o[1] = rl.limit(descale(tmp11+o2, sh))
		o[6] = rl.limit(descale(tmp11-o2, sh))
		o[2] = rl.limit(descale(tmp12+o1, sh))
		o[5] = rl.limit(descale(tmp12-o1, sh))
		o[3] = rl.limit(descale(tmp13+o0, sh))
		o[4] = rl.limit(descale(tmp13-o0, sh))
	}
}

// oddPart is the odd half of jidctint.c's butterfly: inputs y7, y5, y3,
// y1, outputs tmp0..tmp3 of its final stage.
func oddPart(tmp0, tmp1, tmp2, tmp3 int64) (int64, int64, int64, int64) {
	z1 := tmp0 + tmp3
	z2 := tmp1 + tmp2
	z3 := tmp0 + tmp2
	z4 := tmp1 + tmp3
	z5 := (z3 + z4) * fix1175875602
	tmp0 *= fix0298631336
	tmp1 *= fix2053119869
	tmp2 *= fix3072711026
	tmp3 *= fix1501321110
	z1 *= -fix0899976223
	z2 *= -fix2562915447
	z3 *= -fix1961570560
	z4 *= -fix0390180644
	z3 += z5
	z4 += z5
	tmp0 += z1 + z3
	tmp1 += z2 + z4
	tmp2 += z2 + z3
	tmp3 += z1 + z4
	return tmp0, tmp1, tmp2, tmp3
}
