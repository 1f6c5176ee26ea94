package metrics_test

import (
	"os/exec"
	"strings"
	"testing"
)

// TestOnlyTheMetricsPackageImportsPrometheus keeps Prometheus out of the
// audit engine, the rules, the store and the network layer: they offer
// small hooks (audit.Observer, scp.Server.OnAssociation) and this
// package is the one that turns them into collectors (DESIGN.md).
func TestOnlyTheMetricsPackageImportsPrometheus(t *testing.T) {
	for _, pkg := range []string{"dwiaudit/audit", "dwiaudit/rules/...", "dwiaudit/store/...", "dwiaudit/scp/..."} {
		out, err := exec.Command("go", "list", "-deps", "-f", "{{.ImportPath}}", pkg).CombinedOutput()
		if err != nil {
			t.Fatalf("go list %s: %v\n%s", pkg, err, out)
		}
		deps := strings.Fields(string(out))
		if len(deps) == 0 {
			t.Fatalf("go list %s returned no packages", pkg)
		}
		for _, dep := range deps {
			if strings.HasPrefix(dep, "github.com/prometheus/") || dep == "dwiaudit/audit/metrics" {
				t.Errorf("%s depends on %s", pkg, dep)
			}
		}
	}
}
