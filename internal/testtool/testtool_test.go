package testtool

import (
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

// TestMissingFailsUnderCIAndSkipsElsewhere runs this test binary again
// with the probe below, once with CI=true and once without, and checks the
// rule from the outside: a fail with the package named, or a skip with it.
func TestMissingFailsUnderCIAndSkipsElsewhere(t *testing.T) {
	if os.Getenv("TESTTOOL_PROBE") == "1" {
		Path(t, "dwiaudit-no-such-program", "dwiaudit-no-such-package")
		t.Fatal("Path returned for a missing program")
	}
	cases := []struct {
		name     string
		ci       string
		wantFail bool
		wantWord string
	}{
		{"with CI=true a missing tool fails the test", "true", true, "--- FAIL"},
		{"without CI a missing tool skips the test", "", false, "--- SKIP"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			cmd := exec.Command(os.Args[0], "-test.run", "^TestMissingFailsUnderCIAndSkipsElsewhere$", "-test.v")
			cmd.Env = append(os.Environ(), "TESTTOOL_PROBE=1", "CI="+c.ci)
			out, err := cmd.CombinedOutput()
			if failed := err != nil; failed != c.wantFail {
				t.Errorf("probe failed=%v, want %v\n%s", failed, c.wantFail, out)
			}
			if !strings.Contains(string(out), c.wantWord) || !strings.Contains(string(out), "dwiaudit-no-such-package") {
				t.Errorf("probe output lacks %q or the package name:\n%s", c.wantWord, out)
			}
		})
	}
}

func TestPathFindsAProgram(t *testing.T) {
	// sh is on every machine the tests run on (POSIX requires it).
	if p := Path(t, "sh", "dash"); p == "" {
		t.Fatal("Path found no sh")
	}
}

func TestPythonChecksItsModules(t *testing.T) {
	if os.Getenv("TESTTOOL_PYPROBE") == "1" {
		Python(t, "dwiaudit_no_such_module")
		t.Fatal("Python returned for a missing module")
	}
	cmd := exec.Command(os.Args[0], "-test.run", "^TestPythonChecksItsModules$", "-test.v")
	cmd.Env = append(os.Environ(), "TESTTOOL_PYPROBE=1", "CI=true")
	out, err := cmd.CombinedOutput()
	if err == nil || !strings.Contains(string(out), "python3-dwiaudit_no_such_module") {
		t.Errorf("a missing module passed under CI=true, or its package is not named:\n%s", out)
	}
}

func TestGoldenComparesAndUpdates(t *testing.T) {
	if dir := os.Getenv("TESTTOOL_GOLDEN_DIR"); dir != "" {
		Golden(t, filepath.Join(dir, "sub", "out.golden"), []byte("new"))
		return
	}
	dir := t.TempDir()
	golden := filepath.Join(dir, "sub", "out.golden")
	run := func(args ...string) (string, error) {
		cmd := exec.Command(os.Args[0], append([]string{"-test.run", "^TestGoldenComparesAndUpdates$", "-test.v"}, args...)...)
		cmd.Env = append(os.Environ(), "TESTTOOL_GOLDEN_DIR="+dir)
		out, err := cmd.CombinedOutput()
		return string(out), err
	}
	t.Run("a missing golden file fails and says how to make it", func(t *testing.T) {
		out, err := run()
		if err == nil || !strings.Contains(out, "-update") {
			t.Errorf("missing golden file: err %v\n%s", err, out)
		}
	})
	t.Run("-update writes it and passes", func(t *testing.T) {
		if out, err := run("-update"); err != nil {
			t.Fatalf("%v\n%s", err, out)
		}
		if b, err := os.ReadFile(golden); err != nil || string(b) != "new" {
			t.Errorf("golden file %q, %v", b, err)
		}
	})
	t.Run("the same bytes pass", func(t *testing.T) {
		if out, err := run(); err != nil {
			t.Errorf("%v\n%s", err, out)
		}
	})
	t.Run("other bytes fail", func(t *testing.T) {
		if err := os.WriteFile(golden, []byte("old"), 0o644); err != nil {
			t.Fatal(err)
		}
		if out, err := run(); err == nil || !strings.Contains(out, "differs") {
			t.Errorf("a stale golden file passed:\n%s", out)
		}
	})
}
