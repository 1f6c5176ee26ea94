package pdu

import (
	"bytes"
	"errors"
	"io"
	"reflect"
	"testing"
)

// FuzzReader feeds arbitrary bytes to a Reader as a stream of PDUs. It must
// never panic, every error must be one of the documented kinds, and every
// PDU it accepts must re-encode to bytes that decode to the same value and
// re-encode to the same bytes. Seeds are the files in testdata/ (real DCMTK
// exchanges and our synthetic PDUs) up to 1 KiB, alone and two at a
// time as a stream.
//
//	go test -run XXX -fuzz FuzzReader -fuzztime 20s ./scp/pdu/
func FuzzReader(f *testing.F) {
	// maxFuzzSeed leaves out the few seeds of several KB (storescu's and
	// the 128-context association): the fuzzer then spends most of its
	// time minimizing the large inputs it derives from them (observed:
	// no executions for the last 15 s of a 20 s run). The small seeds
	// have every item and sub-item type, and
	// TestEverySeedFileDecodesAndReencodesToItsBytes covers the large.
	const maxFuzzSeed = 1 << 10
	files := seedFiles(f)
	var prev []byte
	for _, b := range files {
		if len(b) > maxFuzzSeed {
			continue
		}
		f.Add(b)
		if prev != nil {
			f.Add(cat(prev, b))
		}
		prev = b
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		// Decode must not panic either, whatever it returns.
		_, _ = Decode(data)

		// A small P-DATA limit: with the 16 MiB default every input that
		// declares a long P-DATA-TF would cost a 16 MiB allocation, and the
		// limit itself is tested elsewhere.
		rd := NewReader(bytes.NewReader(data), 64<<10)
		for range 8 {
			p, err := rd.Next()
			if err != nil {
				if err != io.EOF && !errors.Is(err, io.ErrUnexpectedEOF) &&
					!errors.Is(err, errTooLong) && !errors.Is(err, errMalformed) {
					t.Fatalf("undocumented error %v (%T)", err, err)
				}
				return
			}
			enc, err := Encode(p)
			if err != nil {
				// The decoder accepts, so that the caller can reject them
				// politely, AE titles, UIDs and names we refuse to send.
				if errors.Is(err, errInvalidAETitle) || errors.Is(err, errInvalidUID) || errors.Is(err, errInvalidField) {
					continue
				}
				t.Fatalf("re-encoding an accepted %s: %v", p.Type(), err)
			}
			again, err := Decode(enc)
			if err != nil {
				t.Fatalf("decoding our own encoding of %s: %v\n%x", p.Type(), err, enc)
			}
			if !samePDU(p, again) {
				t.Fatalf("round trip changed the value\nfirst  %#v\nsecond %#v", p, again)
			}
			enc2, err := Encode(again)
			if err != nil || !bytes.Equal(enc, enc2) {
				t.Fatalf("encoding is not stable: %v\n%x\n%x", err, enc, enc2)
			}
		}
	})
}

// samePDU is assertSamePDU as a predicate.
func samePDU(a, b PDU) bool {
	pa, ok := a.(*PDataTF)
	if !ok {
		return reflect.DeepEqual(a, b)
	}
	pb, ok := b.(*PDataTF)
	if !ok || len(pa.Items) != len(pb.Items) {
		return false
	}
	for i := range pa.Items {
		x, y := pa.Items[i], pb.Items[i]
		if x.ContextID != y.ContextID || x.Command != y.Command || x.Last != y.Last || !bytes.Equal(x.Data, y.Data) {
			return false
		}
	}
	return true
}
