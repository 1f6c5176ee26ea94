package seglog

import (
	"bytes"
	"errors"
	"os"
	"runtime"
	"strings"
	"testing"
)

// faultFS is the real disk, except that a write of a payload starting
// with failMarker waits for release and then fails.
type faultFS struct {
	OSFS
	release chan struct{}
}

var failMarker = []byte("FAIL")

var errInjected = errors.New("injected write failure")

func (f faultFS) OpenFile(name string, flag int) (File, error) {
	file, err := f.OSFS.OpenFile(name, flag)
	if err != nil {
		return nil, err
	}
	return faultFile{file, f.release}, nil
}

type faultFile struct {
	File
	release chan struct{}
}

func (f faultFile) WriteAt(p []byte, off int64) (int, error) {
	if bytes.HasPrefix(p, failMarker) {
		<-f.release
		return 0, errInjected
	}
	return f.File.WriteAt(p, off)
}

// TestAFailedWriteFailsEveryRecordBehindIt: a record written after a
// slower record that then fails must not be acknowledged, since replay
// stops at the hole; and the log refuses appends until reopened.
func TestAFailedWriteFailsEveryRecordBehindIt(t *testing.T) {
	dir := t.TempDir()
	fsys := faultFS{release: make(chan struct{})}
	l, err := Open(dir, Options{FS: fsys})
	if err != nil {
		t.Fatal(err)
	}
	first, err := l.Append(uidFor(0), []byte("before"))
	if err != nil {
		t.Fatal(err)
	}
	slow := make(chan error, 1)
	go func() { _, err := l.Append(uidFor(1), []byte("FAIL and slow")); slow <- err }()
	// Wait until the slow record has its offset, then append behind it.
	for {
		l.mu.Lock()
		reserved := l.active.reserved
		l.mu.Unlock()
		if reserved > first.Offset+recordSize(uidFor(0), 6) {
			break
		}
		runtime.Gosched()
	}
	behind := make(chan error, 1)
	go func() { _, err := l.Append(uidFor(2), []byte("behind")); behind <- err }()
	// The record behind is written but cannot be acknowledged yet.
	for {
		l.mu.Lock()
		n := len(l.active.early)
		l.mu.Unlock()
		if n == 1 {
			break
		}
		runtime.Gosched()
	}
	select {
	case err := <-behind:
		t.Fatalf("record behind an unfinished one answered early: %v", err)
	default:
	}
	close(fsys.release)
	if err := <-slow; !errors.Is(err, errInjected) {
		t.Fatalf("failed write answered %v", err)
	}
	if err := <-behind; !errors.Is(err, errInjected) {
		t.Fatalf("record behind the failed write answered %v, want the failure", err)
	}
	if _, err := l.Append(uidFor(3), []byte("later")); !errors.Is(err, errInjected) {
		t.Fatalf("Append after the failure: %v, want the sticky failure", err)
	}
	l.Close()

	l, got := collect(t, dir, Options{})
	defer l.Close()
	if len(got) != 1 || got[0].UID != uidFor(0) {
		t.Fatalf("after reopening, replay found %+v, want only the first record", got)
	}
	if _, err := os.Stat(dir); err != nil {
		t.Fatal(err)
	}
	if _, err := l.Append(uidFor(4), []byte("again")); err != nil {
		t.Fatalf("Append after reopening: %v", err)
	}
}

// readFailFS fails every read of a segment.
type readFailFS struct{ OSFS }

func (f readFailFS) OpenFile(name string, flag int) (File, error) {
	file, err := f.OSFS.OpenFile(name, flag)
	if err != nil || !strings.HasSuffix(name, segSuffix) {
		return file, err
	}
	return readFailFile{file}, nil
}

type readFailFile struct{ File }

func (readFailFile) ReadAt([]byte, int64) (int, error) { return 0, errInjected }

// TestAReadErrorAtReplayIsNotATornTail: Open fails and cuts nothing when
// a segment cannot be read, rather than taking the unreadable record for
// a torn tail.
func TestAReadErrorAtReplayIsNotATornTail(t *testing.T) {
	dir, seg, _, whole := tornFixture(t, []int{100, 200})
	if _, err := Open(dir, Options{FS: readFailFS{}}); !errors.Is(err, errInjected) {
		t.Fatalf("Open with failing reads: %v, want the read error", err)
	}
	if b, err := os.ReadFile(seg); err != nil || !bytes.Equal(b, whole) {
		t.Fatalf("segment changed by a failed Open: %d bytes of %d, %v", len(b), len(whole), err)
	}
}
