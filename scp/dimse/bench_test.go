package dimse

import "testing"

func BenchmarkEncodeCStoreRQ(b *testing.B) {
	c := NewCStoreRQ(7, mrImageStorage, testInstance, PriorityMedium)
	b.ReportAllocs()
	for b.Loop() {
		if _, err := c.Encode(); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkDecodeCStoreRQ(b *testing.B) {
	raw := mustEncode(NewCStoreRQ(7, mrImageStorage, testInstance, PriorityMedium))
	b.ReportAllocs()
	b.SetBytes(int64(len(raw)))
	for b.Loop() {
		if _, err := Decode(raw); err != nil {
			b.Fatal(err)
		}
	}
}
