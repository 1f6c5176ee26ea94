package part10

import (
	"bytes"
	"os"
	"path/filepath"
	"reflect"
	"testing"
)

// FuzzReadMeta checks that ReadMeta never panics, and that what it accepts
// is consistent: an offset inside the input past the prefix, a transfer
// syntax, and named fields that survive WriteHeader and a second read.
func FuzzReadMeta(f *testing.F) {
	paths, err := filepath.Glob(filepath.Join("testdata", "*.d*")) // the .dcm and .dump files
	if err != nil || len(paths) == 0 {
		f.Fatalf("no seeds in testdata: %v", err)
	}
	for _, p := range paths {
		b, err := os.ReadFile(p)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(b)
		if len(b) > headerStart+12 && string(b[preambleLength:headerStart]) == prefix {
			f.Add(withoutGroupLength(b))
		}
	}
	f.Add(writtenFile(f, minimalMeta).data)

	f.Fuzz(func(t *testing.T, data []byte) {
		m, off, err := ReadMeta(bytes.NewReader(data))
		if err != nil {
			return
		}
		if off < headerStart || off > int64(len(data)) {
			t.Fatalf("offset %d outside input of %d bytes", off, len(data))
		}
		if m.TransferSyntaxUID == "" {
			t.Fatal("accepted meta without transfer syntax")
		}
		var b bytes.Buffer
		if err := WriteHeader(&b, m); err != nil {
			return // ReadMeta is more lenient than WriteHeader
		}
		b.Write([]byte{0x08, 0x00}) // a data set must follow when there is no lookahead
		again, _, err := ReadMeta(bytes.NewReader(b.Bytes()))
		if err != nil {
			t.Fatalf("rereading our own header: %v", err)
		}
		want := expectedRead(m) // with our implementation defaults where m had none
		want.Other, again.Other = nil, nil
		if !reflect.DeepEqual(want, again) {
			t.Fatalf("meta changed through WriteHeader:\n%+v\n%+v", want, again)
		}
	})
}
