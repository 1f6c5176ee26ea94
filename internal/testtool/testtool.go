// Package testtool finds the outside programs that tests run as peers,
// validators and references (DCMTK, dicom3tools, Prometheus, Chromium,
// Python with pydicom and numpy), and holds the one rule for when one is
// missing: with CI=true the test fails, since CI installs every Debian
// package the tests need (.ci/run); elsewhere it is skipped with a message
// naming the package to install. A test never skips silently. It is
// imported by tests only.
package testtool

import (
	"bytes"
	"fmt"
	"os"
	"os/exec"
	"strings"
	"testing"
)

// SystemPython is the interpreter the Debian python3-* packages install
// their modules for. Not the python3 on PATH, which may be another
// installation without them.
const SystemPython = "/usr/bin/python3"

// Path returns the path of the program name on PATH, which the Debian
// package debianPackage provides. Missing, it fails the test when CI=true
// and skips it otherwise.
func Path(t testing.TB, name, debianPackage string) string {
	t.Helper()
	return FirstPath(t, debianPackage, name)
}

// FirstPath is Path for a program known by several names (chromium,
// chromium-browser): it returns the first one found on PATH.
func FirstPath(t testing.TB, debianPackage string, names ...string) string {
	t.Helper()
	for _, name := range names {
		if p, err := exec.LookPath(name); err == nil {
			return p
		}
	}
	Missing(t, fmt.Sprintf("%s not found on PATH", strings.Join(names, " or ")), debianPackage)
	return ""
}

// Python returns SystemPython after checking that it imports every one of
// modules. Each module is taken to come from the Debian package
// python3-<module> (python3-pydicom, python3-numpy, python3-nibabel).
// Missing, it fails the test when CI=true and skips it otherwise.
func Python(t testing.TB, modules ...string) string {
	t.Helper()
	pkgs := make([]string, len(modules))
	for i, m := range modules {
		pkgs[i] = "python3-" + m
	}
	script := "pass"
	if len(modules) > 0 {
		script = "import " + strings.Join(modules, ", ")
	}
	out, err := exec.Command(SystemPython, "-c", script).CombinedOutput()
	if err != nil {
		what := SystemPython + " is not usable"
		if len(modules) > 0 {
			what = fmt.Sprintf("%s cannot import %s", SystemPython, strings.Join(modules, ", "))
		}
		Missing(t, fmt.Sprintf("%s (%v: %s)", what, err, bytes.TrimSpace(out)), strings.Join(append([]string{"python3"}, pkgs...), " "))
	}
	return SystemPython
}

// Missing ends a test for want of an outside tool: what says what is
// missing, debianPackages (space-separated) what provides it. With
// CI=true the test fails; elsewhere it is skipped with the message.
func Missing(t testing.TB, what, debianPackages string) {
	t.Helper()
	if os.Getenv("CI") == "true" {
		t.Fatalf("%s (CI=true): CI must install the Debian package %s", what, debianPackages)
	}
	t.Skipf("%s: install the Debian package %s to run this test", what, debianPackages)
}
