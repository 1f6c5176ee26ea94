//go:build !linux && !darwin

package store

import (
	"errors"
	"fmt"
)

// statfsFree has no portable implementation here; set Options.FreeSpace.
func statfsFree(dir string) (uint64, error) {
	return 0, fmt.Errorf("free space of %s: %w", dir, errors.ErrUnsupported)
}
