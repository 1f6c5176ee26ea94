package store

import (
	"context"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"log/slog"
	"os"
	"path/filepath"
	"sync"
	"sync/atomic"
	"time"

	bolt "go.etcd.io/bbolt"
	berrors "go.etcd.io/bbolt/errors"
)

// Names in the data folder (doc.go, "Data folder").
const (
	indexFile    = "index.db"
	instancesDir = "instances"
	tmpDir       = "tmp"
)

// File modes: the data folder holds patient data, so only its owner (the
// service account) may read it.
const (
	dirMode  = 0o700
	fileMode = 0o600
)

// lockTimeout is how long Open waits for the index's file lock. bbolt
// retries every 50 ms; half a second rides over another read-only report
// finishing, and is short enough that `dwiaudit studies` answers at once
// with ErrLocked when a server holds the data folder.
const lockTimeout = 500 * time.Millisecond

// Store is an open data folder. Its methods may be called from any
// goroutine.
type Store struct {
	dir       string // Options.Dir, cleaned
	instances string // dir/instances
	tmp       string // dir/tmp
	opts      Options
	now       func() time.Time
	loc       *time.Location
	freeSpace func(string) (uint64, error)
	log       *slog.Logger
	hooks     hooks
	db        *bolt.DB

	// ready carries received Puts to the committer goroutine, which owns
	// the renames into instances/ and the index writes of Puts.
	ready         chan *pending
	stop          chan struct{} // closed by Close once no Put is in flight
	committerDone chan struct{} // closed by the committer on exit

	// spares holds empty temp files created ahead by spareLoop (the only
	// sender) for Puts to take; wantSpare (capacity 1) wakes spareLoop
	// when a Put took one. Their names are in liveTemps.
	spares     chan tempFile
	wantSpare  chan struct{}
	sparesDone chan struct{} // closed by spareLoop on exit

	// abort is cancelled by Close, so that Puts still receiving data stop.
	abort       context.Context
	cancelAbort context.CancelFunc

	mu            sync.Mutex // guards the fields below
	closed        bool
	liveTemps     map[string]struct{} // temp names of Puts in flight
	tempSeq       uint64
	lastReconcile ReconcileReport

	// inflight counts calls admitted before Close (Put, Prune, Reconcile);
	// Close waits for them.
	inflight sync.WaitGroup
	// finishing counts Puts that have read their whole data set and are
	// fsyncing or describing it; the committer waits a little for them
	// to fill its batch.
	finishing atomic.Int64

	// writeMu serializes the writers of instances/ and the index: a
	// committer batch, Reconcile, Prune.
	writeMu sync.Mutex
	// pruneMu keeps Prune calls one at a time.
	pruneMu sync.Mutex

	bufs sync.Pool // *[]byte of headRoom+copyBufferSize, for Put

	stats struct {
		puts, duplicates, commits, dirSyncs atomic.Uint64
	}
}

// Open opens (creating if needed) the data folder opts.Dir. A writable
// Open removes leftover temp files and reconciles the folder with the
// index before it returns (see LastReconcile); a read-only Open changes
// nothing.
func Open(opts Options) (*Store, error) {
	if opts.Dir == "" {
		return nil, errors.New("store: Options.Dir is empty")
	}
	if !opts.ReadOnly && opts.Describe == nil {
		return nil, errNoDescribe
	}
	dir := filepath.Clean(opts.Dir)
	s := &Store{
		dir:       dir,
		instances: filepath.Join(dir, instancesDir),
		tmp:       filepath.Join(dir, tmpDir),
		opts:      opts,
		now:       opts.Now,
		loc:       opts.Location,
		freeSpace: opts.FreeSpace,
		log:       opts.Logger,
		liveTemps: map[string]struct{}{},
	}
	if s.now == nil {
		s.now = time.Now
	}
	if s.loc == nil {
		s.loc = time.Local
	}
	if s.freeSpace == nil {
		s.freeSpace = statfsFree
	}
	if s.log == nil {
		s.log = slog.New(slog.NewTextHandler(io.Discard, nil))
	}
	s.log = s.log.With("component", "store")
	if opts.hooks != nil {
		s.hooks = *opts.hooks
	}
	s.bufs.New = func() any { b := make([]byte, headRoom+copyBufferSize); return &b }

	path := filepath.Join(dir, indexFile)
	if opts.ReadOnly {
		if _, err := os.Stat(path); errors.Is(err, fs.ErrNotExist) {
			return nil, fmt.Errorf("%w: %s", ErrNoIndex, path)
		}
	} else if err := s.makeFolders(); err != nil {
		return nil, err
	}

	db, err := bolt.Open(path, fileMode, &bolt.Options{Timeout: lockTimeout, ReadOnly: opts.ReadOnly})
	if errors.Is(err, berrors.ErrTimeout) {
		return nil, fmt.Errorf("%w: %s", ErrLocked, path)
	}
	if err != nil {
		return nil, fmt.Errorf("store: opening index %s: %w", path, err)
	}
	s.db = db
	if opts.ReadOnly {
		err = db.View(checkSchema)
	} else {
		err = db.Update(initSchema)
		if err == nil {
			err = syncDir(dir) // index.db may be new
		}
	}
	if err != nil {
		db.Close()
		return nil, err
	}

	s.abort, s.cancelAbort = context.WithCancel(context.Background())
	if opts.ReadOnly {
		return s, nil
	}
	rep, err := s.reconcile(context.Background())
	if err != nil {
		db.Close()
		return nil, err
	}
	s.lastReconcile = rep
	s.log.Info("data folder open", "temp_removed", rep.TempRemoved, "reindexed", len(rep.Reindexed),
		"missing_files", len(rep.MissingFiles), "unreadable", len(rep.Unreadable))

	s.ready = make(chan *pending, maxBatch)
	s.stop = make(chan struct{})
	s.committerDone = make(chan struct{})
	s.spares = make(chan tempFile, spareTemps)
	s.wantSpare = make(chan struct{}, 1)
	s.sparesDone = make(chan struct{})
	go s.commitLoop()
	go s.spareLoop()
	return s, nil
}

// makeFolders creates Dir, Dir/instances and Dir/tmp, fsyncing the parent
// of each one it creates so that the folders survive a crash.
func (s *Store) makeFolders() error {
	for _, d := range []string{s.dir, s.instances, s.tmp} {
		err := os.Mkdir(d, dirMode)
		if errors.Is(err, fs.ErrExist) {
			continue
		}
		if errors.Is(err, fs.ErrNotExist) && d == s.dir {
			err = os.MkdirAll(d, dirMode)
		}
		if err != nil {
			return fmt.Errorf("store: creating %s: %w", d, err)
		}
		if err := syncDir(filepath.Dir(d)); err != nil {
			return err
		}
	}
	return nil
}

// Close stops the Store: new calls fail with ErrClosed, Puts still
// receiving their data set fail with ErrClosed, Puts already received are
// committed, and Close returns once all of them have returned and the
// index is closed. Calling it again does nothing.
func (s *Store) Close() error {
	s.mu.Lock()
	if s.closed {
		s.mu.Unlock()
		return nil
	}
	s.closed = true
	s.mu.Unlock()

	s.cancelAbort()
	s.inflight.Wait()
	if s.stop != nil {
		close(s.stop)
		<-s.committerDone
		<-s.sparesDone
	}
	if err := s.db.Close(); err != nil {
		return fmt.Errorf("store: closing index: %w", err)
	}
	return nil
}

// admit registers a call that Close must wait for; the caller defers
// s.inflight.Done() when it succeeds.
func (s *Store) admit() error {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.closed {
		return ErrClosed
	}
	s.inflight.Add(1)
	return nil
}

// writable admits a call that changes the data folder.
func (s *Store) writable() error {
	if s.opts.ReadOnly {
		return ErrReadOnly
	}
	return s.admit()
}

// withAbort returns ctx, also cancelled when Close is called.
func (s *Store) withAbort(ctx context.Context) (context.Context, context.CancelFunc) {
	ctx, cancel := context.WithCancel(ctx)
	stop := context.AfterFunc(s.abort, cancel)
	return ctx, func() { stop(); cancel() }
}

// Ping reports whether the index is open and readable (for /readyz).
func (s *Store) Ping() error {
	return s.view(checkSchema)
}

// view runs a read transaction, reporting a closed Store as ErrClosed.
func (s *Store) view(fn func(*bolt.Tx) error) error {
	s.mu.Lock()
	closed := s.closed
	s.mu.Unlock()
	if closed {
		return ErrClosed
	}
	err := s.db.View(fn)
	if errors.Is(err, berrors.ErrDatabaseNotOpen) {
		return ErrClosed
	}
	return err
}

// FreeBytes reports the free space available in the data folder's file
// system (Options.FreeSpace).
func (s *Store) FreeBytes() (uint64, error) {
	n, err := s.freeSpace(s.dir)
	if err != nil {
		return 0, fmt.Errorf("store: free space of %s: %w", s.dir, err)
	}
	return n, nil
}

// Dir returns the data folder; InstanceRef.Path and Instance.Path are
// relative to it.
func (s *Store) Dir() string { return s.dir }

// Stats are running totals since Open, for metrics.
type Stats struct {
	Puts       uint64 // Puts that succeeded, duplicates included
	Duplicates uint64 // of those, DupIdentical
	Commits    uint64 // index write transactions made for Puts
	DirSyncs   uint64 // folder fsyncs made for Puts
}

// Stats returns the running totals. Commits/Puts is the share of a bbolt
// commit each Put paid for: 1 with one sender, less with group commit.
func (s *Store) Stats() Stats {
	return Stats{
		Puts:       s.stats.puts.Load(),
		Duplicates: s.stats.duplicates.Load(),
		Commits:    s.stats.commits.Load(),
		DirSyncs:   s.stats.dirSyncs.Load(),
	}
}

// abs turns an index path (relative to Dir, slash-separated) into a file
// system path.
func (s *Store) abs(rel string) string {
	return filepath.Join(s.dir, filepath.FromSlash(rel))
}

// syncDir fsyncs a folder, making the names created or removed in it
// durable.
func syncDir(dir string) error {
	d, err := os.Open(dir)
	if err != nil {
		return fmt.Errorf("store: opening folder for fsync: %w", err)
	}
	err = d.Sync()
	if cerr := d.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		return fmt.Errorf("store: fsync folder %s: %w", dir, err)
	}
	return nil
}
