package dwi_test

import (
	"os"
	"testing"

	"dwiaudit/audit/dwi"
	"dwiaudit/audit/header"
)

// TestMain gives the internal tests of package dwi audit/header's reader
// (see reader_test.go).
func TestMain(m *testing.M) {
	opt := header.ExtractOptions{LoadPixels: true}
	dwi.ExtractForTest = func(data []byte) ([]dwi.Frame, error) { return header.Extract(data, opt) }
	dwi.ExtractFileForTest = func(path string) ([]dwi.Frame, error) { return header.ExtractFile(path, opt) }
	os.Exit(m.Run())
}
