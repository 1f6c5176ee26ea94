// Package storetest opens real stores (bbolt index, instance files) for the
// tests of the packages above store, in the way net/http/httptest serves
// tests of net/http. It imports only store, so it keeps the store's place
// at the bottom of the module. It is imported by tests only.
//
// The store's own tests cannot import it (Go forbids the cycle) and keep
// their newTestStore, which adds a test clock and hooks.
package storetest

import (
	"testing"

	"dwiaudit/store"
)

// Open opens a store with opts in a fresh temporary folder, or in opts.Dir
// when it is set (to reopen a folder, read-only for instance), and closes
// it when the test ends. A store that does not open, or does not close
// cleanly at the end, fails the test. The options used, Dir filled, are
// returned for a test that reopens the folder.
func Open(t testing.TB, opts store.Options) (*store.Store, store.Options) {
	t.Helper()
	if opts.Dir == "" {
		opts.Dir = t.TempDir()
	}
	s, err := store.Open(opts)
	if err != nil {
		t.Fatalf("store.Open %s: %v", opts.Dir, err)
	}
	t.Cleanup(func() {
		if err := s.Close(); err != nil {
			t.Errorf("store.Close %s: %v", opts.Dir, err)
		}
	})
	return s, opts
}
