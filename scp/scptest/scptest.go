// Package scptest holds helpers for tests that drive real DICOM peers
// (DCMTK's echoscu, storescu, storescp, dcmdump, dump2dcm), in the way
// net/http/httptest serves tests of net/http. It is imported by tests
// only.
package scptest

import (
	"os"
	"os/exec"
	"testing"
)

// NeedTool returns the path of an outside program the test needs. A
// missing program fails the test when CI=true (CI installs everything the
// tests need) and skips it elsewhere with the Debian package to install.
func NeedTool(t testing.TB, name, debianPackage string) string {
	t.Helper()
	path, err := exec.LookPath(name)
	if err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("%s not found on PATH (CI=true): CI must install Debian package %s", name, debianPackage)
		}
		t.Skipf("%s not found on PATH: install Debian package %s", name, debianPackage)
	}
	return path
}

// NeedDCMTK is NeedTool for a DCMTK program.
func NeedDCMTK(t testing.TB, name string) string {
	t.Helper()
	return NeedTool(t, name, "dcmtk")
}

// DCMTKEnv is the environment for a DCMTK process. Debian's DCMTK leaves
// Nagle's algorithm on unless TCP_NODELAY=1 is set, and then every image
// waits about 40 ms for a delayed ACK (observed here; DCMTK's
// documentation of the TCP_NODELAY environment variable).
func DCMTKEnv() []string {
	return append(os.Environ(), "TCP_NODELAY=1")
}
