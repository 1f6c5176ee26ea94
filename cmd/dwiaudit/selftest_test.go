package main

import (
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"dwiaudit/audit/suite"
	"dwiaudit/rules"
)

// selftestTimeout is the --timeout the tests give: the nodes settle in
// 1 s and the suite audits in a few seconds; the margin is for a loaded
// machine, and a passing run returns as soon as the audits are in.
const selftestTimeout = "90s"

// selftestLine matches the result line of one rule: "<rule> <planted>
// <expected> <found ...> PASS|FAIL".
func selftestLine(rule string) *regexp.Regexp {
	return regexp.MustCompile(`(?m)^` + regexp.QuoteMeta(rule) + `\s.*\s(PASS|FAIL)\s*$`)
}

func TestSelftestPassesAgainstARunningNodeAndMarksItsStudiesAsTest(t *testing.T) {
	data := t.TempDir()
	n := startNode(t, data, "--settle", "1s")
	r := runCLI(t, "selftest", "--to", n.dicomAddr, "--server", n.httpURL, "--timeout", selftestTimeout)
	if r.code != exitOK {
		t.Fatalf("selftest exited %d, want 0", r.code)
	}
	for _, id := range append(suite.RuleIDs(), "(clean)") {
		m := selftestLine(id).FindStringSubmatch(r.stdout)
		if m == nil || m[1] != "PASS" {
			t.Errorf("no PASS line for %s", id)
		}
	}
	if !strings.Contains(r.stdout, "selftest: PASS") || !strings.Contains(r.stdout, cautionLine) {
		t.Error("no PASS verdict or no caution line")
	}
	if code := n.stop(); code != exitOK {
		t.Fatalf("node exit %d", code)
	}

	// The suite is sent under the default test Patient ID: every audit
	// it left is marked as a test study, for reports and metrics to
	// leave out.
	st := openStoreReadOnly(t, data)
	recs, err := st.Findings(time.Now().Format(dayLayout))
	if err != nil {
		t.Fatal(err)
	}
	if len(recs) < len(suite.RuleIDs())+1 {
		t.Fatalf("%d audits stored, want one per study of the suite at least", len(recs))
	}
	for _, rec := range recs {
		if !rec.TestPatient {
			t.Errorf("audit of series %s is not marked as a test study", rec.SeriesUID)
		}
	}
}

func TestSelftestFailsNamingARuleTheNodeHasSwitchedOff(t *testing.T) {
	cfg := filepath.Join(t.TempDir(), "dwiaudit.yaml")
	// audit.rules.<id>.enabled (config.Rule).
	if err := os.WriteFile(cfg, []byte("audit:\n  rules:\n    "+rules.IDLowSNR+":\n      enabled: false\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	n := startNode(t, t.TempDir(), "--config", cfg, "--settle", "1s")
	r := runCLI(t, "selftest", "--to", n.dicomAddr, "--server", n.httpURL, "--timeout", selftestTimeout)
	if r.code != exitFailure {
		t.Fatalf("selftest exited %d, want 1", r.code)
	}
	if m := selftestLine(rules.IDLowSNR).FindStringSubmatch(r.stdout); m == nil || m[1] != "FAIL" {
		t.Errorf("the %s line does not say FAIL", rules.IDLowSNR)
	}
	if m := selftestLine(rules.IDMissingB0).FindStringSubmatch(r.stdout); m == nil || m[1] != "PASS" {
		t.Errorf("the %s line does not say PASS: one rule off must not fail the others", rules.IDMissingB0)
	}
	if !strings.Contains(r.stdout, "selftest: FAIL") {
		t.Error("no FAIL verdict")
	}
}

func TestSelftestRefusesBadFlagsWithExitTwo(t *testing.T) {
	for _, c := range []struct {
		name string
		args []string
		want string
	}{
		{"a server that is no URL", []string{"--server", "127.0.0.1:8080"}, "--server"},
		{"a negative timeout", []string{"--timeout", "-1s"}, "--timeout"},
		{"a calling AE title longer than 16", []string{"--calling-ae", "A-VERY-LONG-AE-TITLE"}, "--calling-ae"},
		{"an argument", []string{"extra"}, "unexpected argument"},
	} {
		t.Run(c.name, func(t *testing.T) {
			r := runCLI(t, append([]string{"selftest"}, c.args...)...)
			if r.code != exitUsage || !strings.Contains(r.stderr, c.want) {
				t.Errorf("exit %d, stderr %q; want 2 naming %s", r.code, r.stderr, c.want)
			}
		})
	}
}
