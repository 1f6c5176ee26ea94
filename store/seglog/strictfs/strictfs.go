// Package strictfs is a strict in-memory file system for the segment
// log's power-cut tests: at a simulated power cut it forgets every write,
// truncation, creation, rename and removal that no completed fdatasync
// (for file contents) or directory sync (for names) covered. It is the
// crash-testing approach of embedded storage engines (a file system that
// keeps only what was synced), made harsher in one way: each write that
// was not covered may still survive the cut, whole or torn to a prefix,
// chosen by a seeded random source, because a real disk may have written
// some of the page cache out on its own before the power went.
//
// Directories are created durable; only file names need SyncDir.
package strictfs

import (
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"sort"
	"strings"
	"sync"

	"dwiaudit/store/seglog"
)

// ErrPowerCut is returned by every operation after the cut.
var ErrPowerCut = errors.New("strictfs: power cut")

// FS implements seglog.FS in memory. Its methods are safe for concurrent use.
type FS struct {
	mu      sync.Mutex
	rng     *rand.Rand        // guarded by mu
	names   map[string]*inode // path -> file, as the running system sees it
	durable map[string]*inode // path -> file, as the last directory syncs left it
	dirs    map[string]bool
	cut     bool
	budget  int // mutating operations left before an automatic cut; <0: none
	stats   Stats
}

// Stats counts the operations the FS served.
type Stats struct {
	Writes, Datasyncs, DirSyncs int
}

// inode is one file. Every field is guarded by FS.mu.
type inode struct {
	data   []byte // current contents: what reads see
	synced []byte // contents that survive a cut
	ops    []op   // changes since synced, in order
	base   int    // sequence number of ops[0]
}

// op is one change to a file's contents not yet covered by a flush.
type op struct {
	off   int64
	data  []byte // nil for a truncation
	trunc int64
}

func (o op) applyTo(b []byte) []byte {
	if o.data == nil {
		if o.trunc <= int64(len(b)) {
			return b[:o.trunc]
		}
		return append(b, make([]byte, o.trunc-int64(len(b)))...)
	}
	if end := o.off + int64(len(o.data)); end > int64(len(b)) {
		b = append(b, make([]byte, end-int64(len(b)))...)
	}
	copy(b[o.off:], o.data)
	return b
}

// New returns an empty FS whose survivors at a cut are chosen by seed.
func New(seed uint64) *FS {
	return &FS{rng: rand.New(rand.NewPCG(seed, seed^0x9e3779b97f4a7c15)), names: map[string]*inode{}, durable: map[string]*inode{}, dirs: map[string]bool{"/": true, ".": true}, budget: -1}
}

// CutAfter arms an automatic power cut: n more mutating operations
// (write, truncation, fdatasync, creation, rename, removal, directory
// sync) succeed, the next one fails with ErrPowerCut, as does everything
// after it.
func (f *FS) CutAfter(n int) {
	f.mu.Lock()
	defer f.mu.Unlock()
	f.budget = n
}

// Cut cuts the power now.
func (f *FS) Cut() {
	f.mu.Lock()
	defer f.mu.Unlock()
	f.cut = true
}

// Stats reports the operations served so far.
func (f *FS) Stats() Stats {
	f.mu.Lock()
	defer f.mu.Unlock()
	return f.stats
}

// Restart cuts the power if it is still on and returns the FS as a
// machine would find it after the cut: the names the directory syncs
// made durable, each file with its synced contents and a random selection
// of the changes that were not synced.
func (f *FS) Restart() *FS {
	f.mu.Lock()
	defer f.mu.Unlock()
	f.cut = true
	n := New(f.rng.Uint64())
	for d := range f.dirs {
		n.dirs[d] = true
	}
	for name, ino := range f.durable {
		b := append([]byte(nil), ino.synced...)
		for _, o := range ino.ops {
			switch f.rng.IntN(3) {
			case 0: // lost
			case 1:
				b = o.applyTo(b)
			case 2: // torn: a prefix of the write reached the disk
				if o.data != nil {
					o.data = o.data[:f.rng.IntN(len(o.data)+1)]
				}
				b = o.applyTo(b)
			}
		}
		ni := &inode{data: b, synced: append([]byte(nil), b...)}
		n.names[name] = ni
		n.durable[name] = ni
	}
	return n
}

// Files lists every file the running system sees, sorted, for tests.
func (f *FS) Files() []string {
	f.mu.Lock()
	defer f.mu.Unlock()
	var out []string
	for n := range f.names {
		out = append(out, n)
	}
	sort.Strings(out)
	return out
}

// mutateLocked spends one operation of the budget and reports a cut.
func (f *FS) mutateLocked() error {
	if f.cut {
		return ErrPowerCut
	}
	if f.budget == 0 {
		f.cut = true
		return ErrPowerCut
	}
	if f.budget > 0 {
		f.budget--
	}
	return nil
}

func clean(p string) string { return filepath.Clean(p) }

// MkdirAll implements seglog.FS.
func (f *FS) MkdirAll(dir string) error {
	f.mu.Lock()
	defer f.mu.Unlock()
	if f.cut {
		return ErrPowerCut
	}
	for d := clean(dir); !f.dirs[d]; d = filepath.Dir(d) {
		f.dirs[d] = true
	}
	return nil
}

// OpenFile implements seglog.FS for O_RDONLY, O_RDWR, O_CREATE, O_EXCL and O_TRUNC.
func (f *FS) OpenFile(name string, flag int) (seglog.File, error) {
	name = clean(name)
	f.mu.Lock()
	defer f.mu.Unlock()
	if f.cut {
		return nil, ErrPowerCut
	}
	if !f.dirs[filepath.Dir(name)] {
		return nil, &fs.PathError{Op: "open", Path: name, Err: fs.ErrNotExist}
	}
	ino, ok := f.names[name]
	switch {
	case ok && flag&os.O_CREATE != 0 && flag&os.O_EXCL != 0:
		return nil, &fs.PathError{Op: "open", Path: name, Err: fs.ErrExist}
	case !ok && flag&os.O_CREATE == 0:
		return nil, &fs.PathError{Op: "open", Path: name, Err: fs.ErrNotExist}
	case !ok:
		if err := f.mutateLocked(); err != nil {
			return nil, err
		}
		ino = &inode{}
		f.names[name] = ino
	}
	if flag&os.O_TRUNC != 0 {
		if err := f.mutateLocked(); err != nil {
			return nil, err
		}
		ino.change(op{trunc: 0})
	}
	return &file{fs: f, ino: ino, name: name, writable: flag&(os.O_RDWR|os.O_WRONLY) != 0}, nil
}

// ReadDir implements seglog.FS.
func (f *FS) ReadDir(dir string) ([]string, error) {
	dir = clean(dir)
	f.mu.Lock()
	defer f.mu.Unlock()
	if f.cut {
		return nil, ErrPowerCut
	}
	if !f.dirs[dir] {
		return nil, &fs.PathError{Op: "readdir", Path: dir, Err: fs.ErrNotExist}
	}
	var out []string
	for n := range f.names {
		if filepath.Dir(n) == dir {
			out = append(out, filepath.Base(n))
		}
	}
	sort.Strings(out)
	return out, nil
}

// Remove implements seglog.FS.
func (f *FS) Remove(name string) error {
	name = clean(name)
	f.mu.Lock()
	defer f.mu.Unlock()
	if err := f.mutateLocked(); err != nil {
		return err
	}
	if _, ok := f.names[name]; !ok {
		return &fs.PathError{Op: "remove", Path: name, Err: fs.ErrNotExist}
	}
	delete(f.names, name)
	return nil
}

// Rename implements seglog.FS.
func (f *FS) Rename(oldName, newName string) error {
	oldName, newName = clean(oldName), clean(newName)
	f.mu.Lock()
	defer f.mu.Unlock()
	if err := f.mutateLocked(); err != nil {
		return err
	}
	ino, ok := f.names[oldName]
	if !ok {
		return &fs.PathError{Op: "rename", Path: oldName, Err: fs.ErrNotExist}
	}
	delete(f.names, oldName)
	f.names[newName] = ino
	return nil
}

// SyncDir implements seglog.FS: the names in dir become durable.
func (f *FS) SyncDir(dir string) error {
	dir = clean(dir)
	f.mu.Lock()
	defer f.mu.Unlock()
	if err := f.mutateLocked(); err != nil {
		return err
	}
	f.stats.DirSyncs++
	for n := range f.durable {
		if filepath.Dir(n) == dir {
			delete(f.durable, n)
		}
	}
	for n, ino := range f.names {
		if filepath.Dir(n) == dir {
			f.durable[n] = ino
		}
	}
	return nil
}

// change applies o to the running contents and queues it for the next flush.
func (ino *inode) change(o op) {
	if o.data != nil {
		o.data = append([]byte(nil), o.data...)
	}
	ino.data = o.applyTo(ino.data)
	ino.ops = append(ino.ops, o)
}

type file struct {
	fs       *FS
	ino      *inode
	name     string
	writable bool
	closed   bool // guarded by fs.mu
}

func (h *file) check() error {
	if h.fs.cut {
		return ErrPowerCut
	}
	if h.closed {
		return fmt.Errorf("strictfs: %s: %w", h.name, fs.ErrClosed)
	}
	return nil
}

func (h *file) ReadAt(p []byte, off int64) (int, error) {
	h.fs.mu.Lock()
	defer h.fs.mu.Unlock()
	if err := h.check(); err != nil {
		return 0, err
	}
	if off >= int64(len(h.ino.data)) {
		return 0, io.EOF
	}
	n := copy(p, h.ino.data[off:])
	if n < len(p) {
		return n, io.EOF
	}
	return n, nil
}

func (h *file) WriteAt(p []byte, off int64) (int, error) {
	h.fs.mu.Lock()
	defer h.fs.mu.Unlock()
	if err := h.check(); err != nil {
		return 0, err
	}
	if !h.writable {
		return 0, fmt.Errorf("strictfs: %s opened read-only", h.name)
	}
	if err := h.fs.mutateLocked(); err != nil {
		return 0, err
	}
	h.fs.stats.Writes++
	h.ino.change(op{off: off, data: p})
	return len(p), nil
}

func (h *file) Size() (int64, error) {
	h.fs.mu.Lock()
	defer h.fs.mu.Unlock()
	if err := h.check(); err != nil {
		return 0, err
	}
	return int64(len(h.ino.data)), nil
}

func (h *file) Truncate(size int64) error {
	h.fs.mu.Lock()
	defer h.fs.mu.Unlock()
	if err := h.check(); err != nil {
		return err
	}
	if err := h.fs.mutateLocked(); err != nil {
		return err
	}
	h.ino.change(op{trunc: size})
	return nil
}

// Datasync makes the changes made before the call durable, but only if
// the power is still on when it completes: it yields in between, so
// other writers' changes land during the flush and are not covered.
func (h *file) Datasync() error {
	h.fs.mu.Lock()
	if err := h.check(); err != nil {
		h.fs.mu.Unlock()
		return err
	}
	if err := h.fs.mutateLocked(); err != nil {
		h.fs.mu.Unlock()
		return err
	}
	target := h.ino.base + len(h.ino.ops)
	h.fs.mu.Unlock()
	runtime.Gosched()
	h.fs.mu.Lock()
	defer h.fs.mu.Unlock()
	if h.fs.cut {
		return ErrPowerCut
	}
	h.fs.stats.Datasyncs++
	if n := target - h.ino.base; n > 0 {
		for _, o := range h.ino.ops[:n] {
			h.ino.synced = o.applyTo(h.ino.synced)
		}
		h.ino.ops = h.ino.ops[n:]
		h.ino.base = target
	}
	return nil
}

func (h *file) Close() error {
	h.fs.mu.Lock()
	defer h.fs.mu.Unlock()
	if h.closed {
		return fmt.Errorf("strictfs: %s: %w", h.name, fs.ErrClosed)
	}
	h.closed = true
	return nil
}

// String names the FS in test failures.
func (f *FS) String() string { return "strictfs(" + strings.Join(f.Files(), ",") + ")" }
