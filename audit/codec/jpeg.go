package codec

import "encoding/binary"

// JPEG markers (T.81 Table B.1).
const (
	markerSOF0 = 0xC0 // baseline DCT, Huffman
	markerSOF1 = 0xC1 // extended sequential DCT, Huffman
	markerSOF3 = 0xC3 // lossless (sequential), Huffman
	markerDHT  = 0xC4
	markerRST0 = 0xD0
	markerSOI  = 0xD8
	markerEOI  = 0xD9
	markerSOS  = 0xDA
	markerDQT  = 0xDB
	markerDNL  = 0xDC
	markerDRI  = 0xDD
)

// maxComponents is the most components a frame may have here: the
// DICOM images decoded have 1 or 3 samples per pixel.
const maxComponents = 3

// jpegComponent is one component of a frame (T.81 B.2.2).
type jpegComponent struct {
	id     byte
	h, v   int // sampling factors
	tq     int // quantization table
	width  int // samples in a line: ceil(X * h / hmax), T.81 A.1.1
	height int
	// plane holds the decoded samples, stride wide: the full MCU-padded
	// block grid for DCT, exactly width for lossless.
	plane  []int32
	stride int
	done   bool // a scan has coded it
}

// jpegDecoder decodes one JPEG stream (T.81 Annex B syntax).
type jpegDecoder struct {
	data      []byte
	pos       int
	img       Image
	sof       byte // 0 until the frame header is read
	precision int
	width     int
	height    int
	comps     []jpegComponent
	hmax      int
	vmax      int
	dc, ac    [4]huffTable
	quant     [4][64]int32 // natural (row-major) order
	qdefined  [4]bool
	restart   int
}

// decodeJPEG decodes one JPEG frame (T.81) of any of the Huffman-coded
// processes this package supports into out.
func decodeJPEG(out []byte, img Image, data []byte) error {
	d := &jpegDecoder{data: data, img: img}
	if err := d.run(); err != nil {
		return err
	}
	return d.emit(out)
}

func (d *jpegDecoder) u16() (int, error) {
	if d.pos+2 > len(d.data) {
		return 0, corruptf("JPEG stream ends inside a marker segment")
	}
	v := int(binary.BigEndian.Uint16(d.data[d.pos:]))
	d.pos += 2
	return v, nil
}

// segment returns the body of the marker segment at d.pos (after its
// length field) and moves past it.
func (d *jpegDecoder) segment() ([]byte, error) {
	n, err := d.u16()
	if err != nil {
		return nil, err
	}
	if n < 2 || d.pos+n-2 > len(d.data) {
		return nil, corruptf("JPEG marker segment of length %d at byte %d runs past the stream", n, d.pos-2)
	}
	body := d.data[d.pos : d.pos+n-2]
	d.pos += n - 2
	return body, nil
}

// nextMarker finds the next marker at or after d.pos, skipping fill bytes
// (T.81 B.1.1.2) and, after a scan, any bytes the entropy decoder left.
func (d *jpegDecoder) nextMarker() (byte, error) {
	for d.pos+1 < len(d.data) {
		if d.data[d.pos] != 0xFF {
			d.pos++
			continue
		}
		m := d.data[d.pos+1]
		if m == 0xFF {
			d.pos++
			continue
		}
		if m == 0 || (m >= markerRST0 && m < markerRST0+8) {
			d.pos += 2
			continue
		}
		d.pos += 2
		return m, nil
	}
	return 0, corruptf("JPEG stream ends without an EOI marker")
}

func (d *jpegDecoder) run() error {
	if len(d.data) < 2 || d.data[0] != 0xFF || d.data[1] != markerSOI {
		return corruptf("JPEG frame does not start with an SOI marker")
	}
	d.pos = 2
	for {
		m, err := d.nextMarker()
		if err != nil {
			if d.sof != 0 && d.allDone() {
				return nil // EOI missing after a complete image: accepted, as the IJG library does
			}
			return err
		}
		switch {
		case m == markerEOI:
			if !d.allDone() {
				return corruptf("JPEG EOI before every component was coded")
			}
			return nil
		case m == markerSOF0 || m == markerSOF1 || m == markerSOF3:
			if d.sof != 0 {
				return corruptf("second JPEG frame header")
			}
			body, err := d.segment()
			if err != nil {
				return err
			}
			if err := d.frameHeader(m, body); err != nil {
				return err
			}
		case m >= 0xC0 && m <= 0xCF && m != markerDHT && m != 0xC8 && m != 0xCC:
			return unsupportedf("JPEG process of frame marker 0x%02X (only Huffman baseline, extended sequential and lossless are decoded)", m)
		case m == 0xCC:
			return unsupportedf("JPEG arithmetic coding")
		case m == markerDHT:
			body, err := d.segment()
			if err != nil {
				return err
			}
			if err := d.defineHuffman(body); err != nil {
				return err
			}
		case m == markerDQT:
			body, err := d.segment()
			if err != nil {
				return err
			}
			if err := d.defineQuant(body); err != nil {
				return err
			}
		case m == markerDRI:
			body, err := d.segment()
			if err != nil {
				return err
			}
			if len(body) != 2 {
				return corruptf("DRI segment of %d bytes", len(body))
			}
			d.restart = int(binary.BigEndian.Uint16(body))
		case m == markerDNL:
			return unsupportedf("JPEG DNL marker (number of lines after the scan)")
		case m == markerSOS:
			if d.sof == 0 {
				return corruptf("JPEG scan before the frame header")
			}
			body, err := d.segment()
			if err != nil {
				return err
			}
			if err := d.scan(body); err != nil {
				return err
			}
		case m == markerSOI:
			return corruptf("second SOI marker in one JPEG frame")
		default: // APPn, COM, JPGn and the rest: skip by length
			if _, err := d.segment(); err != nil {
				return err
			}
		}
	}
}

func (d *jpegDecoder) allDone() bool {
	for _, c := range d.comps {
		if !c.done {
			return false
		}
	}
	return len(d.comps) > 0
}

// frameHeader reads SOF (T.81 B.2.2) and checks it against the DICOM
// header.
func (d *jpegDecoder) frameHeader(m byte, b []byte) error {
	if len(b) < 6 {
		return corruptf("JPEG frame header of %d bytes", len(b))
	}
	d.sof = m
	d.precision = int(b[0])
	d.height = int(binary.BigEndian.Uint16(b[1:]))
	d.width = int(binary.BigEndian.Uint16(b[3:]))
	nc := int(b[5])
	if len(b) != 6+3*nc {
		return corruptf("JPEG frame header of %d bytes for %d components", len(b), nc)
	}
	switch m {
	case markerSOF0:
		if d.precision != 8 {
			return corruptf("baseline JPEG with precision %d (T.81 B.2.2: 8)", d.precision)
		}
	case markerSOF1:
		if d.precision != 8 && d.precision != 12 {
			return corruptf("extended JPEG with precision %d (T.81 B.2.2: 8 or 12)", d.precision)
		}
	case markerSOF3:
		if d.precision < 2 || d.precision > 16 {
			return corruptf("lossless JPEG with precision %d (T.81 B.2.2: 2 to 16)", d.precision)
		}
	}
	if d.height == 0 {
		return unsupportedf("JPEG frame with its number of lines in a DNL marker")
	}
	if d.width != d.img.Columns || d.height != d.img.Rows {
		return corruptf("JPEG frame of %d x %d in an image of %d columns x %d rows", d.width, d.height, d.img.Columns, d.img.Rows)
	}
	if nc != d.img.SamplesPerPixel {
		return corruptf("JPEG frame of %d components in an image of %d samples per pixel", nc, d.img.SamplesPerPixel)
	}
	if d.precision > d.img.BitsAllocated {
		return corruptf("JPEG precision %d exceeds Bits Allocated %d", d.precision, d.img.BitsAllocated)
	}
	d.comps = make([]jpegComponent, nc)
	d.hmax, d.vmax = 1, 1
	for i := range d.comps {
		c := &d.comps[i]
		c.id = b[6+3*i]
		c.h, c.v = int(b[7+3*i]>>4), int(b[7+3*i]&15)
		c.tq = int(b[8+3*i])
		if c.h < 1 || c.h > 4 || c.v < 1 || c.v > 4 || c.tq > 3 {
			return corruptf("JPEG component %d sampling %dx%d, table %d", c.id, c.h, c.v, c.tq)
		}
		for j := range i {
			if d.comps[j].id == c.id {
				return corruptf("JPEG component identifier %d used twice", c.id)
			}
		}
		d.hmax, d.vmax = max(d.hmax, c.h), max(d.vmax, c.v)
	}
	for i := range d.comps {
		c := &d.comps[i]
		c.width = (d.width*c.h + d.hmax - 1) / d.hmax
		c.height = (d.height*c.v + d.vmax - 1) / d.vmax
		if m == markerSOF3 {
			if c.h != 1 || c.v != 1 {
				return unsupportedf("lossless JPEG with subsampled components")
			}
			c.stride = c.width
			c.plane = make([]int32, c.width*c.height)
			continue
		}
		mcusx := (d.width + 8*d.hmax - 1) / (8 * d.hmax)
		mcusy := (d.height + 8*d.vmax - 1) / (8 * d.vmax)
		c.stride = mcusx * c.h * 8
		c.plane = make([]int32, c.stride*mcusy*c.v*8)
	}
	return nil
}

// defineHuffman reads a DHT segment (T.81 B.2.4.2).
func (d *jpegDecoder) defineHuffman(b []byte) error {
	for len(b) > 0 {
		if len(b) < 17 {
			return corruptf("DHT segment cut short")
		}
		class, id := b[0]>>4, int(b[0]&15)
		if class > 1 || id > 3 {
			return corruptf("DHT class %d table %d", class, id)
		}
		var counts [16]int
		total := 0
		for i := range counts {
			counts[i] = int(b[1+i])
			total += counts[i]
		}
		if total > 256 || len(b) < 17+total {
			return corruptf("DHT table of %d codes in %d bytes", total, len(b))
		}
		vals := append([]byte(nil), b[17:17+total]...)
		t := &d.dc[id]
		if class == 1 {
			t = &d.ac[id]
		}
		if err := t.build(counts, vals); err != nil {
			return err
		}
		b = b[17+total:]
	}
	return nil
}

// defineQuant reads a DQT segment (T.81 B.2.4.1); values arrive in
// zig-zag order.
func (d *jpegDecoder) defineQuant(b []byte) error {
	for len(b) > 0 {
		pq, id := b[0]>>4, int(b[0]&15)
		if pq > 1 || id > 3 {
			return corruptf("DQT precision %d table %d", pq, id)
		}
		n := 64 * (1 + int(pq))
		if len(b) < 1+n {
			return corruptf("DQT segment cut short")
		}
		for i := range 64 {
			var q int32
			if pq == 0 {
				q = int32(b[1+i])
			} else {
				q = int32(binary.BigEndian.Uint16(b[1+2*i:]))
			}
			d.quant[id][zigzag[i]] = q
		}
		d.qdefined[id] = true
		b = b[1+n:]
	}
	return nil
}

// scanComponent is one component of a scan header with its tables.
type scanComponent struct {
	c      *jpegComponent
	dc, ac *huffTable
	pred   int32 // DC prediction (DCT)
}

// scan reads a scan header (T.81 B.2.3) and decodes the scan's entropy
// coded data that follows it.
func (d *jpegDecoder) scan(b []byte) error {
	if len(b) < 1 {
		return corruptf("empty scan header")
	}
	ns := int(b[0])
	if ns < 1 || ns > len(d.comps) || len(b) != 4+2*ns {
		return corruptf("scan header of %d bytes for %d components", len(b), ns)
	}
	sc := make([]scanComponent, ns)
	for i := range sc {
		id, tables := b[1+2*i], b[2+2*i]
		for j := range d.comps {
			if d.comps[j].id == id {
				sc[i].c = &d.comps[j]
			}
		}
		if sc[i].c == nil {
			return corruptf("scan names component %d, not in the frame", id)
		}
		if sc[i].c.done {
			return corruptf("component %d coded by a second scan", id)
		}
		td, ta := int(tables>>4), int(tables&15)
		if td > 3 || ta > 3 {
			return corruptf("scan component %d tables %d/%d", id, td, ta)
		}
		sc[i].dc, sc[i].ac = &d.dc[td], &d.ac[ta]
		if !sc[i].dc.defined || (d.sof != markerSOF3 && !sc[i].ac.defined) {
			return corruptf("scan component %d uses an undefined Huffman table", id)
		}
	}
	ss, se, ah, al := int(b[1+2*ns]), int(b[2+2*ns]), int(b[3+2*ns]>>4), int(b[3+2*ns]&15)
	br := &bitReader{data: d.data, pos: d.pos}
	var err error
	if d.sof == markerSOF3 {
		if ss < 1 || ss > 7 || se != 0 || ah != 0 || al >= d.precision {
			return corruptf("lossless scan with predictor %d, Se %d, Ah %d, point transform %d", ss, se, ah, al)
		}
		if err = d.losslessScan(br, sc, ss, al); err == nil {
			for i := range sc {
				for j, v := range sc[i].c.plane {
					sc[i].c.plane[j] = (v << al) & 0xFFFF // H.1.2.1: the point transform is undone by a left shift
				}
			}
		}
	} else {
		if ss != 0 || se != 63 || ah != 0 || al != 0 {
			return corruptf("sequential DCT scan with Ss %d, Se %d, Ah %d, Al %d", ss, se, ah, al)
		}
		err = d.dctScan(br, sc)
	}
	if err != nil {
		return err
	}
	if br.over {
		return corruptf("JPEG scan needs more entropy-coded data than the stream holds")
	}
	for i := range sc {
		sc[i].c.done = true
	}
	d.pos = br.pos
	return nil
}

// restartAt handles a restart marker in the entropy-coded data (T.81
// B.2.5, F.2.2.5) expected as number n (0..7).
func restartAt(br *bitReader, n int) error {
	p := br.pos
	for p < len(br.data) && br.data[p] == 0xFF && p+1 < len(br.data) && br.data[p+1] == 0xFF {
		p++
	}
	if p+1 >= len(br.data) || br.data[p] != 0xFF || br.data[p+1] != byte(markerRST0+n) {
		return corruptf("restart marker RST%d missing at byte %d", n, p)
	}
	br.reset(p + 2)
	return nil
}

// zigzag maps the zig-zag index of a coefficient to its natural
// row-major index (T.81 Figure A.6).
var zigzag = [64]int{
	0, 1, 8, 16, 9, 2, 3, 10,
	17, 24, 32, 25, 18, 11, 4, 5,
	12, 19, 26, 33, 40, 48, 41, 34,
	27, 20, 13, 6, 7, 14, 21, 28,
	35, 42, 49, 56, 57, 50, 43, 36,
	29, 22, 15, 23, 30, 37, 44, 51,
	58, 59, 52, 45, 38, 31, 39, 46,
	53, 60, 61, 54, 47, 55, 62, 63,
}
