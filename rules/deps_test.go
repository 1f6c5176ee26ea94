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
// line, the pipeline in package audit that runs them, or DICOM files.
//
// Directly, rules import only audit/dwi, audit/analysis and audit/adc.
// Through them, nothing of dwiaudit/store, dwiaudit/cmd, package
// dwiaudit/audit itself, the readers in dwiaudit/audit/header or anything
// under dwiaudit/scp may come in, and no DICOM library: reading files is
// audit/header's, and the model those packages share reads none.
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
	deps := list(`{{join .Deps " "}}`)
	if !slices.Contains(deps, "dwiaudit/audit/dwi") {
		t.Fatalf("go list -deps of rules lacks dwiaudit/audit/dwi: %v", deps)
	}
	for _, dep := range deps {
		if forbiddenDep(dep) {
			t.Errorf("package rules depends on %s", dep)
		}
	}
}

// forbiddenDep says whether package rules may not depend on dep.
func forbiddenDep(dep string) bool {
	under := func(p string) bool { return dep == p || strings.HasPrefix(dep, p+"/") }
	return dep == "dwiaudit/audit" || under("dwiaudit/audit/header") ||
		under("dwiaudit/scp") || under("dwiaudit/store") || under("dwiaudit/cmd") ||
		// The DICOM libraries of go.mod and the other widely used Go one.
		under("github.com/suyashkumar/dicom") || under("github.com/grailbio/go-dicom")
}

func TestForbiddenDepCatchesTheDICOMLibrariesAndTheNetwork(t *testing.T) {
	for dep, want := range map[string]bool{
		"github.com/suyashkumar/dicom":         true,
		"github.com/suyashkumar/dicom/pkg/tag": true,
		"github.com/grailbio/go-dicom":         true,
		"dwiaudit/scp":                         true,
		"dwiaudit/scp/part10":                  true,
		"dwiaudit/audit/header":                true,
		"dwiaudit/audit":                       true,
		"dwiaudit/audit/dwi":                   false,
		"dwiaudit/audit/adc":                   false,
		"dwiaudit/scpx":                        false,
		"math":                                 false,
	} {
		if got := forbiddenDep(dep); got != want {
			t.Errorf("forbiddenDep(%q) = %v, want %v", dep, got, want)
		}
	}
}
