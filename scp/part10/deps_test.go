package part10_test

import (
	"os/exec"
	"strings"
	"testing"
)

// TestPart10IsALeaf keeps the Part 10 codec a leaf: the acceptor, the store
// and the header readers all import it, so it may import nothing but the
// standard library, or the store would come to depend on the network layer.
func TestPart10IsALeaf(t *testing.T) {
	out, err := exec.Command("go", "list", "-deps", "-f", "{{if not .Standard}}{{.ImportPath}}{{end}}", "dwiaudit/scp/part10").CombinedOutput()
	if err != nil {
		t.Fatalf("go list: %v\n%s", err, out)
	}
	deps := strings.Fields(string(out))
	if len(deps) == 0 {
		t.Fatal("go list returned no packages, not even part10 itself")
	}
	for _, dep := range deps {
		if dep != "dwiaudit/scp/part10" {
			t.Errorf("scp/part10 depends on %s; it may use the standard library only", dep)
		}
	}
}
