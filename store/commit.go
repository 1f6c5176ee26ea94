package store

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path"
	"path/filepath"
	"sort"
	"sync"
	"time"

	bolt "go.etcd.io/bbolt"
)

// Group commit limits.
const (
	// maxBatch caps the Puts in one commit, so that one transaction and
	// the folder fsyncs before it stay short for the first Put waiting.
	maxBatch = 64

	// groupWait is how long the committer holds a batch open for Puts
	// that have received their whole data set and are fsyncing or being
	// described: they will be ready within about one fsync. It never waits
	// for a Put still reading from the network, and stops waiting as soon
	// as no such Put is left; 2 ms is about one fsync on a slow disk, so a
	// Put joining the batch costs less than the commit it saves.
	groupWait = 2 * time.Millisecond
)

// commitLoop is the committer goroutine: it owns renames into instances/
// and the index writes of Puts.
func (s *Store) commitLoop() {
	defer close(s.committerDone)
	timer := time.NewTimer(time.Hour)
	timer.Stop()
	for {
		var first *pending
		select {
		case first = <-s.ready:
		case <-s.stop:
			return
		}
		batch := s.gather(first, timer)
		s.commitBatch(batch)
	}
}

// gather collects the Puts ready now, and waits up to groupWait for those
// about to be ready (s.finishing), up to maxBatch.
func (s *Store) gather(first *pending, timer *time.Timer) []*pending {
	batch := []*pending{first}
	armed := false
	defer func() {
		if armed {
			timer.Stop()
		}
	}()
	for len(batch) < maxBatch {
		select {
		case p := <-s.ready:
			batch = append(batch, p)
			continue
		default:
		}
		if s.finishing.Load() == 0 {
			return batch // nobody is about to be ready
		}
		if !armed {
			timer.Reset(groupWait)
			armed = true
		}
		select {
		case p := <-s.ready:
			batch = append(batch, p)
		case <-timer.C:
			armed = false
			return batch
		}
	}
	return batch
}

// placed is a Put whose file has been renamed into place and awaits its
// index record.
type placed struct {
	i    int            // index in the batch
	prev *versionRecord // the version it replaces as current, if any
	nv   versionRecord
	rel  string // its path
}

// commitBatch places a batch of received Puts: decides duplicates, renames
// files into place, fsyncs each touched folder once, commits every index
// record in one transaction, and answers each Put.
func (s *Store) commitBatch(batch []*pending) {
	s.writeMu.Lock()
	defer s.writeMu.Unlock()

	results := make([]result, len(batch))
	defer func() {
		for i, p := range batch {
			p.done <- results[i]
		}
	}()
	failAll := func(err error) {
		for i, p := range batch {
			s.removeTemp(p.tmpName)
			results[i] = result{err: err}
		}
	}

	// Working copies of the records this batch touches; two Puts of one
	// SOP instance in a batch see each other through them.
	recs := map[string]*instanceRecord{}
	// s.db, not s.view: Close marks the Store closed before it waits for
	// the Puts in flight, and those must still be committed.
	err := s.db.View(func(tx *bolt.Tx) error {
		for _, p := range batch {
			sop := p.req.SOPInstanceUID
			if _, ok := recs[sop]; ok {
				continue
			}
			r, err := getInstance(tx, sop)
			if err != nil {
				return err
			}
			recs[sop] = r
		}
		return nil
	})
	if err != nil {
		failAll(err)
		return
	}

	now := s.now().UTC()
	var done []placed
	syncs := map[string]bool{} // folders to fsync
	for i, p := range batch {
		sop := p.req.SOPInstanceUID
		rec := recs[sop]
		cur := rec.current()
		if cur != nil && cur.SHA256 == p.sha256 && cur.live() && s.exists(cur.Path) {
			s.removeTemp(p.tmpName)
			results[i] = result{ref: InstanceRef{SOPInstanceUID: sop, Version: cur.Version, Path: cur.Path, Duplicate: DupIdentical}}
			continue
		}
		rel, version, newDirs, err := s.place(p, rec.maxVersion()+1)
		if err != nil {
			s.removeTemp(p.tmpName)
			results[i] = result{err: err}
			continue
		}
		s.forgetTemp(p.tmpName)
		for _, d := range newDirs {
			syncs[d] = true
		}
		syncs[filepath.Dir(s.abs(rel))] = true

		nv := versionRecord{
			Version:             version,
			Path:                rel,
			SOPClassUID:         p.req.SOPClassUID,
			TransferSyntaxUID:   p.req.TransferSyntaxUID,
			StudyInstanceUID:    p.attrs.StudyInstanceUID,
			SeriesInstanceUID:   p.attrs.SeriesInstanceUID,
			InstanceNumber:      p.attrs.InstanceNumber,
			FrameOfReferenceUID: p.attrs.FrameOfReferenceUID,
			Size:                p.size,
			DataSetOffset:       p.offset,
			SHA256:              p.sha256,
			CallingAETitle:      p.req.CallingAETitle,
			ScannerLabel:        p.req.ScannerLabel,
			ReceivedAt:          now,
		}
		dup := DupNone
		var prev *versionRecord
		if cur != nil {
			c := *cur
			prev = &c
			dup = DupReplaced
			if cur.SHA256 == p.sha256 {
				dup = DupRestored
			}
		}
		if rec == nil {
			rec = &instanceRecord{SOPInstanceUID: sop}
			recs[sop] = rec
		}
		rec.Versions = append(rec.Versions, nv)
		done = append(done, placed{i: i, prev: prev, nv: nv, rel: rel})
		results[i] = result{ref: InstanceRef{SOPInstanceUID: sop, Version: version, Path: rel, Duplicate: dup}}
	}
	if len(done) == 0 {
		return
	}

	// Make the renames durable before the index points at them.
	dirs := make([]string, 0, len(syncs))
	for d := range syncs {
		dirs = append(dirs, d)
	}
	sort.Strings(dirs)
	if err := s.syncDirs(dirs); err != nil {
		s.unplace(done, results, err)
		return
	}

	err = s.db.Update(func(tx *bolt.Tx) error {
		for _, d := range done {
			p := batch[d.i]
			if err := linkVersion(tx, p.req.SOPInstanceUID, d.prev, &d.nv, p.attrs); err != nil {
				return err
			}
		}
		b := tx.Bucket(bucketInstances)
		for _, d := range done {
			sop := batch[d.i].req.SOPInstanceUID
			if err := putJSON(b, []byte(sop), recs[sop]); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		s.unplace(done, results, fmt.Errorf("store: committing index: %w", err))
		return
	}
	s.stats.commits.Add(1)
	if s.hooks.committed != nil {
		sops := make([]string, len(done))
		for j, d := range done {
			sops[j] = batch[d.i].req.SOPInstanceUID
		}
		s.hooks.committed(sops)
	}
}

// syncDirs fsyncs folders, in parallel when there are several: the file
// system merges concurrent fsyncs into one journal commit (ext4 and XFS
// do; common practice), where one after the other each pays for its own.
func (s *Store) syncDirs(dirs []string) error {
	errs := make([]error, len(dirs))
	var wg sync.WaitGroup
	for i, d := range dirs {
		wg.Go(func() { errs[i] = syncDir(d) })
	}
	wg.Wait()
	for i, d := range dirs {
		if errs[i] != nil {
			return errs[i]
		}
		s.stats.dirSyncs.Add(1)
		if s.hooks.dirSynced != nil {
			s.hooks.dirSynced(d)
		}
	}
	return nil
}

// place renames a received temp file into its series folder under the
// first free version number from version on, creating the study and
// series folders if needed. It returns the path, the version and the
// parents of any folder it created, which must be fsynced.
func (s *Store) place(p *pending, version int) (rel string, v int, syncParents []string, err error) {
	study, series := p.attrs.StudyInstanceUID, p.attrs.SeriesInstanceUID
	studyDir := filepath.Join(s.instances, study)
	seriesDir := filepath.Join(studyDir, series)
	for _, d := range []string{studyDir, seriesDir} {
		err := os.Mkdir(d, dirMode)
		switch {
		case err == nil:
			syncParents = append(syncParents, filepath.Dir(d))
		case !errors.Is(err, fs.ErrExist):
			return "", 0, nil, fmt.Errorf("store: creating %s: %w", d, err)
		}
	}
	// Only the committer and Reconcile (both under writeMu) add files
	// here, but a file may have been dropped in by hand: never overwrite.
	for ; ; version++ {
		rel = path.Join(instancesDir, study, series, instanceFileName(p.req.SOPInstanceUID, version))
		_, err := os.Lstat(s.abs(rel))
		if errors.Is(err, fs.ErrNotExist) {
			break
		}
		if err != nil {
			return "", 0, nil, fmt.Errorf("store: checking %s: %w", rel, err)
		}
	}
	from := filepath.Join(s.tmp, p.tmpName)
	if err := os.Rename(from, s.abs(rel)); err != nil {
		return "", 0, nil, fmt.Errorf("store: moving instance into place: %w", err)
	}
	if s.hooks.renamed != nil {
		s.hooks.renamed(from, s.abs(rel))
	}
	return rel, version, syncParents, nil
}

// unplace undoes the renames of a batch whose folder fsync or commit
// failed, so that no file without a record is left, and fails those Puts.
func (s *Store) unplace(done []placed, results []result, err error) {
	dirs := map[string]bool{}
	rels := map[string]bool{}
	for _, d := range done {
		abs := s.abs(d.rel)
		os.Remove(abs)
		dirs[filepath.Dir(abs)] = true
		rels[d.rel] = true
		results[d.i] = result{err: err}
	}
	// A second identical copy in the same batch was answered with the
	// file just removed: it fails too.
	for j, r := range results {
		if r.err == nil && r.ref.Duplicate == DupIdentical && rels[r.ref.Path] {
			results[j] = result{err: err}
		}
	}
	for d := range dirs {
		os.Remove(d)               // only if empty
		os.Remove(filepath.Dir(d)) // the study folder, likewise
		syncDir(filepath.Dir(d))   // best effort: the error is already being reported
	}
}

// exists reports whether the file at an index path is present.
func (s *Store) exists(rel string) bool {
	_, err := os.Lstat(s.abs(rel))
	return err == nil
}
