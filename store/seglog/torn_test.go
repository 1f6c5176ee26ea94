package seglog

import (
	"bytes"
	"errors"
	"os"
	"path/filepath"
	"strconv"
	"testing"
	"time"
)

// tornFixture writes records of the given payload sizes to a fresh log
// and returns the folder, the segment path and the offset where the last
// record starts.
func tornFixture(t testing.TB, sizes []int) (dir, seg string, lastStart int64, whole []byte) {
	t.Helper()
	dir = t.TempDir()
	l, err := Open(dir, Options{})
	if err != nil {
		t.Fatal(err)
	}
	var p Pos
	for i, n := range sizes {
		if p, err = l.Append(uidFor(i), payloadFor(i, n)); err != nil {
			t.Fatal(err)
		}
	}
	seg = filepath.Join(dir, l.Segments()[0].Name)
	if err := l.Close(); err != nil {
		t.Fatal(err)
	}
	whole, err = os.ReadFile(seg)
	if err != nil {
		t.Fatal(err)
	}
	return dir, seg, p.Offset, whole
}

// checkKeepsAllButLast reopens dir and wants exactly the records before
// the last, the segment cut back to where the last began, and appending
// working again.
func checkKeepsAllButLast(t *testing.T, dir, seg string, n int, lastStart int64, what string) {
	t.Helper()
	day2000 := func() time.Time { return time.Date(2000, 1, 1, 12, 0, 0, 0, time.UTC) }
	l, got := collect(t, dir, Options{Now: day2000})
	defer l.Close()
	if len(got) != n-1 {
		t.Fatalf("%s: replay kept %d records, want %d", what, len(got), n-1)
	}
	for i, e := range got {
		if e.UID != uidFor(i) {
			t.Fatalf("%s: record %d is %q", what, i, e.UID)
		}
	}
	if st, err := os.Stat(seg); err != nil || st.Size() != lastStart {
		t.Fatalf("%s: segment is %v bytes (%v), want truncated to %d", what, st.Size(), err, lastStart)
	}
	p, err := l.Append(uidFor(99), []byte("after"))
	if err != nil || p.Offset != lastStart {
		t.Fatalf("%s: Append after the torn tail at %v, %v; want offset %d", what, p, err, lastStart)
	}
	if _, b, err := l.ReadAll(p); err != nil || !bytes.Equal(b, []byte("after")) {
		t.Fatalf("%s: read back %q, %v", what, b, err)
	}
}

// TestTornTailTruncatedAtEveryByte cuts the last record short at every
// length from nothing to one byte less than whole: replay keeps exactly
// the records before it.
func TestTornTailTruncatedAtEveryByte(t *testing.T) {
	sizes := []int{700, 10, 300}
	_, _, lastStart, whole := tornFixture(t, sizes)
	for cut := lastStart; cut < int64(len(whole)); cut++ {
		dir := t.TempDir()
		seg := filepath.Join(dir, "20000101-0000000001.seg")
		writeLog(t, dir, seg, whole[:cut])
		checkKeepsAllButLast(t, dir, seg, len(sizes), lastStart, "truncated at "+itoa(cut))
	}
}

// TestTornTailCorruptedAtEveryByte flips every byte of the last record in
// turn (header, UID, payload): the checksum or a header check catches
// each, and replay keeps exactly the records before it.
func TestTornTailCorruptedAtEveryByte(t *testing.T) {
	sizes := []int{700, 10, 300}
	_, _, lastStart, whole := tornFixture(t, sizes)
	for at := lastStart; at < int64(len(whole)); at++ {
		bad := append([]byte(nil), whole...)
		bad[at] ^= 0x5a
		dir := t.TempDir()
		seg := filepath.Join(dir, "20000101-0000000001.seg")
		writeLog(t, dir, seg, bad)
		checkKeepsAllButLast(t, dir, seg, len(sizes), lastStart, "byte "+itoa(at)+" flipped")
	}
}

// TestCorruptionBeforeTheLastSegmentIsNotATornTail: earlier segments were
// flushed whole before the next began, so damage there is refused.
func TestCorruptionBeforeTheLastSegmentIsNotATornTail(t *testing.T) {
	dir := t.TempDir()
	l, err := Open(dir, Options{SegmentSize: 1000})
	if err != nil {
		t.Fatal(err)
	}
	for i := range 3 {
		if _, err := l.Append(uidFor(i), payloadFor(i, 900)); err != nil {
			t.Fatal(err)
		}
	}
	first := filepath.Join(dir, l.Segments()[0].Name)
	l.Close()
	b, _ := os.ReadFile(first)
	b[len(b)-1] ^= 1
	if err := os.WriteFile(first, b, 0o600); err != nil {
		t.Fatal(err)
	}
	if _, err := Open(dir, Options{}); !errors.Is(err, ErrCorrupt) {
		t.Fatalf("Open over a damaged first segment: %v, want ErrCorrupt", err)
	}
}

func writeLog(t *testing.T, dir, seg string, b []byte) {
	t.Helper()
	if err := os.WriteFile(filepath.Join(dir, "FORMAT"), []byte("dwiaudit segment log\nversion 1\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(seg, b, 0o600); err != nil {
		t.Fatal(err)
	}
}

func itoa(n int64) string { return strconv.FormatInt(n, 10) }
