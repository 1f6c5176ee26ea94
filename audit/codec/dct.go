package codec

// dctScan decodes a sequential DCT scan (T.81 Annex F, Huffman coded)
// into the planes of its components, block by block.
func (d *jpegDecoder) dctScan(br *bitReader, sc []scanComponent) error {
	for i := range sc {
		if !d.qdefined[sc[i].c.tq] {
			return corruptf("component %d uses undefined quantization table %d", sc[i].c.id, sc[i].c.tq)
		}
	}
	var mcusx, mcusy int
	if len(sc) == 1 {
		// A non-interleaved scan codes the component's own blocks, not
		// the MCU-padded grid (T.81 A.2.2).
		c := sc[0].c
		mcusx, mcusy = (c.width+7)/8, (c.height+7)/8
	} else {
		mcusx = (d.width + 8*d.hmax - 1) / (8 * d.hmax)
		mcusy = (d.height + 8*d.vmax - 1) / (8 * d.vmax)
	}
	var coef [64]int32
	rl := newRangeLimit(d.precision)
	mcus, rst := 0, 0
	for my := range mcusy {
		for mx := range mcusx {
			if d.restart > 0 && mcus > 0 && mcus%d.restart == 0 {
				if err := restartAt(br, rst%8); err != nil {
					return err
				}
				rst++
				for i := range sc {
					sc[i].pred = 0 // F.2.1.3.1: DC prediction restarts at 0
				}
			}
			mcus++
			for i := range sc {
				s := &sc[i]
				c := s.c
				bh, bv := c.h, c.v
				if len(sc) == 1 {
					bh, bv = 1, 1
				}
				for by := range bv {
					for bx := range bh {
						if err := d.block(br, s, &coef); err != nil {
							return err
						}
						x0 := (mx*bh + bx) * 8
						y0 := (my*bv + by) * 8
						idctISlow(&coef, &d.quant[c.tq], c.plane[y0*c.stride+x0:], c.stride, d.precision, rl)
					}
				}
			}
		}
	}
	return nil
}

// block decodes the 64 quantized coefficients of one block (T.81
// F.2.2.1, F.2.2.2) into coef, natural order. Coefficients are kept to
// 16 bits, as the IJG library's JCOEF is.
func (d *jpegDecoder) block(br *bitReader, s *scanComponent, coef *[64]int32) error {
	*coef = [64]int32{}
	t, err := s.dc.decode(br)
	if err != nil {
		return err
	}
	if t > 16 {
		return corruptf("DC difference category %d", t)
	}
	s.pred += extend(br.bits(uint(t)), uint(t))
	coef[0] = int32(int16(s.pred))
	for k := 1; k < 64; {
		rs, err := s.ac.decode(br)
		if err != nil {
			return err
		}
		r, sz := int(rs>>4), uint(rs&15)
		if sz == 0 {
			if r != 15 {
				break // EOB
			}
			k += 16 // ZRL
			continue
		}
		k += r
		if k > 63 {
			return corruptf("AC coefficient index past 63")
		}
		coef[zigzag[k]] = int32(int16(extend(br.bits(sz), sz)))
		k++
	}
	return nil
}
