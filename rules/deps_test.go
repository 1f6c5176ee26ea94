package rules_test

import (
	"os/exec"
	"slices"
	"strings"
	"testing"
)

// TestRulesImportOnlyTheLeafAuditPackages keeps the design's arrows
// pointing one way (DESIGN.md, package map): rules judge the model and
// the computation and know nothing of storage, the network, the command
// line, or the pipeline in package audit that runs them.
//
// Directly, rules import only audit/dwi, audit/analysis and audit/adc.
// Through them, nothing of dwiaudit/store, dwiaudit/cmd, package
// dwiaudit/audit itself or the network layer dwiaudit/scp may come in;
// scp/part10, the PS3.10 file-meta codec audit/dwi reads files with
// (itself importing nothing of ours), is the one leaf under scp allowed.
func TestRulesImportOnlyTheLeafAuditPackages(t *testing.T) {
	list := func(format string) []string {
		t.Helper()
		out, err := exec.Command("go", "list", "-f", format, "dwiaudit/rules").CombinedOutput()
		if err != nil {
			t.Fatalf("go list: %v\n%s", err, out)
		}
		return strings.Fields(string(out))
	}
	direct := list(`{{join .Imports " "}}`)
	if len(direct) == 0 {
		t.Fatal("go list returned no imports")
	}
	leaves := []string{"dwiaudit/audit/dwi", "dwiaudit/audit/analysis", "dwiaudit/audit/adc"}
	for _, imp := range direct {
		if strings.HasPrefix(imp, "dwiaudit/") && !slices.Contains(leaves, imp) {
			t.Errorf("package rules imports %s; only %v are allowed", imp, leaves)
		}
	}
	for _, dep := range list(`{{join .Deps " "}}`) {
		forbidden := dep == "dwiaudit/audit" || dep == "dwiaudit/scp" ||
			strings.HasPrefix(dep, "dwiaudit/store") || strings.HasPrefix(dep, "dwiaudit/cmd") ||
			(strings.HasPrefix(dep, "dwiaudit/scp/") && dep != "dwiaudit/scp/part10")
		if forbidden {
			t.Errorf("package rules depends on %s", dep)
		}
	}
}
