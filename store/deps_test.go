package store_test

import (
	"os/exec"
	"strings"
	"testing"
)

// codecPkg is the one package of ours the store may import: the Part 10
// codec, a leaf of the standard library alone (scp/part10's deps test).
const codecPkg = "dwiaudit/scp/part10"

// TestStoreImportsOnlyStdlibBboltAndPart10 keeps the arrows pointing one
// way: store is below scp, audit, rules and cmd, and depends on nothing but
// the standard library, bbolt and the Part 10 codec (DEVELOPERS.md, Layout).
func TestStoreImportsOnlyStdlibBboltAndPart10(t *testing.T) {
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
		ours := imp == codecPkg || imp == "dwiaudit/store" || strings.HasPrefix(imp, "dwiaudit/store/")
		if strings.HasPrefix(imp, "dwiaudit/") && !ours || !std && !bbolt {
			t.Errorf("store imports %s; only the standard library, bbolt and %s are allowed", imp, codecPkg)
		}
	}

	out, err = exec.Command("go", "list", "-deps", "-f", "{{.ImportPath}}", "dwiaudit/store/...").CombinedOutput()
	if err != nil {
		t.Fatalf("go list -deps: %v\n%s", err, out)
	}
	for _, dep := range strings.Fields(string(out)) {
		if dep == codecPkg {
			continue
		}
		for _, f := range []string{"dwiaudit/scp", "dwiaudit/audit", "dwiaudit/rules", "dwiaudit/cmd"} {
			if dep == f || strings.HasPrefix(dep, f+"/") {
				t.Errorf("store depends on %s", dep)
			}
		}
	}
}
