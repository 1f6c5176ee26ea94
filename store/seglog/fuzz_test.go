package seglog

import (
	"bytes"
	"os"
	"path/filepath"
	"testing"
)

// FuzzReplay opens a folder whose only segment holds arbitrary bytes:
// Open never panics, every record it replays reads back with its checksum
// verified, and the segment is cut to the end of the last good record.
func FuzzReplay(f *testing.F) {
	_, _, _, whole := tornFixture(f, []int{0, 10, 300})
	f.Add(whole)
	f.Add(whole[:len(whole)-1])
	f.Add([]byte{})
	f.Add([]byte("DWR1"))
	f.Fuzz(func(t *testing.T, b []byte) {
		dir := t.TempDir()
		seg := filepath.Join(dir, "20000101-0000000001.seg")
		if err := os.WriteFile(filepath.Join(dir, "FORMAT"), []byte("dwiaudit segment log\nversion 1\n"), 0o600); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(seg, b, 0o600); err != nil {
			t.Fatal(err)
		}
		var got []Entry
		l, err := Open(dir, Options{Replay: func(e Entry) error { got = append(got, e); return nil }})
		if err != nil {
			t.Fatalf("Open: %v", err)
		}
		defer l.Close()
		var end int64
		for _, e := range got {
			uid, p, err := l.ReadAll(e.Pos)
			if err != nil || uid != e.UID || int64(len(p)) != e.Size {
				t.Fatalf("replayed %+v reads back as %q, %d bytes, %v", e, uid, len(p), err)
			}
			if !bytes.Equal(p, b[e.Pos.Offset+headerSize+int64(len(uid)):e.Next.Offset]) {
				t.Fatalf("payload of %+v is not the bytes in the file", e)
			}
			end = e.Next.Offset
		}
		st, err := os.Stat(seg)
		if err != nil || st.Size() != end {
			t.Fatalf("segment is %d bytes after Open, want %d (end of the last good record)", st.Size(), end)
		}
	})
}
