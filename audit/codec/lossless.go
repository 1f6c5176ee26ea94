package codec

// losslessScan decodes a lossless scan (T.81 Annex H) with predictor
// (selection value) pred and point transform pt into the planes of its
// components, which all have sampling factors 1 (frameHeader checks it),
// so that an MCU is one sample of each component (H.1.1, H.2).
func (d *jpegDecoder) losslessScan(br *bitReader, sc []scanComponent, pred, pt int) error {
	w, h := d.width, d.height
	// H.1.2.1: the first sample of the first line, and of the first line
	// after each restart, is predicted by 2^(P-Pt-1).
	initial := int32(1) << (d.precision - pt - 1)
	mcus, rst := 0, 0
	firstLine := true // the current line is the first of the image or of a restart interval
	restartCol := 0   // where the current restart interval started in the first line
	for y := range h {
		for x := range w {
			if d.restart > 0 && mcus > 0 && mcus%d.restart == 0 {
				if err := restartAt(br, rst%8); err != nil {
					return err
				}
				rst++
				firstLine, restartCol = true, x
			}
			mcus++
			for i := range sc {
				c := sc[i].c
				row := c.plane[y*w : (y+1)*w]
				var px int32
				switch {
				case firstLine && x == restartCol:
					px = initial
				case firstLine:
					px = row[x-1] // H.1.2.1: 1-D prediction by Ra on the first line
				case x == 0:
					px = c.plane[(y-1)*w] // Rb for the first sample of a line
				default:
					ra, rb, rc := row[x-1], c.plane[(y-1)*w+x], c.plane[(y-1)*w+x-1]
					switch pred { // T.81 Table H.1
					case 1:
						px = ra
					case 2:
						px = rb
					case 3:
						px = rc
					case 4:
						px = ra + rb - rc
					case 5:
						px = ra + (rb-rc)>>1
					case 6:
						px = rb + (ra-rc)>>1
					case 7:
						px = (ra + rb) >> 1
					}
				}
				t, err := sc[i].dc.decode(br)
				if err != nil {
					return err
				}
				var diff int32
				switch {
				case t == 16:
					diff = 32768 // H.1.2.2: SSSS 16 has no extra bits
				case t > 16:
					return corruptf("lossless difference category %d", t)
				default:
					diff = extend(br.bits(uint(t)), uint(t))
				}
				row[x] = (px + diff) & 0xFFFF // H.1.2.1: modulo 2^16
			}
		}
		// The next line predicts normally; a restart in mid-line kept the
		// rest of its line 1-D predicted, as above.
		firstLine, restartCol = false, 0
	}
	return nil
}
