package store

import (
	"bytes"
	"context"
	"errors"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"
)

// event is one durability step seen by the hooks or the test's Describe.
type event struct {
	kind string // "synced", "described", "renamed", "dir-synced", "committed"
	path string
}

// eventLog collects events from several goroutines.
type eventLog struct {
	mu     sync.Mutex
	events []event
}

func (l *eventLog) add(kind, path string) {
	l.mu.Lock()
	l.events = append(l.events, event{kind, path})
	l.mu.Unlock()
}

func (l *eventLog) index(kind, path string) int {
	l.mu.Lock()
	defer l.mu.Unlock()
	return slices.Index(l.events, event{kind, path})
}

func TestPutOrdersItsDurabilitySteps(t *testing.T) {
	log := &eventLog{}
	ti := testInstance{SOP: uid(1, 1), InstanceNumber: 1, Payload: 300 << 10}
	want := append(mustFileMeta(t, ti.SOP, explicitVRLE, "OSTMIRE_MR1"), ti.dataSet()...)
	var describeErr, closeErr error
	s, opts := newTestStore(t, func(o *Options) {
		o.hooks = &hooks{
			tempSynced: func(p string) { log.add("synced", p) },
			renamed: func(from, to string) {
				log.add("renamed", from)
				log.add("renamed-to", to)
				if openHere(to) { // the order: fsync, close, rename
					closeErr = errors.New("the temp file was still open when it was renamed")
				}
			},
			dirSynced: func(d string) { log.add("dir-synced", d) },
			committed: func(sops []string) {
				for _, sop := range sops {
					log.add("committed", sop)
				}
			},
		}
		o.Describe = func(p string) (Attributes, error) {
			log.add("described", p)
			// Describe must see the whole file. It runs while Put's fsync
			// of it does, so the file may still be open.
			got, err := os.ReadFile(p)
			switch {
			case err != nil:
				describeErr = err
			case !bytes.Equal(got, want):
				describeErr = errors.New("Describe saw an incomplete or different temp file")
			case filepath.Dir(p) != filepath.Join(o.Dir, tmpDir):
				describeErr = errors.New("Describe was not given the temp file")
			}
			return describeTestFile(p)
		}
	})

	ref := mustPut(t, s, ti)
	if describeErr != nil {
		t.Fatal(describeErr)
	}
	if closeErr != nil {
		t.Error(closeErr)
	}
	final := filepath.Join(opts.Dir, "instances", "2.25.1001", "2.25.1001.1", ti.SOP+".dcm")
	if ref.Path != "instances/2.25.1001/2.25.1001.1/"+ti.SOP+".dcm" || ref.Version != 1 || ref.Duplicate != DupNone {
		t.Errorf("ref = %+v", ref)
	}

	// The temp file's name is the one synced, described and renamed.
	log.mu.Lock()
	tmpPath := ""
	for _, e := range log.events {
		if e.kind == "synced" {
			tmpPath = e.path
		}
	}
	log.mu.Unlock()
	// Describe and the fsync run at once; both come before the rename.
	if i := log.index("described", tmpPath); i < 0 || i > log.index("renamed", tmpPath) {
		t.Errorf("Describe of %s not before its rename; events %v", tmpPath, log.events)
	}
	steps := []event{
		{"synced", tmpPath},
		{"renamed", tmpPath},
		{"renamed-to", final},
		{"dir-synced", filepath.Dir(final)},
		{"committed", ti.SOP},
	}
	last := -1
	for _, st := range steps {
		i := log.index(st.kind, st.path)
		if i < 0 {
			t.Fatalf("step %s %s never happened; events %v", st.kind, st.path, log.events)
		}
		if i < last {
			t.Errorf("step %s %s out of order; events %v", st.kind, st.path, log.events)
		}
		last = i
	}
	// New folders: their parents were fsynced before the commit.
	for _, d := range []string{filepath.Join(opts.Dir, "instances"), filepath.Join(opts.Dir, "instances", "2.25.1001")} {
		if i := log.index("dir-synced", d); i < 0 || i > log.index("committed", ti.SOP) {
			t.Errorf("parent %s of a new folder not fsynced before the commit; events %v", d, log.events)
		}
	}

	// When Put has returned, the file is in place and indexed.
	got, err := os.ReadFile(final)
	if err != nil || !bytes.Equal(got, want) {
		t.Fatalf("file in place: %v (equal %v)", err, bytes.Equal(got, want))
	}
	in, err := s.Instance(ti.SOP)
	if err != nil {
		t.Fatalf("Instance: %v", err)
	}
	if in.Path != ref.Path || in.SHA256 != ti.sha() || in.Size != int64(len(want)) ||
		in.DataSetOffset != int64(len(want)-len(ti.dataSet())) || in.StudyInstanceUID != "2.25.1001" {
		t.Errorf("Instance = %+v", in)
	}
	if _, err := os.Lstat(tmpPath); !errors.Is(err, fs.ErrNotExist) {
		t.Errorf("temp file %s still there after Put: %v", tmpPath, err)
	}
	if got := storeFiles(t, s); slices.ContainsFunc(got, func(f string) bool { return strings.HasPrefix(f, tmpDir+"/") && f != tmpDir+"/" }) {
		t.Errorf("tmp holds more than the spare temp files after Put: %v", got)
	}
}

// openHere reports whether this process has path open (Linux /proc).
func openHere(path string) bool {
	fds, err := os.ReadDir("/proc/self/fd")
	if err != nil {
		return false
	}
	for _, fd := range fds {
		if target, err := os.Readlink(filepath.Join("/proc/self/fd", fd.Name())); err == nil && target == path {
			return true
		}
	}
	return false
}

func TestPutRefusesUnsafeUIDs(t *testing.T) {
	bad := []struct{ name, uid string }{
		{"a parent-folder path", "../x"},
		{"a path separator", "1.2/3"},
		{"an empty UID", ""},
		{"65 characters", "1." + strings.Repeat("2", 63)},
		{"an empty component", "1..2"},
		{"a leading dot", ".1"},
		{"a trailing dot", "1.2."},
		{"a letter", "1.2.a"},
		{"a NUL", "1.2\x00"},
		{"a lone dot-dot", ".."},
	}
	fields := []struct {
		name string
		set  func(ti *testInstance, req *PutRequest, uid string)
	}{
		{"SOP instance UID", func(_ *testInstance, req *PutRequest, u string) { req.SOPInstanceUID = u }},
		{"SOP class UID", func(_ *testInstance, req *PutRequest, u string) { req.SOPClassUID = u }},
		{"transfer syntax UID", func(_ *testInstance, req *PutRequest, u string) { req.TransferSyntaxUID = u }},
		{"study UID from Describe", func(ti *testInstance, _ *PutRequest, u string) { ti.Study = u; ti.Series = "2.25.77" }},
		{"series UID from Describe", func(ti *testInstance, _ *PutRequest, u string) { ti.Series = u }},
	}
	s, _ := newTestStore(t)
	mustPut(t, s, testInstance{SOP: uid(9, 9), Payload: 64})
	n := 0
	for _, f := range fields {
		for _, b := range bad {
			if strings.Contains(f.name, "Describe") && (b.uid == "" || strings.HasSuffix(b.uid, "\x00")) {
				// In a data set an empty value is absent (the test defaults
				// would fill it) and a trailing NUL is UI padding (PS3.5 6.2).
				continue
			}
			n++
			t.Run(f.name+" with "+b.name+" is refused and leaves no file", func(t *testing.T) {
				ti := testInstance{SOP: uid(2, n), Payload: 1024}
				req := ti.request()
				f.set(&ti, &req, b.uid)
				before := storeFiles(t, s)
				_, err := s.Put(t.Context(), req, bytes.NewReader(ti.dataSet()))
				if !errors.Is(err, ErrInvalidUID) {
					t.Fatalf("Put = %v, want ErrInvalidUID", err)
				}
				sameFiles(t, before, storeFiles(t, s))
				if _, err := s.Instance(req.SOPInstanceUID); !errors.Is(err, ErrNotFound) && req.SOPInstanceUID != "" {
					t.Errorf("Instance after refused Put = %v, want ErrNotFound", err)
				}
			})
		}
	}
}

func TestCheckUID(t *testing.T) {
	cases := []struct {
		uid string
		ok  bool
	}{
		{"1.2.840.10008.1.2.1", true}, // PS3.6 Annex A, Explicit VR Little Endian
		{"0", true},
		{"2.25.5539447777562070585615222628860829091", true},
		{"1." + strings.Repeat("2", 62), true}, // 64 characters: the limit (PS3.5 9.1)
		{"1.02", true},                         // leading zero: PS3.5 9.1 forbids it, we tolerate it (see checkUID)
		{"1." + strings.Repeat("2", 63), false},
		{"", false},
		{".", false},
		{"1..2", false},
		{"1.2.", false},
		{".1", false},
		{"1.2 ", false},
		{"-1", false},
	}
	for _, c := range cases {
		t.Run("UID "+strings.ReplaceAll(c.uid, "/", "_")+" is judged correctly", func(t *testing.T) {
			err := checkUID("UID", c.uid)
			if (err == nil) != c.ok {
				t.Errorf("checkUID(%q) = %v, want ok=%v", c.uid, err, c.ok)
			}
			if err != nil && !errors.Is(err, ErrInvalidUID) {
				t.Errorf("error %v is not ErrInvalidUID", err)
			}
		})
	}
}

// failingReader yields n bytes of the data set, then fails.
type failingReader struct {
	r   io.Reader
	n   int
	err error
}

func (f *failingReader) Read(p []byte) (int, error) {
	if f.n <= 0 {
		return 0, f.err
	}
	if len(p) > f.n {
		p = p[:f.n]
	}
	n, err := f.r.Read(p)
	f.n -= n
	return n, err
}

func TestPutLeavesNothingWhenItFails(t *testing.T) {
	errPeer := errors.New("peer aborted the association")
	ti := testInstance{SOP: uid(3, 1), Payload: 3 << 20}
	cases := []struct {
		name     string
		describe func(string) (Attributes, error)
		data     func() io.Reader
		ctx      func() context.Context
		want     error
	}{
		{
			name: "a data reader failing mid-way",
			data: func() io.Reader { return &failingReader{r: bytes.NewReader(ti.dataSet()), n: 1 << 20, err: errPeer} },
			want: errPeer,
		},
		{
			name: "a cancelled context",
			data: func() io.Reader { return bytes.NewReader(ti.dataSet()) },
			ctx: func() context.Context {
				ctx, cancel := context.WithCancel(context.Background())
				cancel()
				return ctx
			},
			want: context.Canceled,
		},
		{
			name:     "Describe failing",
			describe: func(string) (Attributes, error) { return Attributes{}, errors.New("not an image") },
			data:     func() io.Reader { return bytes.NewReader(ti.dataSet()) },
			want:     ErrUnreadable,
		},
		{
			name:     "Describe panicking",
			describe: func(string) (Attributes, error) { panic("parser bug") },
			data:     func() io.Reader { return bytes.NewReader(ti.dataSet()) },
			want:     ErrUnreadable,
		},
	}
	for _, c := range cases {
		t.Run(c.name+" leaves no file and no record", func(t *testing.T) {
			s, _ := newTestStore(t, func(o *Options) {
				if c.describe != nil {
					o.Describe = c.describe
				}
			})
			ctx := t.Context()
			if c.ctx != nil {
				ctx = c.ctx()
			}
			before := storeFiles(t, s)
			_, err := s.Put(ctx, ti.request(), c.data())
			if !errors.Is(err, c.want) {
				t.Fatalf("Put = %v, want %v", err, c.want)
			}
			sameFiles(t, before, storeFiles(t, s))
			if _, err := s.Instance(ti.SOP); !errors.Is(err, ErrNotFound) {
				t.Errorf("Instance = %v, want ErrNotFound", err)
			}
		})
	}
}

// fakeDisk is a file system of a fixed capacity whose free space is the
// capacity minus what the data folder holds now, so it drops as Put
// writes.
type fakeDisk struct {
	dir      string
	capacity uint64
	base     uint64 // bytes in dir when the test started
	mu       sync.Mutex
	calls    int
}

func (d *fakeDisk) used() uint64 {
	var n uint64
	filepath.Walk(d.dir, func(_ string, fi os.FileInfo, err error) error {
		if err == nil && fi.Mode().IsRegular() {
			n += uint64(fi.Size())
		}
		return nil
	})
	return n
}

func (d *fakeDisk) FreeSpace(string) (uint64, error) {
	d.mu.Lock()
	d.calls++
	d.mu.Unlock()
	used := d.used() - d.base
	if used > d.capacity {
		return 0, nil
	}
	return d.capacity - used, nil
}

func TestPutKeepsTheDiskFloor(t *testing.T) {
	const floor = 100 << 20
	ti := testInstance{SOP: uid(4, 1), Payload: 12 << 20}

	t.Run("a Put is refused before it starts when free space is below the floor", func(t *testing.T) {
		var described bool
		s, _ := newTestStore(t, func(o *Options) {
			o.DiskFloor = floor
			o.FreeSpace = func(string) (uint64, error) { return floor - 1, nil }
			o.Describe = func(p string) (Attributes, error) { described = true; return describeTestFile(p) }
		})
		before := storeFiles(t, s)
		_, err := s.Put(t.Context(), ti.request(), bytes.NewReader(ti.dataSet()))
		if !errors.Is(err, ErrOutOfSpace) {
			t.Fatalf("Put = %v, want ErrOutOfSpace", err)
		}
		if described {
			t.Error("Describe was called for a refused Put")
		}
		sameFiles(t, before, storeFiles(t, s))
	})

	t.Run("a Put is stopped mid-write when free space falls to the floor", func(t *testing.T) {
		disk := &fakeDisk{}
		s, _ := newTestStore(t, func(o *Options) {
			disk.dir = o.Dir
			// Room for the floor, one check interval and 6 MiB: the check
			// at 4 MiB passes, the one at 8 MiB fails.
			disk.capacity = floor + spaceCheckInterval + 6<<20
			o.DiskFloor = floor
			o.FreeSpace = disk.FreeSpace
		})
		disk.base = disk.used()
		before := storeFiles(t, s)
		_, err := s.Put(t.Context(), ti.request(), bytes.NewReader(ti.dataSet()))
		if !errors.Is(err, ErrOutOfSpace) {
			t.Fatalf("Put = %v, want ErrOutOfSpace", err)
		}
		if disk.calls != 3 {
			t.Errorf("free space checked %d times, want 3 (start, 4 MiB, 8 MiB)", disk.calls)
		}
		sameFiles(t, before, storeFiles(t, s))
		if _, err := s.Instance(ti.SOP); !errors.Is(err, ErrNotFound) {
			t.Errorf("Instance = %v, want ErrNotFound", err)
		}
	})

	t.Run("a Put with room to spare passes every check", func(t *testing.T) {
		disk := &fakeDisk{}
		s, _ := newTestStore(t, func(o *Options) {
			disk.dir = o.Dir
			disk.capacity = floor + spaceCheckInterval + 64<<20
			o.DiskFloor = floor
			o.FreeSpace = disk.FreeSpace
		})
		disk.base = disk.used()
		mustPut(t, s, ti)
		if disk.calls != 4 {
			t.Errorf("free space checked %d times, want 4 (start, 4, 8, 12 MiB)", disk.calls)
		}
	})

	t.Run("without a floor free space is never asked", func(t *testing.T) {
		s, _ := newTestStore(t, func(o *Options) {
			o.FreeSpace = func(string) (uint64, error) { t.Error("FreeSpace called without a floor"); return 0, nil }
		})
		mustPut(t, s, ti)
	})

	t.Run("a full file system is reported as out of space", func(t *testing.T) {
		err := writeError(&os.PathError{Op: "write", Path: "x", Err: syscall.ENOSPC})
		if !errors.Is(err, ErrOutOfSpace) {
			t.Errorf("writeError(ENOSPC) = %v, want ErrOutOfSpace", err)
		}
	})
}

func TestConcurrentPutsAreAllDurableAndIndexed(t *testing.T) {
	const writers, each = 8, 12
	s, opts := newTestStore(t)
	var wg sync.WaitGroup
	errs := make(chan error, writers*each)
	for w := range writers {
		wg.Go(func() {
			for i := range each {
				ti := testInstance{SOP: uid(5, w, i), Series: uid(5, w), InstanceNumber: i + 1, Payload: 32 << 10, Seed: byte(w)}
				if _, err := s.Put(context.Background(), ti.request(), bytes.NewReader(ti.dataSet())); err != nil {
					errs <- err
				}
			}
		})
	}
	wg.Wait()
	close(errs)
	for err := range errs {
		t.Errorf("Put: %v", err)
	}
	s = reopen(t, s, opts) // what is indexed survives a close
	for w := range writers {
		list, err := s.Instances(uid(5, w))
		if err != nil {
			t.Fatalf("Instances: %v", err)
		}
		if len(list) != each {
			t.Errorf("series %d has %d instances, want %d", w, len(list), each)
		}
		for i, in := range list {
			ti := testInstance{SOP: uid(5, w, i), Series: uid(5, w), InstanceNumber: i + 1, Payload: 32 << 10, Seed: byte(w)}
			if in.InstanceNumber != i+1 || in.SHA256 != ti.sha() {
				t.Errorf("instance %d of series %d = %+v", i, w, in)
			}
			if _, err := os.Stat(filepath.Join(opts.Dir, in.Path)); err != nil {
				t.Errorf("file of %s: %v", in.SOPInstanceUID, err)
			}
		}
	}
	if rep := s.LastReconcile(); len(rep.Reindexed)+len(rep.MissingFiles)+len(rep.Unreadable) != 0 {
		t.Errorf("reopen found disagreement: %+v", rep)
	}
}

func TestGroupCommitSharesOneTransaction(t *testing.T) {
	const followers = 7
	release := make(chan struct{})
	var once sync.Once
	var batches [][]string
	var mu sync.Mutex
	s, _ := newTestStore(t, func(o *Options) {
		o.hooks = &hooks{committed: func(sops []string) {
			mu.Lock()
			batches = append(batches, sops)
			mu.Unlock()
			once.Do(func() { <-release }) // hold the committer after the first commit
		}}
	})
	first := make(chan error, 1)
	go func() {
		ti := testInstance{SOP: uid(6, 0), Payload: 1024}
		_, err := s.Put(context.Background(), ti.request(), bytes.NewReader(ti.dataSet()))
		first <- err
	}()
	var wg sync.WaitGroup
	waitFor(t, func() bool { mu.Lock(); defer mu.Unlock(); return len(batches) == 1 })
	for i := 1; i <= followers; i++ {
		wg.Go(func() { mustPut(t, s, testInstance{SOP: uid(6, i), Payload: 1024}) })
	}
	waitFor(t, func() bool { return len(s.ready) == followers })
	close(release)
	wg.Wait()
	if err := <-first; err != nil {
		t.Fatal(err)
	}
	mu.Lock()
	defer mu.Unlock()
	if len(batches) != 2 || len(batches[1]) != followers {
		t.Errorf("commits = %v, want one of 1 then one of %d", batches, followers)
	}
	if st := s.Stats(); st.Commits != 2 || st.Puts != followers+1 {
		t.Errorf("Stats = %+v", st)
	}
}

// waitForSpare waits until spareLoop has a spare temp file ready (it makes
// them in the background after a Put takes or misses one).
func waitForSpare(t *testing.T, s *Store) {
	t.Helper()
	deadline := time.Now().Add(5 * time.Second)
	for len(s.spares) == 0 {
		if time.Now().After(deadline) {
			t.Fatal("no spare temp file was made within 5 s of a Put")
		}
		time.Sleep(time.Millisecond)
	}
}

func TestSpareTempFiles(t *testing.T) {
	t.Run("a store makes none before its first Put", func(t *testing.T) {
		_, opts := newTestStore(t)
		if names := tmpFiles(t, opts.Dir); len(names) != 0 {
			t.Errorf("tmp after Open: %v", names)
		}
	})

	t.Run("after a Put tmp holds only empty live spares, at most spareTemps", func(t *testing.T) {
		s, opts := newTestStore(t)
		mustPut(t, s, testInstance{SOP: uid(60, 1), Payload: 1024})
		waitForSpare(t, s)
		names := tmpFiles(t, opts.Dir)
		if len(names) > spareTemps {
			t.Errorf("%d files in tmp, want at most %d: %v", len(names), spareTemps, names)
		}
		for _, name := range names {
			fi, err := os.Stat(filepath.Join(opts.Dir, tmpDir, name))
			if err != nil || fi.Size() != 0 {
				t.Errorf("tmp/%s: %v, size %d; a spare is empty", name, err, fi.Size())
			}
			s.mu.Lock()
			_, live := s.liveTemps[name]
			s.mu.Unlock()
			if !live {
				t.Errorf("tmp/%s is not live: a Reconcile would remove it", name)
			}
		}
	})

	t.Run("the next Put writes into a spare made before it", func(t *testing.T) {
		var synced []string
		s, opts := newTestStore(t, func(o *Options) {
			o.hooks = &hooks{tempSynced: func(p string) { synced = append(synced, filepath.Base(p)) }}
		})
		mustPut(t, s, testInstance{SOP: uid(61, 1), Payload: 1024})
		waitForSpare(t, s)
		before := tmpFiles(t, opts.Dir)
		mustPut(t, s, testInstance{SOP: uid(61, 2), Payload: 1024})
		if len(synced) != 2 || !slices.Contains(before, synced[1]) {
			t.Errorf("second Put wrote %v, spares before it %v", synced, before)
		}
	})

	t.Run("Reconcile leaves the spares and Puts go on using them", func(t *testing.T) {
		s, _ := newTestStore(t)
		mustPut(t, s, testInstance{SOP: uid(62, 1), Payload: 1024})
		waitForSpare(t, s)
		rep, err := s.Reconcile(t.Context())
		if err != nil || rep.TempRemoved != 0 {
			t.Errorf("Reconcile = %+v, %v; want no temp file removed", rep, err)
		}
		mustPut(t, s, testInstance{SOP: uid(62, 2), Payload: 1024})
		if _, err := s.Instance(uid(62, 2)); err != nil {
			t.Errorf("Instance after Reconcile and Put: %v", err)
		}
	})

	t.Run("Close removes the spares", func(t *testing.T) {
		s, opts := newTestStore(t)
		mustPut(t, s, testInstance{SOP: uid(63, 1), Payload: 1024})
		waitForSpare(t, s)
		if err := s.Close(); err != nil {
			t.Fatal(err)
		}
		if names := tmpFiles(t, opts.Dir); len(names) != 0 {
			t.Errorf("tmp after Close: %v", names)
		}
	})
}
