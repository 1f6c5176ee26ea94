package codec

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"testing"
)

// DCMTK's encoders write no restart intervals, so these tests make their
// own streams with them: a small Huffman encoder with the example DC
// table of T.81 Annex K.3 (Table K.3, categories 0 to 11), lossless
// (T.81 H.1.2.1: prediction restarts at each interval) and DCT with DC
// coefficients only (F.2.1.3.1: DC prediction restarts at zero).

var (
	k3Counts = [16]byte{0, 1, 5, 1, 1, 1, 1, 1, 1, 0, 0, 0, 0, 0, 0, 0} // T.81 Table K.3
	k3Vals   = []byte{0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11}
)

type bitWriter struct {
	out  []byte
	acc  uint32
	n    uint
	code map[byte][2]uint32 // value -> code, length
}

func newBitWriter(counts [16]byte, vals []byte) *bitWriter {
	w := &bitWriter{code: map[byte][2]uint32{}}
	code, k := uint32(0), 0
	for l := 1; l <= 16; l++ {
		for range counts[l-1] {
			w.code[vals[k]] = [2]uint32{code, uint32(l)}
			code++
			k++
		}
		code <<= 1
	}
	return w
}

func (w *bitWriter) bits(v uint32, n uint) {
	for i := int(n) - 1; i >= 0; i-- {
		w.acc = w.acc<<1 | (v>>uint(i))&1
		w.n++
		if w.n == 8 {
			w.out = append(w.out, byte(w.acc))
			if byte(w.acc) == 0xFF {
				w.out = append(w.out, 0) // T.81 B.1.1.5 byte stuffing
			}
			w.acc, w.n = 0, 0
		}
	}
}

// flush pads with 1 bits to a byte boundary (T.81 F.1.2.3).
func (w *bitWriter) flush() {
	for w.n != 0 {
		w.bits(1, 1)
	}
}

// diff writes a difference as its category's code and extra bits (T.81
// F.1.2.1, H.1.2.2).
func (w *bitWriter) diff(d int) {
	a := d
	if a < 0 {
		a = -a
	}
	s := uint(0)
	for a>>s != 0 {
		s++
	}
	c := w.code[byte(s)]
	w.bits(c[0], uint(c[1]))
	if d < 0 {
		d += 1<<s - 1
	}
	w.bits(uint32(d), s)
}

func segment(marker byte, body ...byte) []byte {
	b := []byte{0xFF, marker, 0, 0}
	binary.BigEndian.PutUint16(b[2:], uint16(len(body)+2))
	return append(b, body...)
}

func dht(class byte, counts [16]byte, vals []byte) []byte {
	return segment(markerDHT, append(append([]byte{class << 4}, counts[:]...), vals...)...)
}

// encodeWithRestarts writes an 8-bit one-component stream of the given
// process with a restart every interval MCUs; mcu codes MCU i.
func encodeWithRestarts(sof byte, rows, cols, mcus, interval int, tables []byte, ss, se byte, mcu func(w *bitWriter, i int, restarted bool)) []byte {
	out := []byte{0xFF, markerSOI}
	out = append(out, tables...)
	out = append(out, segment(sof, 8, byte(rows>>8), byte(rows), byte(cols>>8), byte(cols), 1, 1, 0x11, 0)...)
	out = append(out, segment(markerDRI, byte(interval>>8), byte(interval))...)
	out = append(out, segment(markerSOS, 1, 1, 0x00, ss, se, 0)...)
	w := newBitWriter(k3Counts, k3Vals)
	for i := range mcus {
		restarted := i%interval == 0
		if restarted && i > 0 {
			w.flush()
			w.out = append(w.out, 0xFF, byte(markerRST0+(i/interval-1)%8))
		}
		mcu(w, i, restarted)
	}
	w.flush()
	out = append(out, w.out...)
	return append(out, 0xFF, markerEOI)
}

func TestLosslessRestartIntervalsResetThePrediction(t *testing.T) {
	const rows, cols = 9, 11
	img := Image{Rows: rows, Columns: cols, SamplesPerPixel: 1, BitsAllocated: 8}
	want := make([]byte, rows*cols)
	for i := range want {
		want[i] = byte((i*i*7 + i/3) % 256)
	}
	for _, rowsPer := range []int{1, 2, 4} {
		t.Run(fmt.Sprintf("a restart every %d lines", rowsPer), func(t *testing.T) {
			firstLine := false
			stream := encodeWithRestarts(markerSOF3, rows, cols, rows*cols, rowsPer*cols, dht(0, k3Counts, k3Vals), 1, 0,
				func(w *bitWriter, i int, restarted bool) {
					y, x := i/cols, i%cols
					if restarted {
						firstLine = true
					} else if x == 0 {
						firstLine = false
					}
					// T.81 H.1.2.1: 2^(P-1) at the start of an interval,
					// Ra along its first line, Rb at each line start, then
					// the selection value (1: Ra).
					var px int
					switch {
					case restarted || (y == 0 && x == 0):
						px = 128
					case firstLine || x > 0:
						px = int(want[i-1])
					default:
						px = int(want[i-cols])
					}
					d := (int(want[i]) - px) & 0xFFFF
					if d >= 32768 {
						d -= 65536
					}
					w.diff(d)
				})
			got, err := Decode(JPEGLossless, img, stream)
			if err != nil {
				t.Fatal(err)
			}
			if !bytes.Equal(got, want) {
				t.Errorf("decoded samples differ from the encoded ones")
			}
		})
	}
}

func TestDCTRestartIntervalsResetTheDCPrediction(t *testing.T) {
	const rows, cols = 13, 20 // 2 x 3 blocks, the last ones cut
	img := Image{Rows: rows, Columns: cols, SamplesPerPixel: 1, BitsAllocated: 8}
	bw, bh := (cols+7)/8, (rows+7)/8
	level := func(b int) int { return (b*97 + 13) % 256 }
	want := make([]byte, rows*cols)
	for y := range rows {
		for x := range cols {
			want[y*cols+x] = byte(level((y/8)*bw + x/8))
		}
	}
	ones := make([]byte, 64)
	for i := range ones {
		ones[i] = 1
	}
	tables := append(segment(markerDQT, append([]byte{0}, ones...)...), dht(0, k3Counts, k3Vals)...)
	eobCounts := [16]byte{1} // one code, "0", for EOB
	tables = append(tables, dht(1, eobCounts, []byte{0})...)
	for _, interval := range []int{1, 2, 4} {
		t.Run(fmt.Sprintf("a restart every %d blocks", interval), func(t *testing.T) {
			pred := 0
			stream := encodeWithRestarts(markerSOF0, rows, cols, bw*bh, interval, tables, 0, 63,
				func(w *bitWriter, i int, restarted bool) {
					if restarted {
						pred = 0
					}
					// A flat block of level v has DC 8(v-128) (T.81 A.3.3
					// with the level shift of A.3.1); quantizer 1.
					dc := 8 * (level(i) - 128)
					w.diff(dc - pred)
					pred = dc
					w.bits(0, 1) // EOB
				})
			got, err := Decode(JPEGBaseline, img, stream)
			if err != nil {
				t.Fatal(err)
			}
			if !bytes.Equal(got, want) {
				t.Errorf("decoded samples differ from the encoded ones:\n% x\n% x", got[:cols], want[:cols])
			}
		})
	}
}
