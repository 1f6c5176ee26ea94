package pdu

import (
	"bytes"
	"io"
	"os"
	"path/filepath"
	"testing"
)

// pdata256K is a P-DATA-TF of PDU-length 256 KiB carrying one PDV.
func pdata256K() []byte {
	const pduLength = 256 << 10
	data := bytes.Repeat([]byte{0x5a}, pduLength-PDVOverhead)
	return append(AppendPDataHeader(nil, 1, false, false, len(data)), data...)
}

func BenchmarkReadPData(b *testing.B) {
	pdu := pdata256K()
	src := bytes.NewReader(pdu)
	rd := NewReader(src, 256<<10)
	b.SetBytes(int64(len(pdu)))
	b.ReportAllocs()
	for b.Loop() {
		src.Reset(pdu)
		if _, err := rd.Next(); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkWritePData(b *testing.B) {
	data := bytes.Repeat([]byte{0x5a}, 256<<10-PDVOverhead)
	pd := &PDataTF{Items: []PDV{{ContextID: 1, Last: true, Data: data}}}
	b.Run("Writer reusing its buffer", func(b *testing.B) {
		w := newWriter(io.Discard)
		b.SetBytes(int64(len(data) + 12))
		b.ReportAllocs()
		for b.Loop() {
			if err := w.Write(pd); err != nil {
				b.Fatal(err)
			}
		}
	})
	b.Run("Write allocating per PDU", func(b *testing.B) {
		b.SetBytes(int64(len(data) + 12))
		b.ReportAllocs()
		for b.Loop() {
			if err := write(io.Discard, pd); err != nil {
				b.Fatal(err)
			}
		}
	})
	b.Run("AppendPDataHeader then the data into a reused buffer", func(b *testing.B) {
		var buf []byte
		b.SetBytes(int64(len(data) + 12))
		b.ReportAllocs()
		for b.Loop() {
			buf = AppendPDataHeader(buf[:0], 1, false, true, len(data))
			buf = append(buf, data...)
			if _, err := io.Discard.Write(buf); err != nil {
				b.Fatal(err)
			}
		}
	})
}

func BenchmarkReadAssociateRQ(b *testing.B) {
	for _, name := range []string{
		"dcmtk-store-00-rq-a-associate-rq.pdu",   // storescu: many storage SOP classes, user identity
		"dcmtk-echo128-00-rq-a-associate-rq.pdu", // echoscu -ppc 128 -pts 38
	} {
		raw, err := os.ReadFile(filepath.Join("testdata", name))
		if err != nil {
			b.Fatal(err)
		}
		b.Run(name, func(b *testing.B) {
			src := bytes.NewReader(raw)
			rd := NewReader(src, 0)
			b.SetBytes(int64(len(raw)))
			b.ReportAllocs()
			for b.Loop() {
				src.Reset(raw)
				if _, err := rd.Next(); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
