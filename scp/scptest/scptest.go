// Package scptest holds helpers for tests that drive real DICOM peers
// (DCMTK's echoscu, storescu, storescp, dcmdump, dump2dcm), in the way
// net/http/httptest serves tests of net/http. It is imported by tests
// only.
package scptest

import (
	"os"
	"testing"

	"dwiaudit/internal/testtool"
)

// NeedDCMTK returns the path of a DCMTK program (Debian package dcmtk),
// through testtool.Path: missing, it fails the test under CI=true and
// skips it elsewhere.
func NeedDCMTK(t testing.TB, name string) string {
	t.Helper()
	return testtool.Path(t, name, "dcmtk")
}

// DCMTKEnv is the environment for a DCMTK process. Debian's DCMTK leaves
// Nagle's algorithm on unless TCP_NODELAY=1 is set, and then every image
// waits about 40 ms for a delayed ACK (observed here; DCMTK's
// documentation of the TCP_NODELAY environment variable).
func DCMTKEnv() []string {
	return append(os.Environ(), "TCP_NODELAY=1")
}
