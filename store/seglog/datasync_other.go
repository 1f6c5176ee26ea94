//go:build !linux

package seglog

import "os"

// datasync falls back to fsync where fdatasync(2) is not offered.
func datasync(f *os.File) error { return f.Sync() }
