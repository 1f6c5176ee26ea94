package seglog

import (
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"sort"
)

// FS is the file system the log writes through. Paths are joined with
// filepath.Join; the log never asks for anything outside its folder.
type FS interface {
	// MkdirAll creates dir and its parents.
	MkdirAll(dir string) error
	// OpenFile opens name with os.O_* flags; files are created 0o640.
	OpenFile(name string, flag int) (File, error)
	// ReadDir lists the names in dir (files only, no order promised).
	ReadDir(dir string) ([]string, error)
	// Remove deletes a file.
	Remove(name string) error
	// Rename replaces newName by oldName atomically.
	Rename(oldName, newName string) error
	// SyncDir makes dir's entries (creations, renames, removals) durable.
	SyncDir(dir string) error
}

// File is one open file of an FS.
type File interface {
	io.ReaderAt
	io.WriterAt
	// Size reports the file's current length.
	Size() (int64, error)
	// Truncate sets the file's length.
	Truncate(size int64) error
	// Datasync makes every write and length change made before the call
	// durable (fdatasync(2)).
	Datasync() error
	// Close releases the file.
	Close() error
}

// OSFS is the FS of the real disk.
type OSFS struct{}

// MkdirAll implements FS.
func (OSFS) MkdirAll(dir string) error { return os.MkdirAll(dir, 0o750) }

// OpenFile implements FS.
func (OSFS) OpenFile(name string, flag int) (File, error) {
	f, err := os.OpenFile(name, flag, 0o640)
	if err != nil {
		return nil, err
	}
	return osFile{f}, nil
}

// ReadDir implements FS.
func (OSFS) ReadDir(dir string) ([]string, error) {
	ents, err := os.ReadDir(dir)
	if err != nil {
		return nil, err
	}
	var names []string
	for _, e := range ents {
		if e.Type().IsRegular() {
			names = append(names, e.Name())
		}
	}
	sort.Strings(names)
	return names, nil
}

// Remove implements FS.
func (OSFS) Remove(name string) error { return os.Remove(name) }

// Rename implements FS.
func (OSFS) Rename(oldName, newName string) error { return os.Rename(oldName, newName) }

// SyncDir implements FS.
func (OSFS) SyncDir(dir string) error {
	d, err := os.Open(dir)
	if err != nil {
		return err
	}
	err = d.Sync()
	if cerr := d.Close(); err == nil {
		err = cerr
	}
	return err
}

type osFile struct{ f *os.File }

func (o osFile) ReadAt(p []byte, off int64) (int, error)  { return o.f.ReadAt(p, off) }
func (o osFile) WriteAt(p []byte, off int64) (int, error) { return o.f.WriteAt(p, off) }
func (o osFile) Truncate(size int64) error                { return o.f.Truncate(size) }
func (o osFile) Close() error                             { return o.f.Close() }
func (o osFile) Datasync() error                          { return datasync(o.f) }

func (o osFile) Size() (int64, error) {
	st, err := o.f.Stat()
	if err != nil {
		return 0, err
	}
	return st.Size(), nil
}

// writeFileDurably writes data to name through a temporary file: write,
// fdatasync, rename, directory sync.
func writeFileDurably(fsys FS, name string, data []byte) error {
	tmp := name + ".tmp"
	f, err := fsys.OpenFile(tmp, os.O_RDWR|os.O_CREATE|os.O_TRUNC)
	if err != nil {
		return err
	}
	if _, err := f.WriteAt(data, 0); err != nil {
		f.Close()
		return fmt.Errorf("write %s: %w", tmp, err)
	}
	if err := f.Datasync(); err != nil {
		f.Close()
		return fmt.Errorf("fdatasync %s: %w", tmp, err)
	}
	if err := f.Close(); err != nil {
		return err
	}
	if err := fsys.Rename(tmp, name); err != nil {
		return err
	}
	return fsys.SyncDir(filepath.Dir(name))
}

// readWholeFile reads a small file through fsys.
func readWholeFile(fsys FS, name string) ([]byte, error) {
	f, err := fsys.OpenFile(name, os.O_RDONLY)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	n, err := f.Size()
	if err != nil {
		return nil, err
	}
	if n > maxFormatFile {
		return nil, fmt.Errorf("%s: %d bytes, more than a format file holds", name, n)
	}
	buf := make([]byte, n)
	if _, err := f.ReadAt(buf, 0); err != nil && !errors.Is(err, io.EOF) {
		return nil, err
	}
	return buf, nil
}
