package dwi

// The readers live in audit/header, which imports this package, so the
// tests of this package cannot import it. They read the files they write
// through these two functions instead, which reader_external_test.go (in
// package dwi_test, which may import audit/header) sets in TestMain before
// any test runs. Both load pixels.
var (
	// ExtractForTest reads the frames of the bytes of one Part 10 file.
	ExtractForTest func(data []byte) ([]Frame, error)
	// ExtractFileForTest reads the frames of the Part 10 file at path.
	ExtractFileForTest func(path string) ([]Frame, error)
)
