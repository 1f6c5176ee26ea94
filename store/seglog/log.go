package seglog

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"sync"
	"time"
)

const (
	// FormatVersion is the layout this package writes and reads.
	FormatVersion = 1
	// formatName is the FORMAT file's name and first line.
	formatName  = "FORMAT"
	formatTitle = "dwiaudit segment log"
	// maxFormatFile bounds the FORMAT file read at Open.
	maxFormatFile = 4096
	// segSuffix ends every segment file's name.
	segSuffix = ".seg"
	// DefaultSegmentSize rolls segments at 1 GiB: few files per day at
	// hospital rates, and a whole segment is still cheap to delete.
	DefaultSegmentSize = 1 << 30
)

// Options configure a Log. The zero value is usable.
type Options struct {
	// FS is the file system written through; nil means OSFS.
	FS FS
	// SegmentSize rolls a segment before a record would take it past
	// this many bytes (a larger record gets a segment of its own). Zero
	// means DefaultSegmentSize.
	SegmentSize int64
	// Now is the clock whose day names segments; nil means time.Now.
	Now func() time.Time
	// From is the replay mark: records at or after it are passed to
	// Replay. The zero Pos replays everything.
	From Pos
	// Replay, if set, is called at Open for every good record at or
	// after From, in log order. An error stops Open and is returned.
	Replay func(Entry) error
}

// Segment describes one segment file.
type Segment struct {
	ID   uint64
	Day  string // YYYYMMDD, the receive day
	Name string // file name inside the folder
	Size int64  // bytes of acknowledged records
}

// Stats counts the log's work since Open.
type Stats struct {
	Appends uint64 // records acknowledged
	Flushes uint64 // fdatasync calls on segments
}

// Log is an open segment log. Its methods are safe for concurrent use.
type Log struct {
	dir     string
	fs      FS
	now     func() time.Time
	segSize int64
	bufs    sync.Pool // *[]byte of crcChunk, for checksum reads

	mu   sync.Mutex
	cond *sync.Cond // on mu: writes finished, flushes done, rolls, failures
	// The fields below are guarded by mu.
	segs      map[uint64]*segment
	active    *segment // appended to; nil before the first record
	nextID    uint64
	rolling   bool  // a goroutine is replacing active
	failed    error // sticky: set by a failed write or flush
	closed    bool
	appending int // Appends between reservation and return
	stats     Stats
}

// segment is one open segment file. Every field but the first four is
// guarded by Log.mu.
type segment struct {
	id   uint64
	day  string
	name string
	f    File

	reserved int64           // end of the last reserved record
	written  int64           // end of the contiguous prefix whose writes finished
	early    map[int64]int64 // writes finished past a gap: start -> end
	durable  int64           // covered by the last completed flush
	syncing  bool            // a writer is leading a flush
}

// Open opens (creating if needed) the log in dir, replays it from
// opts.From and truncates a torn tail, ready to append.
func Open(dir string, opts Options) (*Log, error) {
	l := &Log{dir: dir, fs: opts.FS, now: opts.Now, segSize: opts.SegmentSize, segs: map[uint64]*segment{}, nextID: 1}
	if l.fs == nil {
		l.fs = OSFS{}
	}
	if l.now == nil {
		l.now = time.Now
	}
	if l.segSize <= 0 {
		l.segSize = DefaultSegmentSize
	}
	l.cond = sync.NewCond(&l.mu)
	l.bufs.New = func() any { b := make([]byte, crcChunk); return &b }
	if err := l.fs.MkdirAll(dir); err != nil {
		return nil, fmt.Errorf("seglog: create %s: %w", dir, err)
	}
	names, err := l.fs.ReadDir(dir)
	if err != nil {
		return nil, fmt.Errorf("seglog: list %s: %w", dir, err)
	}
	segs, err := parseSegmentNames(names)
	if err != nil {
		return nil, fmt.Errorf("seglog: %s: %w", dir, err)
	}
	if err := l.checkFormat(names, len(segs) > 0); err != nil {
		return nil, err
	}
	for _, s := range segs {
		f, err := l.fs.OpenFile(filepath.Join(dir, s.name), os.O_RDWR)
		if err != nil {
			l.closeFiles()
			return nil, fmt.Errorf("seglog: open segment: %w", err)
		}
		s.f = f
		l.segs[s.id] = s
		l.nextID = s.id + 1
	}
	if err := l.replay(segs, opts.From, opts.Replay); err != nil {
		l.closeFiles()
		return nil, err
	}
	// New records must land at or after the mark, or a caller replaying
	// from it would never see them: if the mark names a segment past the
	// last one held (its records deleted), appending starts a new one.
	if n := len(segs); n > 0 && segs[n-1].id >= opts.From.Segment {
		l.active = segs[n-1]
	}
	l.nextID = max(l.nextID, opts.From.Segment+1)
	return l, nil
}

// checkFormat reads FORMAT, or writes it in a folder with no segments.
func (l *Log) checkFormat(names []string, haveSegments bool) error {
	name := filepath.Join(l.dir, formatName)
	found := false
	for _, n := range names {
		found = found || n == formatName
	}
	if !found {
		if haveSegments {
			return fmt.Errorf("%w: %s has segments but no %s", ErrNotLog, l.dir, formatName)
		}
		body := fmt.Sprintf("%s\nversion %d\n", formatTitle, FormatVersion)
		if err := writeFileDurably(l.fs, name, []byte(body)); err != nil {
			return fmt.Errorf("seglog: write %s: %w", name, err)
		}
		return nil
	}
	b, err := readWholeFile(l.fs, name)
	if err != nil {
		return fmt.Errorf("seglog: read %s: %w", name, err)
	}
	lines := strings.Split(strings.TrimRight(string(b), "\n"), "\n")
	if len(lines) < 2 || lines[0] != formatTitle || !strings.HasPrefix(lines[1], "version ") {
		return fmt.Errorf("%w: %s does not start %q and a version line", ErrNotLog, name, formatTitle)
	}
	v, err := strconv.Atoi(strings.TrimPrefix(lines[1], "version "))
	if err != nil || v < 1 {
		return fmt.Errorf("%w: %s: bad version line %q", ErrNotLog, name, lines[1])
	}
	if v > FormatVersion {
		return fmt.Errorf("%w: %s is version %d, this dwiaudit reads up to version %d; run the newer dwiaudit that wrote it, or restore the folder from before the upgrade",
			ErrNewerFormat, l.dir, v, FormatVersion)
	}
	return nil
}

// parseSegmentNames picks the segment files out of a folder listing,
// ordered by number.
func parseSegmentNames(names []string) ([]*segment, error) {
	var segs []*segment
	seen := map[uint64]string{}
	for _, n := range names {
		if !strings.HasSuffix(n, segSuffix) {
			continue
		}
		day, num, ok := strings.Cut(strings.TrimSuffix(n, segSuffix), "-")
		id, err := strconv.ParseUint(num, 10, 64)
		if _, derr := time.Parse("20060102", day); !ok || err != nil || derr != nil || id == 0 {
			return nil, fmt.Errorf("%w: unexpected segment name %q", ErrNotLog, n)
		}
		if prev, dup := seen[id]; dup {
			return nil, fmt.Errorf("%w: segments %q and %q share number %d", ErrNotLog, prev, n, id)
		}
		seen[id] = n
		segs = append(segs, &segment{id: id, day: day, name: n})
	}
	sort.Slice(segs, func(i, j int) bool { return segs[i].id < segs[j].id })
	return segs, nil
}

// replay scans the segments from the mark, calls fn for each record at or
// after it, and truncates the last segment's torn tail.
func (l *Log) replay(segs []*segment, from Pos, fn func(Entry) error) error {
	bp := l.bufs.Get().(*[]byte)
	defer l.bufs.Put(bp)
	for i, s := range segs {
		size, err := s.f.Size()
		if err != nil {
			return fmt.Errorf("seglog: size of %s: %w", s.name, err)
		}
		last := i == len(segs)-1
		var off int64
		switch {
		case s.id < from.Segment && !last:
			s.reserved, s.written, s.durable = size, size, size
			continue // applied already, and whole: flushed before the next segment began
		case s.id == from.Segment:
			off = from.Offset
			if off > size || off < 0 {
				return fmt.Errorf("%w: mark %v, segment %s holds %d bytes", ErrBadMark, from, s.name, size)
			}
		}
		for off < size {
			h, uid, err := readRecord(s.f, off, size, *bp)
			if err != nil {
				if !errors.As(err, new(badRecord)) {
					return fmt.Errorf("seglog: replay %s at %d: %w", s.name, off, err)
				}
				if !last {
					return fmt.Errorf("%w: segment %s offset %d: %v", ErrCorrupt, s.name, off, err)
				}
				// A torn tail: never acknowledged. Cut it off durably
				// before anything is appended behind it.
				if err := s.f.Truncate(off); err != nil {
					return fmt.Errorf("seglog: truncate torn tail of %s at %d: %w", s.name, off, err)
				}
				if err := s.f.Datasync(); err != nil {
					return fmt.Errorf("seglog: fdatasync %s after truncation: %w", s.name, err)
				}
				break
			}
			next := off + recordSize(uid, h.payload)
			if fn != nil && s.id >= from.Segment {
				e := Entry{Pos: Pos{s.id, off}, UID: uid, Size: h.payload, Next: Pos{s.id, next}}
				if err := fn(e); err != nil {
					return fmt.Errorf("seglog: replay at %v: %w", e.Pos, err)
				}
			}
			off = next
		}
		s.reserved, s.written, s.durable = off, off, off
	}
	return nil
}

// Append writes one record and returns its position once a flush that
// covers it has completed.
func (l *Log) Append(uid string, payload []byte) (Pos, error) {
	if len(uid) < 1 || len(uid) > maxUID {
		return Pos{}, fmt.Errorf("%w: %d bytes", ErrBadUID, len(uid))
	}
	if int64(len(payload)) > MaxPayload {
		return Pos{}, fmt.Errorf("%w: %d bytes, at most %d", ErrTooLarge, len(payload), int64(MaxPayload))
	}
	size := recordSize(uid, int64(len(payload)))

	l.mu.Lock()
	l.appending++ // before a roll can create a file, so Close waits for it
	s, err := l.reserveLocked(size)
	if err != nil {
		l.appending--
		l.cond.Broadcast()
		l.mu.Unlock()
		return Pos{}, err
	}
	off := s.reserved
	s.reserved += size
	l.mu.Unlock()

	var hb [headerSize + maxUID]byte
	hdr := hb[:headerSize+len(uid)]
	encodeHeader(hdr, uid, payload)
	_, err = s.f.WriteAt(hdr, off)
	if err == nil {
		_, err = s.f.WriteAt(payload, off+int64(len(hdr)))
	}

	l.mu.Lock()
	defer l.mu.Unlock()
	defer func() { l.appending--; l.cond.Broadcast() }()
	if err != nil {
		l.failLocked(fmt.Errorf("seglog: write %s at %d: %w", s.name, off, err))
		return Pos{}, l.failed
	}
	s.finishWriteLocked(off, off+size)
	l.cond.Broadcast()
	if err := l.waitDurableLocked(s, off+size); err != nil {
		return Pos{}, err
	}
	l.stats.Appends++
	return Pos{s.id, off}, nil
}

// reserveLocked returns the segment the next record of size bytes goes
// into, rolling to a new one if the day changed or the size is reached.
func (l *Log) reserveLocked(size int64) (*segment, error) {
	for {
		switch {
		case l.closed:
			return nil, ErrClosed
		case l.failed != nil:
			return nil, l.failed
		case l.rolling:
			l.cond.Wait()
			continue
		}
		day := l.now().Format("20060102")
		a := l.active
		if a != nil && a.day == day && (a.reserved == 0 || a.reserved+size <= l.segSize) {
			return a, nil
		}
		if err := l.rollLocked(day); err != nil {
			return nil, err
		}
	}
}

// rollLocked waits until the active segment's records are written and
// flushed (so only the last segment can ever hold a torn tail), then
// creates the next segment. Other appenders wait while rolling is set.
func (l *Log) rollLocked(day string) error {
	l.rolling = true
	defer func() { l.rolling = false; l.cond.Broadcast() }()
	if a := l.active; a != nil {
		for a.durable < a.reserved && l.failed == nil {
			if !a.syncing && a.written == a.reserved && a.written > a.durable {
				if err := l.flushLocked(a); err != nil {
					return err
				}
				continue
			}
			l.cond.Wait()
		}
		if l.failed != nil {
			return l.failed
		}
	}
	id := l.nextID
	name := fmt.Sprintf("%s-%010d%s", day, id, segSuffix)
	path := filepath.Join(l.dir, name)
	l.mu.Unlock()
	f, err := l.fs.OpenFile(path, os.O_RDWR|os.O_CREATE|os.O_EXCL)
	if err == nil {
		if err = l.fs.SyncDir(l.dir); err != nil {
			f.Close()
		}
	}
	l.mu.Lock()
	if err != nil {
		l.failLocked(fmt.Errorf("seglog: create segment %s: %w", path, err))
		return l.failed
	}
	s := &segment{id: id, day: day, name: name, f: f}
	l.segs[id] = s
	l.active = s
	l.nextID = id + 1
	return nil
}

// finishWriteLocked records that [start, end) is written and advances the
// contiguous written prefix.
func (s *segment) finishWriteLocked(start, end int64) {
	if start != s.written {
		if s.early == nil {
			s.early = map[int64]int64{}
		}
		s.early[start] = end
		return
	}
	s.written = end
	for {
		next, ok := s.early[s.written]
		if !ok {
			return
		}
		delete(s.early, s.written)
		s.written = next
	}
}

// waitDurableLocked returns once a completed flush covers end. The first
// waiter to find no flush running, with its record in the written prefix,
// leads the next one; the others wait for it (group commit).
func (l *Log) waitDurableLocked(s *segment, end int64) error {
	for {
		if s.durable >= end {
			return nil
		}
		if l.failed != nil {
			return l.failed
		}
		if !s.syncing && s.written >= end {
			if err := l.flushLocked(s); err != nil {
				return err
			}
			continue
		}
		l.cond.Wait()
	}
}

// flushLocked runs one fdatasync of s, without holding mu, covering the
// written prefix as it stood when the flush began.
func (l *Log) flushLocked(s *segment) error {
	s.syncing = true
	target := s.written
	l.mu.Unlock()
	err := s.f.Datasync()
	l.mu.Lock()
	s.syncing = false
	l.stats.Flushes++
	l.cond.Broadcast()
	if err != nil {
		l.failLocked(fmt.Errorf("seglog: fdatasync %s: %w", s.name, err))
		return l.failed
	}
	if target > s.durable {
		s.durable = target
	}
	return nil
}

// failLocked makes err the log's sticky error.
func (l *Log) failLocked(err error) {
	if l.failed == nil {
		l.failed = err
	}
	l.cond.Broadcast()
}

// Record is one record read back: its payload is a section of the segment
// file, read without copying, valid until its segment is deleted or the
// log closed.
type Record struct {
	Pos Pos
	UID string
	*io.SectionReader
}

// Read returns the acknowledged record at pos, its checksum verified.
func (l *Log) Read(pos Pos) (*Record, error) {
	l.mu.Lock()
	s, ok := l.segs[pos.Segment]
	var size int64
	if ok {
		size = s.durable
	}
	closed := l.closed
	l.mu.Unlock()
	if closed {
		return nil, ErrClosed
	}
	if !ok {
		return nil, fmt.Errorf("%w: %v", ErrNoSegment, pos)
	}
	bp := l.bufs.Get().(*[]byte)
	defer l.bufs.Put(bp)
	h, uid, err := readRecord(s.f, pos.Offset, size, *bp)
	if errors.As(err, new(badRecord)) {
		return nil, fmt.Errorf("%w: segment %s offset %d: %v", ErrCorrupt, s.name, pos.Offset, err)
	}
	if err != nil {
		return nil, fmt.Errorf("seglog: read %s at %d: %w", s.name, pos.Offset, err)
	}
	start := pos.Offset + headerSize + int64(h.uidLen)
	return &Record{Pos: pos, UID: uid, SectionReader: io.NewSectionReader(s.f, start, h.payload)}, nil
}

// ReadAll is Read and the payload copied out.
func (l *Log) ReadAll(pos Pos) (string, []byte, error) {
	r, err := l.Read(pos)
	if err != nil {
		return "", nil, err
	}
	var b bytes.Buffer
	b.Grow(int(r.Size()))
	if _, err := b.ReadFrom(r); err != nil {
		return "", nil, fmt.Errorf("seglog: read %v: %w", pos, err)
	}
	return r.UID, b.Bytes(), nil
}

// Segments lists the segments, oldest first.
func (l *Log) Segments() []Segment {
	l.mu.Lock()
	defer l.mu.Unlock()
	out := make([]Segment, 0, len(l.segs))
	for _, s := range l.segs {
		out = append(out, Segment{ID: s.id, Day: s.day, Name: s.name, Size: s.durable})
	}
	sort.Slice(out, func(i, j int) bool { return out[i].ID < out[j].ID })
	return out
}

// DeleteSegment removes a whole segment (retention). The active segment
// cannot be deleted; a reader still holding one of its records gets read
// errors.
func (l *Log) DeleteSegment(id uint64) error {
	l.mu.Lock()
	s, ok := l.segs[id]
	switch {
	case l.closed:
		l.mu.Unlock()
		return ErrClosed
	case !ok:
		l.mu.Unlock()
		return fmt.Errorf("%w: %d", ErrNoSegment, id)
	case s == l.active:
		l.mu.Unlock()
		return fmt.Errorf("%w: %s", ErrActiveSegment, s.name)
	}
	delete(l.segs, id)
	l.mu.Unlock()
	err := s.f.Close()
	if rerr := l.fs.Remove(filepath.Join(l.dir, s.name)); rerr != nil {
		return fmt.Errorf("seglog: delete segment %s: %w", s.name, rerr)
	}
	if err := l.fs.SyncDir(l.dir); err != nil {
		return fmt.Errorf("seglog: sync %s after deleting %s: %w", l.dir, s.name, err)
	}
	if err != nil {
		return fmt.Errorf("seglog: close segment %s: %w", s.name, err)
	}
	return nil
}

// Stats reports the appends and flushes since Open.
func (l *Log) Stats() Stats {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.stats
}

// Close waits for running Appends and closes the segment files. Every
// acknowledged record is already durable.
func (l *Log) Close() error {
	l.mu.Lock()
	if l.closed {
		l.mu.Unlock()
		return ErrClosed
	}
	l.closed = true
	for l.appending > 0 {
		l.cond.Wait()
	}
	l.mu.Unlock()
	return l.closeFiles()
}

// closeFiles closes every segment file.
func (l *Log) closeFiles() error {
	l.mu.Lock()
	defer l.mu.Unlock()
	var errs []error
	for _, s := range l.segs {
		if s.f != nil {
			if err := s.f.Close(); err != nil {
				errs = append(errs, fmt.Errorf("seglog: close %s: %w", s.name, err))
			}
		}
	}
	return errors.Join(errs...)
}
