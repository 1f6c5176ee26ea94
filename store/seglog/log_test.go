package seglog

import (
	"bytes"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"testing"
	"time"
)

// payloadFor makes a distinct, checkable payload for record i.
func payloadFor(i, n int) []byte {
	b := make([]byte, n)
	for j := range b {
		b[j] = byte(i*31 + j*7 + j>>8)
	}
	return b
}

func uidFor(i int) string { return fmt.Sprintf("1.2.826.0.1.3680043.10.1.%d", i) }

// collect opens the log in dir and returns what replay found.
func collect(t *testing.T, dir string, opts Options) (*Log, []Entry) {
	t.Helper()
	var got []Entry
	opts.Replay = func(e Entry) error { got = append(got, e); return nil }
	l, err := Open(dir, opts)
	if err != nil {
		t.Fatalf("Open: %v", err)
	}
	return l, got
}

func TestAppendReadReopenReplays(t *testing.T) {
	dir := t.TempDir()
	l, got := collect(t, dir, Options{})
	if len(got) != 0 {
		t.Fatalf("fresh log replayed %d records", len(got))
	}
	var pos []Pos
	for i := range 5 {
		p, err := l.Append(uidFor(i), payloadFor(i, 1000+i))
		if err != nil {
			t.Fatalf("Append %d: %v", i, err)
		}
		pos = append(pos, p)
	}
	for i, p := range pos {
		uid, b, err := l.ReadAll(p)
		if err != nil {
			t.Fatalf("ReadAll %v: %v", p, err)
		}
		if uid != uidFor(i) || !bytes.Equal(b, payloadFor(i, 1000+i)) {
			t.Fatalf("record %d read back as %q, %d bytes", i, uid, len(b))
		}
	}
	if err := l.Close(); err != nil {
		t.Fatal(err)
	}
	l, got = collect(t, dir, Options{})
	defer l.Close()
	if len(got) != 5 {
		t.Fatalf("replay found %d records, want 5", len(got))
	}
	for i, e := range got {
		if e.Pos != pos[i] || e.UID != uidFor(i) || e.Size != int64(1000+i) {
			t.Errorf("replayed %+v, want record %d at %v", e, i, pos[i])
		}
	}
	// From a mark: only the records after it.
	l.Close()
	l, got = collect(t, dir, Options{From: got[2].Next})
	defer l.Close()
	if len(got) != 2 || got[0].Pos != pos[3] {
		t.Fatalf("replay from the third record's end found %+v", got)
	}
	// Appending resumes after the last record.
	p, err := l.Append(uidFor(9), []byte("x"))
	if err != nil || p.Offset != got[1].Next.Offset {
		t.Fatalf("Append after reopen at %v, %v; want offset %d", p, err, got[1].Next.Offset)
	}
}

func TestBadUIDAndClosed(t *testing.T) {
	l, _ := collect(t, t.TempDir(), Options{})
	for _, uid := range []string{"", string(make([]byte, 65))} {
		if _, err := l.Append(uid, nil); !errors.Is(err, ErrBadUID) {
			t.Errorf("Append with a %d-byte UID: %v, want ErrBadUID", len(uid), err)
		}
	}
	l.Close()
	if _, err := l.Append("1.2", nil); !errors.Is(err, ErrClosed) {
		t.Errorf("Append after Close: %v, want ErrClosed", err)
	}
}

func TestSegmentsRollBySizeAndDayAndDeleteWhole(t *testing.T) {
	dir := t.TempDir()
	day := time.Date(2026, 12, 1, 23, 0, 0, 0, time.UTC)
	now := func() time.Time { return day }
	l, _ := collect(t, dir, Options{SegmentSize: 5000, Now: now})
	var pos []Pos
	for i := range 6 { // 2000-byte payloads: two records per 5000-byte segment
		p, err := l.Append(uidFor(i), payloadFor(i, 2000))
		if err != nil {
			t.Fatal(err)
		}
		pos = append(pos, p)
	}
	day = day.Add(2 * time.Hour) // next day
	p, err := l.Append(uidFor(6), payloadFor(6, 10))
	if err != nil {
		t.Fatal(err)
	}
	pos = append(pos, p)
	segs := l.Segments()
	want := []string{"20261201-0000000001.seg", "20261201-0000000002.seg", "20261201-0000000003.seg", "20261202-0000000004.seg"}
	if len(segs) != len(want) {
		t.Fatalf("segments %+v, want %v", segs, want)
	}
	for i, s := range segs {
		if s.Name != want[i] || s.Day != want[i][:8] {
			t.Errorf("segment %d is %+v, want %s", i, s, want[i])
		}
	}
	if pos[2].Segment != 2 || pos[2].Offset != 0 || pos[6].Segment != 4 {
		t.Errorf("positions %v", pos)
	}
	if err := l.DeleteSegment(4); !errors.Is(err, ErrActiveSegment) {
		t.Errorf("deleting the active segment: %v", err)
	}
	if err := l.DeleteSegment(1); err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(filepath.Join(dir, want[0])); !os.IsNotExist(err) {
		t.Errorf("deleted segment still on disk: %v", err)
	}
	if _, err := l.Read(pos[0]); !errors.Is(err, ErrNoSegment) {
		t.Errorf("read from a deleted segment: %v", err)
	}
	l.Close()
	l, got := collect(t, dir, Options{SegmentSize: 5000, Now: now})
	defer l.Close()
	if len(got) != 5 || got[0].Pos != pos[2] {
		t.Fatalf("replay after deletion found %d records from %v", len(got), got)
	}
}

func TestFormatVersion(t *testing.T) {
	cases := []struct {
		name, body string
		want       error
	}{
		{"the current version opens", "dwiaudit segment log\nversion 1\n", nil},
		{"a newer version is refused", "dwiaudit segment log\nversion 2\n", ErrNewerFormat},
		{"another file is not a log", "something else\n", ErrNotLog},
		{"a bad version line is not a log", "dwiaudit segment log\nversion x\n", ErrNotLog},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			if err := os.WriteFile(filepath.Join(dir, "FORMAT"), []byte(c.body), 0o600); err != nil {
				t.Fatal(err)
			}
			l, err := Open(dir, Options{})
			if !errors.Is(err, c.want) {
				t.Fatalf("Open: %v, want %v", err, c.want)
			}
			if err == nil {
				l.Close()
			}
			if c.want == ErrNewerFormat && !bytes.Contains([]byte(err.Error()), []byte("version 2, this dwiaudit reads up to version 1")) {
				t.Errorf("message does not say which versions: %v", err)
			}
		})
	}
	t.Run("segments without FORMAT are not a log", func(t *testing.T) {
		dir := t.TempDir()
		os.WriteFile(filepath.Join(dir, "20261201-0000000001.seg"), nil, 0o600)
		if _, err := Open(dir, Options{}); !errors.Is(err, ErrNotLog) {
			t.Fatalf("Open: %v, want ErrNotLog", err)
		}
	})
	t.Run("a fresh folder gets FORMAT", func(t *testing.T) {
		dir := t.TempDir()
		l, err := Open(dir, Options{})
		if err != nil {
			t.Fatal(err)
		}
		l.Close()
		b, err := os.ReadFile(filepath.Join(dir, "FORMAT"))
		if err != nil || string(b) != "dwiaudit segment log\nversion 1\n" {
			t.Fatalf("FORMAT is %q, %v", b, err)
		}
	})
}

func TestReadVerifiesTheChecksum(t *testing.T) {
	dir := t.TempDir()
	l, _ := collect(t, dir, Options{})
	defer l.Close()
	p, err := l.Append(uidFor(1), payloadFor(1, 500))
	if err != nil {
		t.Fatal(err)
	}
	name := filepath.Join(dir, l.Segments()[0].Name)
	f, err := os.OpenFile(name, os.O_RDWR, 0)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if _, err := f.WriteAt([]byte{0xff}, 300); err != nil {
		t.Fatal(err)
	}
	if _, err := l.Read(p); !errors.Is(err, ErrCorrupt) {
		t.Fatalf("Read of a damaged record: %v, want ErrCorrupt", err)
	}
}

// TestAMarkPastEverySegmentStillSeesNewRecords: when the mark's segment
// is gone (deleted whole), new records go to a later segment, so a replay
// from the mark finds them.
func TestAMarkPastEverySegmentStillSeesNewRecords(t *testing.T) {
	dir := t.TempDir()
	l, _ := collect(t, dir, Options{})
	if _, err := l.Append(uidFor(1), []byte("old")); err != nil {
		t.Fatal(err)
	}
	l.Close()
	mark := Pos{Segment: 7, Offset: 120}
	l, got := collect(t, dir, Options{From: mark})
	if len(got) != 0 {
		t.Fatalf("replay from %v found %+v", mark, got)
	}
	p, err := l.Append(uidFor(2), []byte("new"))
	if err != nil {
		t.Fatal(err)
	}
	if !mark.Less(p) {
		t.Fatalf("new record at %v, before the mark %v", p, mark)
	}
	l.Close()
	l, got = collect(t, dir, Options{From: mark})
	defer l.Close()
	if len(got) != 1 || got[0].Pos != p {
		t.Fatalf("replay from %v found %+v, want the new record at %v", mark, got, p)
	}
}
