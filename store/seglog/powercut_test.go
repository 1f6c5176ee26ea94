package seglog_test

import (
	"bytes"
	"errors"
	"fmt"
	"sync"
	"testing"
	"time"

	"dwiaudit/store/seglog"
	"dwiaudit/store/seglog/strictfs"
)

const logDir = "/data/log"

// attempt is one record some writer tried to append.
type attempt struct {
	uid     string
	payload []byte
}

func attemptFor(w, i int) attempt {
	uid := fmt.Sprintf("1.2.826.0.1.3680043.10.2.%d.%d", w, i)
	n := 50 + (w*37+i*101)%400
	b := make([]byte, n)
	for j := range b {
		b[j] = byte(w*13 + i*7 + j)
	}
	return attempt{uid, b}
}

// powerCutRun runs writers concurrent appenders until the FS cuts the
// power after cut operations, then restarts the machine, replays and checks
// that every acknowledged record is there, byte for byte, and that replay
// found nothing that was never appended.
func powerCutRun(t *testing.T, seed uint64, cut, writers, perWriter int) (acknowledged int) {
	t.Helper()
	fsys := strictfs.New(seed)
	day := time.Date(2026, 12, 2, 10, 0, 0, 0, time.UTC)
	opts := seglog.Options{FS: fsys, SegmentSize: 2500, Now: func() time.Time { return day }}
	l, err := seglog.Open(logDir, opts)
	if err != nil {
		t.Fatalf("Open: %v", err)
	}
	fsys.CutAfter(cut)

	var mu sync.Mutex
	acked := map[string]seglog.Pos{}
	attempted := map[string][]byte{}
	var wg sync.WaitGroup
	for w := range writers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range perWriter {
				a := attemptFor(w, i)
				mu.Lock()
				attempted[a.uid] = a.payload
				mu.Unlock()
				p, err := l.Append(a.uid, a.payload)
				if err != nil {
					if !errors.Is(err, strictfs.ErrPowerCut) {
						t.Errorf("Append failed with %v, not the power cut", err)
					}
					return
				}
				mu.Lock()
				acked[a.uid] = p
				mu.Unlock()
			}
		}()
	}
	wg.Wait()
	l.Close()

	after := fsys.Restart()
	var got []seglog.Entry
	opts.FS = after
	opts.Replay = func(e seglog.Entry) error { got = append(got, e); return nil }
	l2, err := seglog.Open(logDir, opts)
	if err != nil {
		t.Fatalf("cut %d: Open after the cut: %v", cut, err)
	}
	defer l2.Close()
	seen := map[string]seglog.Pos{}
	for i, e := range got {
		if i > 0 && !got[i-1].Pos.Less(e.Pos) {
			t.Fatalf("cut %d: replay out of order: %v then %v", cut, got[i-1].Pos, e.Pos)
		}
		want, ok := attempted[e.UID]
		if !ok {
			t.Fatalf("cut %d: replay found %q, never appended", cut, e.UID)
		}
		if _, dup := seen[e.UID]; dup {
			t.Fatalf("cut %d: %q replayed twice", cut, e.UID)
		}
		seen[e.UID] = e.Pos
		uid, b, err := l2.ReadAll(e.Pos)
		if err != nil || uid != e.UID || !bytes.Equal(b, want) {
			t.Fatalf("cut %d: %q at %v read back as %q (%d bytes), %v", cut, e.UID, e.Pos, uid, len(b), err)
		}
	}
	for uid, p := range acked {
		if q, ok := seen[uid]; !ok || q != p {
			t.Fatalf("cut %d: acknowledged %q at %v lost (replay has %v, %v)", cut, uid, p, q, ok)
		}
	}

	// The log goes on after recovery, and a clean second restart replays
	// the same records plus the new one.
	p, err := l2.Append("1.2.3.4", []byte("after the cut"))
	if err != nil {
		t.Fatalf("cut %d: Append after recovery: %v", cut, err)
	}
	l2.Close()
	again := after.Restart()
	var got2 []seglog.Entry
	opts.FS = again
	opts.Replay = func(e seglog.Entry) error { got2 = append(got2, e); return nil }
	l3, err := seglog.Open(logDir, opts)
	if err != nil {
		t.Fatalf("cut %d: second Open: %v", cut, err)
	}
	l3.Close()
	if len(got2) != len(got)+1 || got2[len(got)].Pos != p {
		t.Fatalf("cut %d: second replay has %d records, want %d ending at %v", cut, len(got2), len(got)+1, p)
	}
	for i := range got {
		if got2[i] != got[i] {
			t.Fatalf("cut %d: second replay differs at %d: %+v, %+v", cut, i, got2[i], got[i])
		}
	}
	return len(acked)
}

// TestPowerCutLosesNothingAcknowledged cuts the power at every operation
// count from the first write to past the last, with four concurrent
// writers, over several seeds (which decide which unsynced writes
// survive, whole or torn). A run of 48 records takes about 150 operations
// (two writes per record, the shared flushes, six segments); the last cut
// points must find every record acknowledged, or the range stopped short.
func TestPowerCutLosesNothingAcknowledged(t *testing.T) {
	const writers, perWriter, lastCut = 4, 12, 220
	for seed := uint64(1); seed <= 4; seed++ {
		for cut := 1; cut <= lastCut; cut++ {
			n := powerCutRun(t, seed*1000+uint64(cut), cut, writers, perWriter)
			if t.Failed() {
				return
			}
			if cut == lastCut && n != writers*perWriter {
				t.Fatalf("seed %d: the last cut point still cut the run short (%d of %d acknowledged)", seed, n, writers*perWriter)
			}
		}
	}
}

// TestGroupCommitSharesFlushes: concurrent writers through the strict FS
// need fewer fdatasyncs than records, and each Append is durable alone.
func TestGroupCommitSharesFlushes(t *testing.T) {
	fsys := strictfs.New(7)
	l, err := seglog.Open(logDir, seglog.Options{FS: fsys})
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	var wg sync.WaitGroup
	for w := range 8 {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range 50 {
				a := attemptFor(w, i)
				if _, err := l.Append(a.uid, a.payload); err != nil {
					t.Error(err)
					return
				}
			}
		}()
	}
	wg.Wait()
	st := l.Stats()
	if st.Appends != 400 {
		t.Fatalf("%d appends acknowledged, want 400", st.Appends)
	}
	if st.Flushes == 0 || st.Flushes >= st.Appends {
		t.Fatalf("%d flushes for %d appends: group commit shared none", st.Flushes, st.Appends)
	}
	t.Logf("%d appends, %d flushes", st.Appends, st.Flushes)
}

// TestAPowerCutDuringRecoveryLosesNothing cuts the power a second time
// while Open is cutting off the torn tail of the first cut (its
// truncation and fdatasync), then recovers again: every record
// acknowledged before the first cut is still there.
func TestAPowerCutDuringRecoveryLosesNothing(t *testing.T) {
	day := time.Date(2026, 12, 2, 10, 0, 0, 0, time.UTC)
	for seed := uint64(1); seed <= 40; seed++ {
		for second := 0; second <= 2; second++ {
			fsys := strictfs.New(seed)
			opts := seglog.Options{FS: fsys, SegmentSize: 1 << 20, Now: func() time.Time { return day }}
			l, err := seglog.Open(logDir, opts)
			if err != nil {
				t.Fatal(err)
			}
			var acked []seglog.Pos
			for i := range 6 {
				a := attemptFor(0, i)
				p, err := l.Append(a.uid, a.payload)
				if err != nil {
					t.Fatal(err)
				}
				acked = append(acked, p)
			}
			// Unacknowledged writes at the tail: written, never flushed.
			fsys.CutAfter(2) // the next record's two writes, then the cut
			for i := 6; i < 9; i++ {
				a := attemptFor(0, i)
				l.Append(a.uid, a.payload)
			}
			l.Close()

			first := fsys.Restart()
			first.CutAfter(second) // the recovery's truncation, flush, ...
			opts.FS = first
			if l, err := seglog.Open(logDir, opts); err == nil {
				l.Close()
			} else if !errors.Is(err, strictfs.ErrPowerCut) {
				t.Fatalf("seed %d: recovery failed with %v, not the power cut", seed, err)
			}

			opts.FS = first.Restart()
			var got []seglog.Entry
			opts.Replay = func(e seglog.Entry) error { got = append(got, e); return nil }
			l, err = seglog.Open(logDir, opts)
			if err != nil {
				t.Fatalf("seed %d, second cut after %d: Open: %v", seed, second, err)
			}
			l.Close()
			opts.Replay = nil
			if len(got) < len(acked) {
				t.Fatalf("seed %d, second cut after %d: %d records replayed, %d were acknowledged", seed, second, len(got), len(acked))
			}
			for i, p := range acked {
				if got[i].Pos != p || got[i].UID != attemptFor(0, i).uid {
					t.Fatalf("seed %d, second cut after %d: record %d is %+v, want %v", seed, second, i, got[i], p)
				}
			}
		}
	}
}
