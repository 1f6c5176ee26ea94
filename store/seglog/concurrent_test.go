package seglog

import (
	"bytes"
	"sync"
	"testing"
)

// TestConcurrentAppendsReadsAndRolls runs eight writers on the real disk
// with a small segment size (so segments roll under load) while readers
// read back every acknowledged record; then a reopen replays all of them
// in order. Run with -race.
func TestConcurrentAppendsReadsAndRolls(t *testing.T) {
	const writers, perWriter = 8, 40
	dir := t.TempDir()
	l, err := Open(dir, Options{SegmentSize: 64 << 10})
	if err != nil {
		t.Fatal(err)
	}
	type ack struct {
		i int
		p Pos
	}
	acks := make(chan ack, writers*perWriter)
	var wg sync.WaitGroup
	for w := range writers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for j := range perWriter {
				i := w*perWriter + j
				p, err := l.Append(uidFor(i), payloadFor(i, 3000+i))
				if err != nil {
					t.Errorf("Append %d: %v", i, err)
					return
				}
				acks <- ack{i, p}
			}
		}()
	}
	var rg sync.WaitGroup
	byPos := map[Pos]int{}
	var mu sync.Mutex
	rg.Add(1)
	go func() { // reader: every acknowledged record is readable at once
		defer rg.Done()
		for a := range acks {
			uid, b, err := l.ReadAll(a.p)
			if err != nil || uid != uidFor(a.i) || !bytes.Equal(b, payloadFor(a.i, 3000+a.i)) {
				t.Errorf("record %d at %v read back as %q, %d bytes, %v", a.i, a.p, uid, len(b), err)
			}
			mu.Lock()
			byPos[a.p] = a.i
			mu.Unlock()
		}
	}()
	wg.Wait()
	close(acks)
	rg.Wait()
	if len(l.Segments()) < 10 {
		t.Errorf("%d segments: the test did not roll under load", len(l.Segments()))
	}
	if err := l.Close(); err != nil {
		t.Fatal(err)
	}
	l, got := collect(t, dir, Options{SegmentSize: 64 << 10})
	defer l.Close()
	if len(got) != writers*perWriter {
		t.Fatalf("replay found %d records, want %d", len(got), writers*perWriter)
	}
	for k, e := range got {
		i, ok := byPos[e.Pos]
		if !ok || e.UID != uidFor(i) {
			t.Fatalf("replayed %+v, not an acknowledged record", e)
		}
		if k > 0 && !got[k-1].Pos.Less(e.Pos) {
			t.Fatalf("replay out of order at %v", e.Pos)
		}
	}
}
