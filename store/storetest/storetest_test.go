package storetest_test

import (
	"errors"
	"os"
	"path/filepath"
	"testing"

	"dwiaudit/store"
	"dwiaudit/store/storetest"
)

// noDescribe is a header reader for stores into which these tests put
// nothing.
func noDescribe(string) (store.Attributes, error) {
	return store.Attributes{}, errors.New("these tests store no instance")
}

func TestOpenGivesARealStoreInATemporaryFolder(t *testing.T) {
	s, opts := storetest.Open(t, store.Options{Describe: noDescribe})
	if s == nil || opts.Dir == "" {
		t.Fatalf("Open = %v, %+v", s, opts)
	}
	if _, err := os.Stat(filepath.Join(opts.Dir, "index.db")); err != nil {
		t.Errorf("no bbolt index in %s: %v", opts.Dir, err)
	}
}

func TestOpenClosesTheStoreWhenTheTestEnds(t *testing.T) {
	dir := t.TempDir()
	t.Run("a subtest opens the folder", func(t *testing.T) {
		if _, opts := storetest.Open(t, store.Options{Dir: dir, Describe: noDescribe}); opts.Dir != dir {
			t.Errorf("Dir = %s, want %s", opts.Dir, dir)
		}
	})
	// A second writable Open gets bbolt's file lock only once the first
	// store is closed; otherwise it fails with ErrLocked.
	s, err := store.Open(store.Options{Dir: dir, Describe: noDescribe})
	if err != nil {
		t.Fatalf("the folder is still held after the subtest ended: %v", err)
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
}
