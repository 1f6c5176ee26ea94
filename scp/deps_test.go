package scp_test

import (
	"os/exec"
	"strings"
	"testing"
)

// TestNetworkLayerImportsNoHigherLayer keeps the design's arrows pointing
// one way: the DICOM network layer knows nothing about storage, auditing
// or rules (DESIGN.md, package map).
func TestNetworkLayerImportsNoHigherLayer(t *testing.T) {
	out, err := exec.Command("go", "list", "-deps", "-f", "{{.ImportPath}}", "dwiaudit/scp/...").CombinedOutput()
	if err != nil {
		t.Fatalf("go list: %v\n%s", err, out)
	}
	forbidden := []string{"dwiaudit/store", "dwiaudit/audit", "dwiaudit/rules", "dwiaudit/cmd"}
	deps := strings.Fields(string(out))
	if len(deps) == 0 {
		t.Fatal("go list returned no packages")
	}
	for _, dep := range deps {
		for _, f := range forbidden {
			if dep == f || strings.HasPrefix(dep, f+"/") {
				t.Errorf("a package under dwiaudit/scp depends on %s", dep)
			}
		}
	}
}
