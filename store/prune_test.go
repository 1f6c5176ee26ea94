package store

import (
	"errors"
	"os"
	"path/filepath"
	"testing"
	"time"
)

func TestPrune(t *testing.T) {
	const retention = 30 * 24 * time.Hour
	t0 := time.Date(2025, 1, 10, 8, 0, 0, 0, time.UTC)
	clock := newTestClock(t0)
	s, opts := newTestStore(t, func(o *Options) {
		o.Now = clock.Now
		o.Retention = retention
	})
	old := []testInstance{
		{SOP: uid(30, 1), Study: uid(30), Series: uid(30, 1), Payload: 1000},
		{SOP: uid(30, 2), Study: uid(30), Series: uid(30, 1), Payload: 3000},
	}
	var oldRefs []InstanceRef
	var oldBytes int64
	for _, ti := range old {
		ref := mustPut(t, s, ti)
		oldRefs = append(oldRefs, ref)
		in, _ := s.Instance(ti.SOP)
		oldBytes += in.Size
	}
	clock.Advance(20 * 24 * time.Hour)
	recent := testInstance{SOP: uid(31, 1), Study: uid(31), Series: uid(31, 1), Payload: 1000}
	recentRef := mustPut(t, s, recent)
	clock.Advance(11 * 24 * time.Hour) // old ones are 31 days old, the recent one 11

	rep, err := s.Prune(t.Context())
	if err != nil {
		t.Fatal(err)
	}
	if rep.FilesRemoved != 2 || rep.BytesFreed != oldBytes || rep.Marked != 2 {
		t.Errorf("report = %+v, want 2 files, %d bytes", rep, oldBytes)
	}

	t.Run("old files are removed but their records stay, marked pruned", func(t *testing.T) {
		for i, ti := range old {
			if _, err := os.Stat(filepath.Join(opts.Dir, oldRefs[i].Path)); !errors.Is(err, os.ErrNotExist) {
				t.Errorf("old file still there: %v", err)
			}
			in, err := s.Instance(ti.SOP)
			if err != nil || !in.Pruned || in.Missing {
				t.Errorf("Instance = %+v, %v; want Pruned", in, err)
			}
			if _, err := s.OpenInstance(ti.SOP); !errors.Is(err, errPruned) {
				t.Errorf("OpenInstance = %v, want ErrPruned", err)
			}
		}
		if sr, err := s.Series(uid(30, 1)); err != nil || sr.Instances != 2 {
			t.Errorf("Series = %+v, %v; want its record kept", sr, err)
		}
	})
	t.Run("their empty series and study folders are removed", func(t *testing.T) {
		if _, err := os.Stat(filepath.Join(opts.Dir, "instances", uid(30))); !errors.Is(err, os.ErrNotExist) {
			t.Errorf("study folder left: %v", err)
		}
	})
	t.Run("recent files are kept", func(t *testing.T) {
		if _, err := os.Stat(filepath.Join(opts.Dir, recentRef.Path)); err != nil {
			t.Error(err)
		}
		rc, err := s.OpenInstance(recent.SOP)
		if err != nil {
			t.Fatal(err)
		}
		rc.Close()
	})
	t.Run("a second Prune finds nothing to do", func(t *testing.T) {
		rep, err := s.Prune(t.Context())
		if err != nil || rep != (PruneReport{}) {
			t.Errorf("Prune = %+v, %v", rep, err)
		}
	})
	t.Run("an old instance sent again is restored as a new version", func(t *testing.T) {
		ref := mustPut(t, s, old[0])
		if ref.Duplicate != DupRestored || ref.Version != 2 {
			t.Errorf("ref = %+v, want version 2 restored", ref)
		}
		if _, err := os.Stat(filepath.Join(opts.Dir, ref.Path)); err != nil {
			t.Error(err)
		}
	})
	t.Run("a file gone past its retention is marked pruned by Reconcile, not missing", func(t *testing.T) {
		if err := os.Remove(filepath.Join(opts.Dir, recentRef.Path)); err != nil {
			t.Fatal(err)
		}
		clock.Advance(30 * 24 * time.Hour)
		rep, err := s.Reconcile(t.Context())
		if err != nil || len(rep.MissingFiles) != 0 {
			t.Errorf("Reconcile = %+v, %v", rep, err)
		}
		if in, _ := s.Instance(recent.SOP); !in.Pruned {
			t.Errorf("Instance = %+v, want Pruned", in)
		}
	})
}

func TestPruneWithoutRetentionKeepsEverything(t *testing.T) {
	clock := newTestClock(time.Date(2025, 1, 10, 8, 0, 0, 0, time.UTC))
	s, _ := newTestStore(t, func(o *Options) { o.Now = clock.Now })
	mustPut(t, s, testInstance{SOP: uid(32, 1), Payload: 100})
	clock.Advance(10 * 365 * 24 * time.Hour)
	before := storeFiles(t, s)
	if rep, err := s.Prune(t.Context()); err != nil || rep != (PruneReport{}) {
		t.Errorf("Prune = %+v, %v", rep, err)
	}
	sameFiles(t, before, storeFiles(t, s))
}

func TestPruneSeesOldFilesIndexedAfterIt(t *testing.T) {
	const retention = 24 * time.Hour
	clock := newTestClock(time.Date(2025, 6, 1, 0, 0, 0, 0, time.UTC))
	s, opts := newTestStore(t, func(o *Options) {
		o.Now = clock.Now
		o.Retention = retention
		o.Describe = describeAny
	})
	if _, err := s.Prune(t.Context()); err != nil { // sets the pruned-through mark
		t.Fatal(err)
	}
	// A file from long ago turns up by hand; Reconcile indexes it with its
	// modification time, which is before the mark.
	ti := testInstance{SOP: uid(33, 1), Study: uid(33), Series: uid(33, 1), Payload: 100}
	abs := filepath.Join(opts.Dir, "instances", ti.Study, ti.Series, ti.SOP+".dcm")
	os.MkdirAll(filepath.Dir(abs), 0o700)
	if err := os.WriteFile(abs, handMadePart10(ti), 0o600); err != nil {
		t.Fatal(err)
	}
	long := time.Date(2024, 1, 1, 0, 0, 0, 0, time.UTC)
	if err := os.Chtimes(abs, long, long); err != nil {
		t.Fatal(err)
	}
	if rep, err := s.Reconcile(t.Context()); err != nil || len(rep.Reindexed) != 1 {
		t.Fatalf("Reconcile = %+v, %v", rep, err)
	}
	rep, err := s.Prune(t.Context())
	if err != nil || rep.FilesRemoved != 1 {
		t.Errorf("Prune = %+v, %v; want the old file removed", rep, err)
	}
}
