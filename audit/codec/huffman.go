package codec

// bitReader reads the entropy-coded segment of a JPEG scan most
// significant bit first, removing the stuffed zero byte after each 0xFF
// (T.81 B.1.1.5, F.1.2.3). It stops at a marker; reading past it gives
// zero bits, as the IJG library does, but counts them, so that a scan
// that needs more bits than it holds is reported corrupt.
type bitReader struct {
	data   []byte
	pos    int    // next byte of data to load
	acc    uint64 // loaded bits, left-aligned
	n      uint   // bits in acc
	real   uint   // of those, bits that came from data (the rest are past a marker)
	marker bool   // a marker stopped loading at pos
	over   bool   // bits past the end were consumed
}

func (b *bitReader) fill() {
	for b.n <= 56 {
		var c byte
		fromData := false
		if !b.marker && b.pos < len(b.data) {
			c = b.data[b.pos]
			if c == 0xFF {
				if b.pos+1 < len(b.data) && b.data[b.pos+1] == 0 {
					b.pos += 2
					fromData = true
				} else {
					b.marker = true
					c = 0
				}
			} else {
				b.pos++
				fromData = true
			}
		}
		b.acc |= uint64(c) << (56 - b.n)
		b.n += 8
		if fromData {
			b.real += 8
		}
	}
}

// consume drops k bits (k <= b.n).
func (b *bitReader) consume(k uint) {
	b.acc <<= k
	b.n -= k
	if k > b.real {
		b.over = true
		b.real = 0
	} else {
		b.real -= k
	}
}

// bits reads k bits, 0 <= k <= 16.
func (b *bitReader) bits(k uint) int32 {
	if k == 0 {
		return 0
	}
	if b.n < k {
		b.fill()
	}
	v := int32(b.acc >> (64 - k))
	b.consume(k)
	return v
}

// reset drops the buffered bits and continues at byte pos (after a
// restart marker, T.81 F.2.2.5: decoding restarts byte-aligned).
func (b *bitReader) reset(pos int) {
	b.pos, b.acc, b.n, b.real, b.marker = pos, 0, 0, 0, false
}

// extend turns the s low bits v into a signed difference (T.81 F.2.2.1,
// Figure F.12).
func extend(v int32, s uint) int32 {
	if s == 0 {
		return 0
	}
	if v < 1<<(s-1) {
		v += -1<<s + 1
	}
	return v
}

// lookBits is the code length a Huffman table resolves in one lookup;
// longer codes fall back to the per-length search of T.81 F.2.2.3.
const lookBits = 9

// huffTable is one decoding table built from a DHT segment (T.81 C,
// Annex F.2.2.3).
type huffTable struct {
	look    [1 << lookBits]uint16 // length<<8 | value; 0 when the code is longer
	maxcode [17]int32             // largest code of each length, -1 when none
	valptr  [17]int32             // index in vals of the codes of each length, minus the smallest code
	vals    []byte
	defined bool
}

// build makes the table from the 16 code-length counts and the values
// (T.81 C.2, Figures C.1 to C.3).
func (h *huffTable) build(counts [16]int, vals []byte) error {
	*h = huffTable{vals: vals, defined: true}
	code, k := int32(0), 0
	for l := 1; l <= 16; l++ {
		n := counts[l-1]
		h.valptr[l] = int32(k) - code
		for range n {
			if code >= 1<<l {
				return corruptf("Huffman table has more codes of length %d than fit", l)
			}
			if l <= lookBits {
				shift := lookBits - l
				for j := int32(0); j < 1<<shift; j++ {
					h.look[code<<shift|j] = uint16(l)<<8 | uint16(vals[k])
				}
			}
			code++
			k++
		}
		h.maxcode[l] = code - 1
		if n == 0 {
			h.maxcode[l] = -1
		}
		code <<= 1
	}
	return nil
}

// decode reads one Huffman-coded value.
func (h *huffTable) decode(b *bitReader) (byte, error) {
	if b.n < 16 {
		b.fill()
	}
	if e := h.look[b.acc>>(64-lookBits)]; e != 0 {
		b.consume(uint(e >> 8))
		return byte(e), nil
	}
	for l := lookBits + 1; l <= 16; l++ {
		code := int32(b.acc >> (64 - l))
		if code <= h.maxcode[l] {
			b.consume(uint(l))
			i := h.valptr[l] + code
			if i < 0 || int(i) >= len(h.vals) {
				return 0, corruptf("Huffman code outside its table")
			}
			return h.vals[i], nil
		}
	}
	return 0, corruptf("bad Huffman code")
}
