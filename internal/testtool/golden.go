package testtool

import (
	"bytes"
	"flag"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// update is the -update flag of every test binary that imports testtool:
// `go test ./scp/pdu -update` rewrites that package's golden files from
// what its tests produce instead of comparing with them.
var update = flag.Bool("update", false, "rewrite golden files in testdata/ from what the tests produce")

// Update reports whether the tests run with -update, for a test that
// writes golden files of its own making (captures from an outside tool).
func Update() bool { return *update }

// Golden compares got with the golden file at path. With -update it
// writes got there first (and the folders it needs). A missing or
// different file fails the test with the command that regenerates it.
func Golden(t testing.TB, path string, got []byte) {
	t.Helper()
	if *update {
		if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, got, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v; %s", err, regenerate(t))
		return
	}
	if !bytes.Equal(got, want) {
		t.Errorf("%s differs from what the test produced (%d bytes, %d in the file); if the change is deliberate, %s",
			path, len(got), len(want), regenerate(t))
	}
}

// regenerate says how to rewrite the golden files of the running test.
func regenerate(t testing.TB) string {
	top, _, _ := strings.Cut(t.Name(), "/")
	return fmt.Sprintf("regenerate with `go test -run '^%s$' -update` in this package's folder", top)
}
