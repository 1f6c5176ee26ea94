package codec

import (
	"encoding/binary"
	"math/bits"
)

// JPEG-LS markers (ITU T.87 Table C.1).
const (
	markerSOF55 = 0xF7 // JPEG-LS frame
	markerLSE   = 0xF8 // JPEG-LS preset parameters
)

// Default threshold bases and limits of T.87 (C.2.4.1.1, A.2.1, A.6.2).
const (
	lsBasicT1    = 3
	lsBasicT2    = 7
	lsBasicT3    = 21
	lsResetDflt  = 64
	lsContexts   = 365 // regular-mode contexts (A.3.4)
	lsMinC       = -128
	lsMaxC       = 127
	lsMaxRunIdx  = 31
	lsMaxLimit   = 64 // LIMIT for 16-bit samples, 2 * (16 + 16)
	lsMaxErrval  = 65535
	lsInterleave = 2 // ILV of sample interleaving (T.87 C.2.3)
)

// lsJ is the run-length order table J (T.87 A.7.1.1).
var lsJ = [32]int{0, 0, 0, 0, 1, 1, 1, 1, 2, 2, 2, 2, 3, 3, 3, 3, 4, 4, 5, 5, 6, 6, 7, 7, 8, 9, 10, 11, 12, 13, 14, 15}

// lsContext holds the variables of one regular-mode context (A.2.2).
type lsContext struct{ a, b, c, n int32 }

// lsRunContext holds the variables of one run-interruption context
// (A.7.2).
type lsRunContext struct{ a, n, nn, ritype int32 }

// lsDecoder decodes one JPEG-LS frame.
type lsDecoder struct {
	data      []byte
	pos       int
	img       Image
	precision int
	width     int
	height    int
	ids       []byte
	planes    [][]int32
	done      []bool
	// preset parameters from an LSE segment; 0 means default (C.2.4.1.1)
	maxval, t1, t2, t3, reset int
}

// decodeJPEGLS decodes one JPEG-LS frame (T.87) into out.
func decodeJPEGLS(out []byte, img Image, data []byte) error {
	d := &lsDecoder{data: data, img: img}
	if len(data) < 2 || data[0] != 0xFF || data[1] != markerSOI {
		return corruptf("JPEG-LS frame does not start with an SOI marker")
	}
	d.pos = 2
	jd := &jpegDecoder{data: data} // for its marker-segment helpers
	for {
		m, err := d.nextMarker()
		jd.pos = d.pos
		if err != nil {
			if d.complete() {
				return d.emit(out)
			}
			return err
		}
		if m == markerEOI {
			if !d.complete() {
				return corruptf("JPEG-LS EOI before every component was coded")
			}
			return d.emit(out)
		}
		body, err := jd.segment()
		d.pos = jd.pos
		if err != nil {
			return err
		}
		switch {
		case m == markerSOF55:
			if err := d.frameHeader(body); err != nil {
				return err
			}
		case m == markerLSE:
			if err := d.preset(body); err != nil {
				return err
			}
		case m == markerDRI:
			if len(body) >= 2 && binary.BigEndian.Uint16(body) != 0 {
				return unsupportedf("JPEG-LS restart intervals")
			}
		case m == markerSOS:
			if d.planes == nil {
				return corruptf("JPEG-LS scan before the frame header")
			}
			if err := d.scan(body); err != nil {
				return err
			}
		case m >= 0xC0 && m <= 0xCF && m != markerDHT:
			return corruptf("JPEG frame marker 0x%02X in a JPEG-LS transfer syntax", m)
		}
	}
}

// nextMarker finds the next marker at or after d.pos: a 0xFF followed
// by a byte with its top bit set (T.87 C.1.1; fill 0xFF bytes skipped).
func (d *lsDecoder) nextMarker() (byte, error) {
	for p := d.pos; p+1 < len(d.data); p++ {
		if d.data[p] == 0xFF && d.data[p+1] >= 0x80 && d.data[p+1] != 0xFF {
			d.pos = p + 2
			return d.data[p+1], nil
		}
	}
	return 0, corruptf("JPEG-LS stream ends without an EOI marker")
}

func (d *lsDecoder) complete() bool {
	for _, ok := range d.done {
		if !ok {
			return false
		}
	}
	return len(d.done) > 0
}

// frameHeader reads SOF55 (T.87 C.2.2, T.81 B.2.2 layout).
func (d *lsDecoder) frameHeader(b []byte) error {
	if d.planes != nil {
		return corruptf("second JPEG-LS frame header")
	}
	if len(b) < 6 {
		return corruptf("JPEG-LS frame header of %d bytes", len(b))
	}
	d.precision = int(b[0])
	d.height = int(binary.BigEndian.Uint16(b[1:]))
	d.width = int(binary.BigEndian.Uint16(b[3:]))
	nc := int(b[5])
	if len(b) != 6+3*nc {
		return corruptf("JPEG-LS frame header of %d bytes for %d components", len(b), nc)
	}
	if d.precision < 2 || d.precision > 16 {
		return corruptf("JPEG-LS precision %d (T.87 C.2.2: 2 to 16)", d.precision)
	}
	if d.width != d.img.Columns || d.height != d.img.Rows {
		return corruptf("JPEG-LS frame of %d x %d in an image of %d columns x %d rows", d.width, d.height, d.img.Columns, d.img.Rows)
	}
	if nc != d.img.SamplesPerPixel {
		return corruptf("JPEG-LS frame of %d components in an image of %d samples per pixel", nc, d.img.SamplesPerPixel)
	}
	if d.precision > d.img.BitsAllocated {
		return corruptf("JPEG-LS precision %d exceeds Bits Allocated %d", d.precision, d.img.BitsAllocated)
	}
	d.ids = make([]byte, nc)
	d.planes = make([][]int32, nc)
	d.done = make([]bool, nc)
	for i := range nc {
		d.ids[i] = b[6+3*i]
		if b[7+3*i] != 0x11 {
			return unsupportedf("JPEG-LS component sampling 0x%02X (only 1x1)", b[7+3*i])
		}
		for j := range i {
			if d.ids[j] == d.ids[i] {
				return corruptf("JPEG-LS component identifier %d used twice", d.ids[i])
			}
		}
		d.planes[i] = make([]int32, d.width*d.height)
	}
	return nil
}

// preset reads an LSE segment (T.87 C.2.4.1).
func (d *lsDecoder) preset(b []byte) error {
	if len(b) < 1 {
		return corruptf("empty LSE segment")
	}
	if b[0] != 1 {
		return unsupportedf("JPEG-LS preset parameters of type %d (mapping tables, oversize images)", b[0])
	}
	if len(b) != 11 {
		return corruptf("LSE coding parameters of %d bytes", len(b))
	}
	v := func(i int) int { return int(binary.BigEndian.Uint16(b[1+2*i:])) }
	d.maxval, d.t1, d.t2, d.t3, d.reset = v(0), v(1), v(2), v(3), v(4)
	return nil
}

// lsParams are the coding parameters of one scan (T.87 A.2.1, C.2.4.1.1).
type lsParams struct {
	maxval, near, rng, qbpp, limit int32
	t1, t2, t3, reset              int32
}

func (d *lsDecoder) params(near int) (lsParams, error) {
	p := lsParams{maxval: int32(1)<<d.precision - 1, near: int32(near)}
	if d.maxval != 0 {
		if d.maxval >= 1<<d.precision {
			return p, corruptf("JPEG-LS MAXVAL %d for precision %d", d.maxval, d.precision)
		}
		p.maxval = int32(d.maxval)
	}
	if p.near > min(255, p.maxval/2) {
		return p, corruptf("JPEG-LS NEAR %d with MAXVAL %d", near, p.maxval)
	}
	p.rng = (p.maxval+2*p.near)/(2*p.near+1) + 1
	p.qbpp = int32(bits.Len32(uint32(p.rng - 1)))
	bpp := max(2, int32(bits.Len32(uint32(p.maxval))))
	p.limit = 2 * (bpp + max(8, bpp))
	// C.2.4.1.1.1: default thresholds.
	clamp := func(i, j int32) int32 {
		if i > p.maxval || i < j {
			return j
		}
		return i
	}
	var t1, t2, t3 int32
	if p.maxval >= 128 {
		f := (min(p.maxval, 4095) + 128) >> 8
		t1 = clamp(f*(lsBasicT1-2)+2+3*p.near, p.near+1)
		t2 = clamp(f*(lsBasicT2-3)+3+5*p.near, t1)
		t3 = clamp(f*(lsBasicT3-4)+4+7*p.near, t2)
	} else {
		f := 256 / (p.maxval + 1)
		t1 = clamp(max(2, lsBasicT1/f+3*p.near), p.near+1)
		t2 = clamp(max(3, lsBasicT2/f+5*p.near), t1)
		t3 = clamp(max(4, lsBasicT3/f+7*p.near), t2)
	}
	p.t1, p.t2, p.t3, p.reset = t1, t2, t3, lsResetDflt
	if d.t1 != 0 {
		p.t1 = int32(d.t1)
	}
	if d.t2 != 0 {
		p.t2 = int32(d.t2)
	}
	if d.t3 != 0 {
		p.t3 = int32(d.t3)
	}
	if d.reset != 0 {
		p.reset = int32(d.reset)
	}
	// C.2.4.1.1: the thresholds must be ordered within the range.
	if p.t1 < p.near+1 || p.t2 < p.t1 || p.t3 < p.t2 || p.t3 > p.maxval || p.reset < 3 || p.reset > max(255, p.maxval) {
		return p, corruptf("JPEG-LS thresholds %d/%d/%d and RESET %d for MAXVAL %d, NEAR %d", p.t1, p.t2, p.t3, p.reset, p.maxval, p.near)
	}
	return p, nil
}

// scan reads a JPEG-LS scan header (T.87 C.2.3) and decodes the scan.
func (d *lsDecoder) scan(b []byte) error {
	if len(b) < 1 {
		return corruptf("empty JPEG-LS scan header")
	}
	ns := int(b[0])
	if ns < 1 || ns > len(d.ids) || len(b) != 4+2*ns {
		return corruptf("JPEG-LS scan header of %d bytes for %d components", len(b), ns)
	}
	comps := make([]int, ns)
	for i := range comps {
		comps[i] = -1
		for j, id := range d.ids {
			if id == b[1+2*i] {
				comps[i] = j
			}
		}
		if comps[i] < 0 {
			return corruptf("JPEG-LS scan names component %d, not in the frame", b[1+2*i])
		}
		if d.done[comps[i]] {
			return corruptf("JPEG-LS component %d coded by a second scan", b[1+2*i])
		}
		if b[2+2*i] != 0 {
			return unsupportedf("JPEG-LS mapping tables")
		}
	}
	near, ilv, pt := int(b[1+2*ns]), int(b[2+2*ns]), b[3+2*ns]&15
	if pt != 0 {
		return unsupportedf("JPEG-LS point transform %d", pt)
	}
	if ilv > lsInterleave || (ns == 1) != (ilv == 0) {
		return corruptf("JPEG-LS interleave mode %d with %d components in the scan", ilv, ns)
	}
	p, err := d.params(near)
	if err != nil {
		return err
	}
	s := newLSScan(d, p, comps)
	br := &lsBits{data: d.data, pos: d.pos}
	if ilv == lsInterleave {
		err = s.decodeSamples(br)
	} else {
		err = s.decodeLines(br)
	}
	if err != nil {
		return err
	}
	if br.over {
		return corruptf("JPEG-LS scan needs more coded data than the stream holds")
	}
	for _, c := range comps {
		d.done[c] = true
	}
	d.pos = br.markerPos()
	return nil
}

func (d *lsDecoder) emit(out []byte) error {
	nc, w, h := len(d.planes), d.width, d.height
	two := d.img.BitsAllocated == 16
	for i, p := range d.planes {
		for j := range w * h {
			o := j*nc + i
			if two {
				binary.LittleEndian.PutUint16(out[2*o:], uint16(p[j]))
			} else {
				out[o] = byte(p[j])
			}
		}
	}
	return nil
}

// lsScan is the state of one scan: the contexts shared by its components
// (T.87 A.2.2), each component's run index and its two line buffers.
type lsScan struct {
	d        *lsDecoder
	p        lsParams
	comps    []int
	ctx      [lsContexts]lsContext
	run      [2]lsRunContext
	runIndex []int
	prev     [][]int32 // per component: width+2, [0] is the sample before the line, [w+1] after it
	cur      [][]int32
	qtab     []int8 // quantize of every gradient -maxval..maxval, at index gradient+maxval
}

func newLSScan(d *lsDecoder, p lsParams, comps []int) *lsScan {
	s := &lsScan{d: d, p: p, comps: comps, runIndex: make([]int, len(comps))}
	a := max(2, (p.rng+32)/64) // A.2.1
	for i := range s.ctx {
		s.ctx[i] = lsContext{a: a, n: 1}
	}
	s.run[0] = lsRunContext{a: a, n: 1, ritype: 0}
	s.run[1] = lsRunContext{a: a, n: 1, ritype: 1}
	s.qtab = make([]int8, 2*p.maxval+1)
	for g := -p.maxval; g <= p.maxval; g++ {
		s.qtab[g+p.maxval] = int8(s.quantize(g))
	}
	for range comps {
		s.prev = append(s.prev, make([]int32, d.width+2))
		s.cur = append(s.cur, make([]int32, d.width+2))
	}
	return s
}

// quantize maps a local gradient to -4..4 (A.3.3).
func (s *lsScan) quantize(g int32) int32 {
	p := &s.p
	switch {
	case g <= -p.t3:
		return -4
	case g <= -p.t2:
		return -3
	case g <= -p.t1:
		return -2
	case g < -p.near:
		return -1
	case g <= p.near:
		return 0
	case g < p.t1:
		return 1
	case g < p.t2:
		return 2
	case g < p.t3:
		return 3
	}
	return 4
}

// context is the context number of the gradients (A.3.4), from the
// table of quantize; samples lie in 0..maxval, so every gradient is in it.
func (s *lsScan) context(ra, rb, rc, rd int32) int32 {
	m := s.p.maxval
	return (int32(s.qtab[rd-rb+m])*9+int32(s.qtab[rb-rc+m]))*9 + int32(s.qtab[rc-ra+m])
}

// startLine sets the edge samples of a component's lines (A.2.1:
// Rd past the end is Rb; Ra and Rc at the start come from the line
// above).
func (s *lsScan) startLine(i int) {
	w := s.d.width
	s.prev[i][w+1] = s.prev[i][w]
	s.cur[i][0] = s.prev[i][1]
}

func (s *lsScan) endLine(i, y int) {
	copy(s.d.planes[s.comps[i]][y*s.d.width:], s.cur[i][1:s.d.width+1])
	s.prev[i], s.cur[i] = s.cur[i], s.prev[i]
}

// decodeLines decodes a scan of one component (ILV 0) or of several,
// line by line (ILV 1).
func (s *lsScan) decodeLines(br *lsBits) error {
	for y := range s.d.height {
		for i := range s.comps {
			s.startLine(i)
			if err := s.line(br, i); err != nil {
				return err
			}
			s.endLine(i, y)
		}
	}
	return nil
}

func (s *lsScan) line(br *lsBits, i int) error {
	w := int32(s.d.width)
	prev, cur := s.prev[i], s.cur[i]
	for x := int32(1); x <= w; {
		ra, rb, rc, rd := cur[x-1], prev[x], prev[x-1], prev[x+1]
		q := s.context(ra, rb, rc, rd)
		if q == 0 {
			n, err := s.runMode(br, i, x, w)
			if err != nil {
				return err
			}
			x += n
			continue
		}
		v, err := s.regular(br, q, ra, rb, rc)
		if err != nil {
			return err
		}
		cur[x] = v
		x++
	}
	return nil
}

// predict is the median edge detector (A.4.1).
func predict(ra, rb, rc int32) int32 {
	switch {
	case rc >= max(ra, rb):
		return min(ra, rb)
	case rc <= min(ra, rb):
		return max(ra, rb)
	}
	return ra + rb - rc
}

func (s *lsScan) clampSample(v int32) int32 { return min(max(v, 0), s.p.maxval) }

// reconstruct adds a dequantized error to a prediction, modulo the range
// (A.4.4, A.5.2 with the inverse of the modulo reduction).
func (s *lsScan) reconstruct(px, e int32) int32 {
	p := &s.p
	q := 2*p.near + 1
	v := px + e*q
	if v < -p.near {
		v += p.rng * q
	} else if v > p.maxval+p.near {
		v -= p.rng * q
	}
	return s.clampSample(v)
}

// regular decodes one sample in regular mode (A.4 to A.6).
func (s *lsScan) regular(br *lsBits, q, ra, rb, rc int32) (int32, error) {
	sign := int32(1)
	if q < 0 {
		sign, q = -1, -q
	}
	c := &s.ctx[q]
	px := s.clampSample(predict(ra, rb, rc) + sign*c.c)
	k := uint(0)
	for c.n<<k < c.a {
		k++
		if k > 16 {
			return 0, corruptf("JPEG-LS Golomb parameter past 16")
		}
	}
	m, err := br.golomb(k, s.p.limit, s.p.qbpp)
	if err != nil {
		return 0, err
	}
	e := (m >> 1) ^ -(m & 1) // A.5.2 inverse mapping
	if k == 0 && s.p.near == 0 && 2*c.b+c.n-1 < 0 {
		e = ^e // A.5.2: the mapping is inverted when 2B <= -N
	}
	if e > lsMaxErrval || e < -lsMaxErrval {
		return 0, corruptf("JPEG-LS prediction error %d", e)
	}
	// A.6: update the context and the bias.
	c.a += abs32(e)
	c.b += e * (2*s.p.near + 1)
	if c.n == s.p.reset {
		c.a >>= 1
		c.b >>= 1
		c.n >>= 1
	}
	c.n++
	if c.b+c.n <= 0 {
		c.b += c.n
		if c.b <= -c.n {
			c.b = -c.n + 1
		}
		if c.c > lsMinC {
			c.c--
		}
	} else if c.b > 0 {
		c.b -= c.n
		if c.b > 0 {
			c.b = 0
		}
		if c.c < lsMaxC {
			c.c++
		}
	}
	return s.reconstruct(px, sign*e), nil
}

func abs32(v int32) int32 {
	if v < 0 {
		return -v
	}
	return v
}

// runLength decodes the length of a run of at most left samples (A.7.1)
// with the run index *ri.
func (s *lsScan) runLength(br *lsBits, ri *int, left int32) (int32, error) {
	var n int32
	for br.bit() == 1 {
		step := int32(1) << lsJ[*ri]
		c := min(step, left-n)
		n += c
		if c == step && *ri < lsMaxRunIdx {
			*ri++
		}
		if n == left {
			return n, nil
		}
		if br.over {
			return 0, corruptf("JPEG-LS run past the coded data")
		}
	}
	if j := lsJ[*ri]; j > 0 {
		n += br.bits(uint(j))
	}
	if n > left {
		return 0, corruptf("JPEG-LS run of %d samples where %d remain in the line", n, left)
	}
	return n, nil
}

// runMode decodes a run starting at x and the sample that interrupts it
// (A.7); it returns the samples decoded.
func (s *lsScan) runMode(br *lsBits, i int, x, w int32) (int32, error) {
	cur, prev := s.cur[i], s.prev[i]
	ra := cur[x-1]
	n, err := s.runLength(br, &s.runIndex[i], w-x+1)
	if err != nil {
		return 0, err
	}
	for j := range n {
		cur[x+j] = ra
	}
	end := x + n
	if end > w {
		return n, nil
	}
	rb := prev[end]
	var v int32
	if abs32(ra-rb) <= s.p.near {
		e, err := s.interruption(br, &s.run[1], s.runIndex[i])
		if err != nil {
			return 0, err
		}
		v = s.reconstruct(ra, e)
	} else {
		e, err := s.interruption(br, &s.run[0], s.runIndex[i])
		if err != nil {
			return 0, err
		}
		if rb < ra {
			e = -e
		}
		v = s.reconstruct(rb, e)
	}
	cur[end] = v
	if s.runIndex[i] > 0 {
		s.runIndex[i]--
	}
	return n + 1, nil
}

// interruption decodes the error of a run-interruption sample and
// updates its context (A.7.2).
func (s *lsScan) interruption(br *lsBits, c *lsRunContext, ri int) (int32, error) {
	t := c.a + (c.n>>1)*c.ritype
	k := uint(0)
	for c.n<<k < t {
		k++
		if k > 16 {
			return 0, corruptf("JPEG-LS Golomb parameter past 16")
		}
	}
	m, err := br.golomb(k, s.p.limit-int32(lsJ[ri])-1, s.p.qbpp)
	if err != nil {
		return 0, err
	}
	tm := m + c.ritype
	mapped := tm & 1
	e := (tm + mapped) / 2
	if (k != 0 || 2*c.nn >= c.n) == (mapped == 1) {
		e = -e
	}
	if e < 0 {
		c.nn++
	}
	c.a += (m + 1 - c.ritype) >> 1
	if c.n == s.p.reset {
		c.a >>= 1
		c.n >>= 1
		c.nn >>= 1
	}
	c.n++
	return e, nil
}

// decodeSamples decodes a sample-interleaved scan (ILV 2): the
// components of a pixel in turn, in run mode only when every component
// is flat, with one run index (A.7 applied to pixels, as the CharLS
// library that DCMTK uses does).
func (s *lsScan) decodeSamples(br *lsBits) error {
	nc := len(s.comps)
	w := int32(s.d.width)
	q := make([]int32, nc)
	for y := range s.d.height {
		for i := range nc {
			s.startLine(i)
		}
		for x := int32(1); x <= w; {
			flat := true
			for i := range nc {
				c, p := s.cur[i], s.prev[i]
				q[i] = s.context(c[x-1], p[x], p[x-1], p[x+1])
				flat = flat && q[i] == 0
			}
			if !flat {
				for i := range nc {
					c, p := s.cur[i], s.prev[i]
					v, err := s.regular(br, q[i], c[x-1], p[x], p[x-1])
					if err != nil {
						return err
					}
					c[x] = v
				}
				x++
				continue
			}
			n, err := s.runLength(br, &s.runIndex[0], w-x+1)
			if err != nil {
				return err
			}
			for i := range nc {
				ra := s.cur[i][x-1]
				for j := range n {
					s.cur[i][x+j] = ra
				}
			}
			end := x + n
			if end <= w {
				for i := range nc {
					ra, rb := s.cur[i][x-1], s.prev[i][end]
					e, err := s.interruption(br, &s.run[0], s.runIndex[0])
					if err != nil {
						return err
					}
					if rb < ra {
						e = -e
					}
					s.cur[i][end] = s.reconstruct(rb, e)
				}
				if s.runIndex[0] > 0 {
					s.runIndex[0]--
				}
				n++
			}
			x += n
		}
		for i := range nc {
			s.endLine(i, y)
		}
	}
	return nil
}

// lsBits reads JPEG-LS coded data: after a 0xFF byte the next byte
// carries 7 bits, its top bit a stuffed 0, and a top bit of 1 there
// means the 0xFF began a marker (T.87 A.1, C.1.1).
type lsBits struct {
	data   []byte
	pos    int
	acc    uint64
	n      uint
	real   uint
	prevFF bool
	marker int // position of the marker that ended the data; 0 until found
	over   bool
}

func (b *lsBits) fill() {
	for b.n <= 56 {
		if b.marker == 0 && b.pos < len(b.data) {
			c := b.data[b.pos]
			if b.prevFF {
				if c&0x80 != 0 {
					b.marker = b.pos - 1
					continue
				}
				b.acc |= uint64(c) << (57 - b.n)
				b.n += 7
				b.real += 7
			} else {
				b.acc |= uint64(c) << (56 - b.n)
				b.n += 8
				b.real += 8
			}
			b.prevFF = c == 0xFF
			b.pos++
			continue
		}
		if b.marker == 0 {
			b.marker = len(b.data)
		}
		b.n += 8 // zero bits past the end
	}
}

func (b *lsBits) consume(k uint) {
	b.acc <<= k
	b.n -= k
	if k > b.real {
		b.over, b.real = true, 0
	} else {
		b.real -= k
	}
}

func (b *lsBits) bit() int32 {
	if b.n < 1 {
		b.fill()
	}
	v := int32(b.acc >> 63)
	b.consume(1)
	return v
}

// bits reads k bits, k <= 32.
func (b *lsBits) bits(k uint) int32 {
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

// golomb decodes a limited-length Golomb code (A.5.3): a unary prefix,
// then k bits, or after limit-qbpp-1 zeros the value minus one in qbpp
// bits.
func (b *lsBits) golomb(k uint, limit, qbpp int32) (int32, error) {
	escape := limit - qbpp - 1
	var q int32
	for {
		if b.n < 32 {
			b.fill()
		}
		lz := uint(bits.LeadingZeros64(b.acc))
		if lz < b.n {
			q += int32(lz)
			b.consume(lz + 1)
			break
		}
		q += int32(b.n)
		b.consume(b.n)
		if b.over || q > escape {
			return 0, corruptf("JPEG-LS Golomb code too long")
		}
	}
	if q > escape {
		return 0, corruptf("JPEG-LS Golomb prefix of %d bits where %d is the limit", q, escape)
	}
	if q == escape {
		return b.bits(uint(qbpp)) + 1, nil
	}
	return q<<k | b.bits(k), nil
}

// markerPos is where the marker after the scan's coded data starts.
func (b *lsBits) markerPos() int {
	if b.marker > 0 {
		return b.marker
	}
	if b.prevFF {
		return b.pos - 1
	}
	return b.pos
}
