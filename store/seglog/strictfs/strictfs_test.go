package strictfs

import (
	"bytes"
	"errors"
	"os"
	"testing"
)

func write(t *testing.T, f *FS, name string, data []byte, sync bool) {
	t.Helper()
	h, err := f.OpenFile(name, os.O_RDWR|os.O_CREATE)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := h.WriteAt(data, 0); err != nil {
		t.Fatal(err)
	}
	if sync {
		if err := h.Datasync(); err != nil {
			t.Fatal(err)
		}
	}
}

func contents(t *testing.T, f *FS, name string) ([]byte, bool) {
	t.Helper()
	h, err := f.OpenFile(name, os.O_RDONLY)
	if errors.Is(err, os.ErrNotExist) {
		return nil, false
	}
	if err != nil {
		t.Fatal(err)
	}
	n, _ := h.Size()
	b := make([]byte, n)
	h.ReadAt(b, 0)
	return b, true
}

// TestTheCutForgetsWhatWasNotSynced checks the file system the power-cut
// tests rely on: synced data in a synced name always survives, a name
// never synced never does, and unsynced data survives only sometimes
// (whole, torn or not at all) over many seeds.
func TestTheCutForgetsWhatWasNotSynced(t *testing.T) {
	lost, kept, torn := 0, 0, 0
	for seed := range uint64(200) {
		f := New(seed)
		if err := f.MkdirAll("/d"); err != nil {
			t.Fatal(err)
		}
		write(t, f, "/d/synced", []byte("durable"), true)
		if err := f.SyncDir("/d"); err != nil {
			t.Fatal(err)
		}
		write(t, f, "/d/unnamed", []byte("data synced, name not"), true)
		h, _ := f.OpenFile("/d/synced", os.O_RDWR)
		h.WriteAt([]byte("-and-more-unsynced"), 7)

		r := f.Restart()
		if _, ok := contents(t, r, "/d/unnamed"); ok {
			t.Fatalf("seed %d: a file whose name was never synced survived the cut", seed)
		}
		b, ok := contents(t, r, "/d/synced")
		if !ok || !bytes.HasPrefix(b, []byte("durable")) {
			t.Fatalf("seed %d: synced data lost: %q, %v", seed, b, ok)
		}
		switch {
		case len(b) == len("durable"):
			lost++
		case bytes.Equal(b, []byte("durable-and-more-unsynced")):
			kept++
		default:
			torn++
		}
		if _, err := h.WriteAt([]byte("x"), 0); !errors.Is(err, ErrPowerCut) {
			t.Fatalf("seed %d: a write after the cut: %v", seed, err)
		}
	}
	if lost == 0 || kept == 0 || torn == 0 {
		t.Fatalf("unsynced write over 200 cuts: lost %d, kept %d, torn %d; want each at least once", lost, kept, torn)
	}
}

// TestCutAfterLetsNOperationsThrough: CutAfter(n) lets n mutating
// operations succeed and cuts the power at the next; everything after it
// fails.
func TestCutAfterLetsNOperationsThrough(t *testing.T) {
	f := New(1)
	f.MkdirAll("/d")
	h, err := f.OpenFile("/d/a", os.O_RDWR|os.O_CREATE) // operation 0: before arming
	if err != nil {
		t.Fatal(err)
	}
	f.CutAfter(2)
	if _, err := h.WriteAt([]byte("1"), 0); err != nil {
		t.Fatalf("first operation: %v", err)
	}
	if err := h.Datasync(); err != nil {
		t.Fatalf("second operation: %v", err)
	}
	if _, err := h.WriteAt([]byte("2"), 1); !errors.Is(err, ErrPowerCut) {
		t.Fatalf("third operation: %v, want ErrPowerCut", err)
	}
	if _, err := h.Size(); !errors.Is(err, ErrPowerCut) {
		t.Fatalf("after the cut: %v, want ErrPowerCut", err)
	}
}
