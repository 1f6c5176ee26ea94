package deploy

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"dwiaudit/rules"
)

// The operator documentation (README.md) must keep up with the rules
// and the alerts: a rule or an alert it does not describe is one an
// operator meets without explanation.
func TestTheReadmeDescribesEveryRuleAndEveryAlert(t *testing.T) {
	b, err := os.ReadFile(filepath.Join("..", "README.md"))
	if err != nil {
		t.Fatal(err)
	}
	readme := string(b)
	ids := []string{rules.IDAuditFailed}
	for _, r := range rules.All() {
		ids = append(ids, r.ID())
	}
	for _, id := range ids {
		t.Run("rule "+id+" has a row in the Rules table", func(t *testing.T) {
			if !strings.Contains(readme, "\n| `"+id+"` |") {
				t.Errorf("README.md has no Rules table row for %s", id)
			}
		})
	}
	for _, name := range alertNames(t) {
		t.Run("alert "+name+" has a row in the alerts table", func(t *testing.T) {
			if !strings.Contains(readme, "| `"+name+"` |") {
				t.Errorf("README.md has no alerts table row for %s", name)
			}
		})
	}
	t.Run("the rules and alerts are described as checks of acquisitions, not diagnoses", func(t *testing.T) {
		for _, section := range []string{"## What it checks", "## Installing as a service"} {
			i := strings.Index(readme, section)
			if i < 0 {
				t.Fatalf("README.md has no %q section", section)
			}
			body := readme[i+len(section):]
			if j := strings.Index(body, "\n## "); j >= 0 {
				body = body[:j]
			}
			// Words joined by single spaces: the sentence may wrap.
			if !strings.Contains(strings.Join(strings.Fields(body), " "), "dwiaudit checks acquisitions; it does not diagnose.") {
				t.Errorf("section %q does not say that dwiaudit checks acquisitions and does not diagnose", section)
			}
		}
	})
}
