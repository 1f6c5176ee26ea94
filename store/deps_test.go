package store_test

import (
	"os/exec"
	"strings"
	"testing"
)

// TestStoreImportsOnlyStdlibAndBbolt keeps the design's arrows pointing one
// way: store is below scp, audit, rules and cmd, and depends on nothing but
// the standard library and bbolt (DESIGN.md, package map).
func TestStoreImportsOnlyStdlibAndBbolt(t *testing.T) {
	out, err := exec.Command("go", "list", "-f", `{{join .Imports "\n"}}`, "dwiaudit/store/...").CombinedOutput()
	if err != nil {
		t.Fatalf("go list: %v\n%s", err, out)
	}
	imports := strings.Fields(string(out))
	if len(imports) == 0 {
		t.Fatal("go list returned no imports")
	}
	for _, imp := range imports {
		std := !strings.Contains(strings.Split(imp, "/")[0], ".")
		bbolt := imp == "go.etcd.io/bbolt" || strings.HasPrefix(imp, "go.etcd.io/bbolt/")
		if !std && !bbolt {
			t.Errorf("store imports %s; only the standard library and bbolt are allowed", imp)
		}
	}

	out, err = exec.Command("go", "list", "-deps", "-f", "{{.ImportPath}}", "dwiaudit/store/...").CombinedOutput()
	if err != nil {
		t.Fatalf("go list -deps: %v\n%s", err, out)
	}
	for _, dep := range strings.Fields(string(out)) {
		for _, f := range []string{"dwiaudit/scp", "dwiaudit/audit", "dwiaudit/rules", "dwiaudit/cmd"} {
			if dep == f || strings.HasPrefix(dep, f+"/") {
				t.Errorf("store depends on %s", dep)
			}
		}
	}
}
