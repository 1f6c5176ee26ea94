//go:build linux || darwin

package store

import "syscall"

// statfsFree is the default Options.FreeSpace: the blocks available to an
// unprivileged user (Bavail, not Bfree: the root reserve is not ours).
func statfsFree(dir string) (uint64, error) {
	var st syscall.Statfs_t
	if err := syscall.Statfs(dir, &st); err != nil {
		return 0, err
	}
	return uint64(st.Bavail) * uint64(st.Bsize), nil
}
