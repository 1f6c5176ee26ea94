package store

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"time"

	bolt "go.etcd.io/bbolt"

	"dwiaudit/scp/part10"
)

// reconcileChunk is how many records one Reconcile transaction writes:
// after a lost index every file is re-indexed, and small transactions keep
// memory flat and let readers in between.
const reconcileChunk = 256

// ReconcileReport says what Reconcile found. Paths are relative to Dir,
// slash-separated, sorted.
type ReconcileReport struct {
	TempRemoved  int      // leftover temp files removed from Dir/tmp
	Reindexed    []string // instance files without a record, now indexed (via Describe)
	MissingFiles []string // records whose file is gone, now marked Missing
	Unreadable   []string // files in instances/ that could not be indexed; left in place
}

// Reconcile brings the index and the data folder back into agreement
// after a crash or a change by hand: it removes temp files no Put owns,
// indexes instance files that have no record, and marks records whose
// file is gone (as pruned if the file was past its retention, else as
// missing). It never deletes an instance file. Open runs it; it may also
// run while Puts are in progress.
func (s *Store) Reconcile(ctx context.Context) (ReconcileReport, error) {
	if err := s.writable(); err != nil {
		return ReconcileReport{}, err
	}
	defer s.inflight.Done()
	ctx, cancel := s.withAbort(ctx)
	defer cancel()
	s.writeMu.Lock()
	defer s.writeMu.Unlock()
	rep, err := s.reconcile(ctx)
	if err != nil {
		return rep, err
	}
	s.mu.Lock()
	s.lastReconcile = rep
	s.mu.Unlock()
	s.log.Info("reconciled", "temp_removed", rep.TempRemoved, "reindexed", len(rep.Reindexed),
		"missing_files", len(rep.MissingFiles), "unreadable", len(rep.Unreadable))
	return rep, nil
}

// LastReconcile returns the report of the last Reconcile, or of the one
// Open ran. It is empty for a read-only Store.
func (s *Store) LastReconcile() ReconcileReport {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.lastReconcile
}

// reconcile does the work; the caller holds writeMu or is Open.
func (s *Store) reconcile(ctx context.Context) (ReconcileReport, error) {
	var rep ReconcileReport
	n, err := s.removeStaleTemps()
	rep.TempRemoved = n
	if err != nil {
		return rep, err
	}
	if err := s.indexOrphans(ctx, &rep); err != nil {
		return rep, err
	}
	if err := s.markGone(ctx, &rep); err != nil {
		return rep, err
	}
	sort.Strings(rep.Reindexed)
	sort.Strings(rep.MissingFiles)
	sort.Strings(rep.Unreadable)
	return rep, nil
}

// removeStaleTemps removes everything in Dir/tmp that no Put in flight
// owns: a crash leaves temp files that will never be renamed.
func (s *Store) removeStaleTemps() (int, error) {
	entries, err := os.ReadDir(s.tmp)
	if err != nil {
		return 0, fmt.Errorf("store: listing %s: %w", s.tmp, err)
	}
	removed := 0
	for _, e := range entries {
		s.mu.Lock()
		_, live := s.liveTemps[e.Name()]
		s.mu.Unlock()
		if live {
			continue
		}
		if err := os.RemoveAll(filepath.Join(s.tmp, e.Name())); err != nil {
			return removed, fmt.Errorf("store: removing temp file: %w", err)
		}
		removed++
	}
	if removed > 0 {
		return removed, syncDir(s.tmp)
	}
	return 0, nil
}

// orphan is an instance file without a record, inspected and ready to be
// indexed.
type orphan struct {
	rel         string
	nameVersion int // from the file name, 0 if the name is not ours
	meta        part10.Meta
	offset      int64
	size        int64
	sha256      string
	modTime     time.Time
	attrs       Attributes
}

// indexOrphans walks instances/ and indexes every file the index does not
// know.
func (s *Store) indexOrphans(ctx context.Context, rep *ReconcileReport) error {
	var batch []orphan
	flush := func() error {
		if len(batch) == 0 {
			return nil
		}
		err := s.db.Update(func(tx *bolt.Tx) error {
			for i := range batch {
				if err := indexOrphan(tx, &batch[i]); err != nil {
					return err
				}
			}
			return nil
		})
		if err != nil {
			return fmt.Errorf("store: indexing files without a record: %w", err)
		}
		for _, o := range batch {
			rep.Reindexed = append(rep.Reindexed, o.rel)
		}
		batch = batch[:0]
		return nil
	}
	err := filepath.WalkDir(s.instances, func(p string, d fs.DirEntry, err error) error {
		if cerr := ctx.Err(); cerr != nil {
			return cerr
		}
		if err != nil {
			if p == s.instances {
				return err
			}
			rep.Unreadable = append(rep.Unreadable, s.rel(p))
			if d != nil && d.IsDir() {
				return fs.SkipDir
			}
			return nil
		}
		if d.IsDir() {
			return nil
		}
		rel := s.rel(p)
		if !d.Type().IsRegular() {
			rep.Unreadable = append(rep.Unreadable, rel)
			return nil
		}
		sop, version, ok := parseInstanceFileName(d.Name())
		if ok {
			known, err := s.knowsPath(sop, rel)
			if err != nil || known {
				return err
			}
		}
		o, err := s.inspect(p, rel)
		if err != nil {
			rep.Unreadable = append(rep.Unreadable, rel)
			return nil
		}
		if ok && o.meta.MediaStorageSOPInstanceUID != sop {
			ok, version = false, 0 // named for another instance: trust the meta
		}
		if !ok {
			known, err := s.knowsPath(o.meta.MediaStorageSOPInstanceUID, rel)
			if err != nil || known {
				return err
			}
		}
		o.nameVersion = version
		batch = append(batch, o)
		if len(batch) >= reconcileChunk {
			return flush()
		}
		return nil
	})
	if err != nil {
		return fmt.Errorf("store: walking %s: %w", s.instances, err)
	}
	return flush()
}

// knowsPath reports whether a version of sop is the file at rel.
func (s *Store) knowsPath(sop, rel string) (bool, error) {
	var known bool
	err := s.view(func(tx *bolt.Tx) error {
		r, err := getInstance(tx, sop)
		known = r.hasPath(rel)
		return err
	})
	return known, err
}

// inspect reads what the index needs from an instance file we did not
// just write: its file meta, data-set hash, size and time, and its header
// through Describe.
func (s *Store) inspect(abs, rel string) (orphan, error) {
	f, err := os.Open(abs)
	if err != nil {
		return orphan{}, err
	}
	defer f.Close()
	meta, off, err := readFileMeta(f)
	if err != nil {
		return orphan{}, err
	}
	for _, c := range [][2]string{
		{"SOP instance UID", meta.MediaStorageSOPInstanceUID},
		{"SOP class UID", meta.MediaStorageSOPClassUID},
		{"transfer syntax UID", meta.TransferSyntaxUID},
	} {
		if err := checkUID(c[0], c[1]); err != nil {
			return orphan{}, err
		}
	}
	if _, err := f.Seek(off, io.SeekStart); err != nil {
		return orphan{}, err
	}
	h := sha256.New()
	n, err := io.Copy(h, f)
	if err != nil {
		return orphan{}, err
	}
	fi, err := f.Stat()
	if err != nil {
		return orphan{}, err
	}
	attrs, err := s.describe(abs)
	if err != nil {
		return orphan{}, err
	}
	if err := checkUID("study instance UID", attrs.StudyInstanceUID); err != nil {
		return orphan{}, err
	}
	if err := checkUID("series instance UID", attrs.SeriesInstanceUID); err != nil {
		return orphan{}, err
	}
	return orphan{
		rel:     rel,
		meta:    meta,
		offset:  off,
		size:    off + n,
		sha256:  hex.EncodeToString(h.Sum(nil)),
		modTime: fi.ModTime().UTC(), // the best receive time left: a crash between rename and commit keeps it close
		attrs:   attrs,
	}, nil
}

// indexOrphan adds o as a version of its instance. It keeps the version
// number from the file name when free (so a file renamed just before a
// crash takes the number Put gave it), else takes the next one.
func indexOrphan(tx *bolt.Tx, o *orphan) error {
	sop := o.meta.MediaStorageSOPInstanceUID
	r, err := getInstance(tx, sop)
	if err != nil {
		return err
	}
	if r.hasPath(o.rel) {
		return nil
	}
	if r == nil {
		r = &instanceRecord{SOPInstanceUID: sop}
	}
	version := o.nameVersion
	if version < 1 || r.hasVersion(version) {
		version = r.maxVersion() + 1
	}
	nv := versionRecord{
		Version:             version,
		Path:                o.rel,
		SOPClassUID:         o.meta.MediaStorageSOPClassUID,
		TransferSyntaxUID:   o.meta.TransferSyntaxUID,
		StudyInstanceUID:    o.attrs.StudyInstanceUID,
		SeriesInstanceUID:   o.attrs.SeriesInstanceUID,
		InstanceNumber:      o.attrs.InstanceNumber,
		FrameOfReferenceUID: o.attrs.FrameOfReferenceUID,
		Size:                o.size,
		DataSetOffset:       o.offset,
		SHA256:              o.sha256,
		CallingAETitle:      o.meta.SourceApplicationEntityTitle,
		ReceivedAt:          o.modTime,
		Reindexed:           true,
	}
	prev := r.current()
	var prevCopy *versionRecord
	if prev != nil {
		c := *prev
		prevCopy = &c
	}
	r.Versions = append(r.Versions, nv)
	sort.Slice(r.Versions, func(i, j int) bool { return r.Versions[i].Version < r.Versions[j].Version })
	if r.current().Version == version {
		err = linkVersion(tx, sop, prevCopy, &nv, o.attrs)
	} else {
		err = addReceived(tx, sop, &nv) // an older version: totals unchanged
	}
	if err != nil {
		return err
	}
	if err := lowerPruneMark(tx, nv.ReceivedAt); err != nil {
		return err
	}
	return putJSON(tx.Bucket(bucketInstances), []byte(sop), r)
}

// hasVersion reports whether version number v is taken.
func (r *instanceRecord) hasVersion(v int) bool {
	if r == nil {
		return false
	}
	for _, x := range r.Versions {
		if x.Version == v {
			return true
		}
	}
	return false
}

// gone is a version whose file state changed.
type gone struct {
	sop     string
	version int
	rel     string
	pruned  bool // past retention: mark pruned rather than missing
	back    bool // marked missing, but the file is there again
}

// markGone checks the file of every live version and marks those gone.
func (s *Store) markGone(ctx context.Context, rep *ReconcileReport) error {
	var cutoff time.Time
	if s.opts.Retention > 0 {
		cutoff = s.now().Add(-s.opts.Retention)
	}
	var changes []gone
	err := s.view(func(tx *bolt.Tx) error {
		return tx.Bucket(bucketInstances).ForEach(func(k, raw []byte) error {
			if err := ctx.Err(); err != nil {
				return err
			}
			var r instanceRecord
			if err := json.Unmarshal(raw, &r); err != nil {
				return fmt.Errorf("store: index record %.80q: %w", k, err)
			}
			for _, v := range r.Versions {
				switch {
				case v.Pruned:
				case v.Missing:
					if s.exists(v.Path) {
						changes = append(changes, gone{sop: r.SOPInstanceUID, version: v.Version, rel: v.Path, back: true})
					}
				case !s.exists(v.Path):
					old := !cutoff.IsZero() && v.ReceivedAt.Before(cutoff)
					changes = append(changes, gone{sop: r.SOPInstanceUID, version: v.Version, rel: v.Path, pruned: old})
				}
			}
			return nil
		})
	})
	if err != nil {
		return fmt.Errorf("store: checking instance files: %w", err)
	}
	now := s.now().UTC()
	for start := 0; start < len(changes); start += reconcileChunk {
		chunk := changes[start:min(start+reconcileChunk, len(changes))]
		err := s.db.Update(func(tx *bolt.Tx) error {
			for _, g := range chunk {
				if err := setFileState(tx, g, now); err != nil {
					return err
				}
			}
			return nil
		})
		if err != nil {
			return fmt.Errorf("store: marking missing files: %w", err)
		}
	}
	for _, g := range changes {
		if !g.pruned && !g.back {
			rep.MissingFiles = append(rep.MissingFiles, g.rel)
		}
	}
	return nil
}

// setFileState applies one gone to its record.
func setFileState(tx *bolt.Tx, g gone, now time.Time) error {
	r, err := getInstance(tx, g.sop)
	if err != nil || r == nil {
		return err
	}
	for i := range r.Versions {
		v := &r.Versions[i]
		if v.Version != g.version {
			continue
		}
		switch {
		case g.back:
			v.Missing = false
		case g.pruned:
			v.Pruned, v.Missing = true, false
		default:
			v.Missing = true
		}
	}
	return putJSON(tx.Bucket(bucketInstances), []byte(g.sop), r)
}

// parseInstanceFileName splits "<uid>.dcm" and "<uid>.v<N>.dcm" (N >= 2).
func parseInstanceFileName(name string) (sop string, version int, ok bool) {
	base, found := strings.CutSuffix(name, ".dcm")
	if !found {
		return "", 0, false
	}
	version = 1
	if i := strings.LastIndex(base, ".v"); i >= 0 {
		n, err := strconv.Atoi(base[i+2:])
		if err != nil || n < 2 || base[i+2] == '0' || base[i+2] == '+' || base[i+2] == '-' {
			return "", 0, false
		}
		base, version = base[:i], n
	}
	if checkUID("SOP instance UID", base) != nil {
		return "", 0, false
	}
	return base, version, true
}

// rel turns a path under Dir into an index path.
func (s *Store) rel(abs string) string {
	r, err := filepath.Rel(s.dir, abs)
	if err != nil {
		return filepath.ToSlash(abs)
	}
	return filepath.ToSlash(r)
}
