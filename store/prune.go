package store

import (
	"bytes"
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"time"

	bolt "go.etcd.io/bbolt"
)

// pruneChunk is how many files Prune removes per turn of writeMu: Puts
// wait for writeMu, so a turn must stay short even when a first Prune on
// an old data folder has a year of files to remove.
const pruneChunk = 256

// keyPrunedThrough (in bucketMeta) is the receive time, 8-byte big-endian
// Unix ns, before which every version is pruned: Prune starts its scan
// there instead of at the oldest record. Reconcile lowers it when it
// indexes an older file.
var keyPrunedThrough = []byte("pruned_through")

// PruneReport says what Prune did.
type PruneReport struct {
	FilesRemoved int   // instance files deleted
	BytesFreed   int64 // their size
	Marked       int   // versions marked Pruned (including files already gone)
}

// pruneTarget is a version past its retention.
type pruneTarget struct {
	sop     string
	version int
	rel     string
	size    int64
}

// Prune removes instance files received before Now()-Retention. Their
// records stay, marked Pruned, so that findings and measures keep their
// context; OpenInstance then gives errPruned. Series and study folders
// left empty are removed. With Retention 0 it does nothing.
func (s *Store) Prune(ctx context.Context) (PruneReport, error) {
	var rep PruneReport
	if err := s.writable(); err != nil {
		return rep, err
	}
	defer s.inflight.Done()
	if s.opts.Retention <= 0 {
		return rep, nil
	}
	ctx, cancel := s.withAbort(ctx)
	defer cancel()
	// One Prune at a time: writeMu is taken per chunk only.
	s.pruneMu.Lock()
	defer s.pruneMu.Unlock()

	cutoff := s.now().Add(-s.opts.Retention).UTC()
	targets, err := s.pruneTargets(cutoff)
	if err != nil {
		return rep, err
	}
	for start := 0; start < len(targets); start += pruneChunk {
		if err := ctx.Err(); err != nil {
			return rep, err
		}
		chunk := targets[start:min(start+pruneChunk, len(targets))]
		if err := s.pruneFiles(chunk, &rep); err != nil {
			return rep, err
		}
	}
	err = s.db.Update(func(tx *bolt.Tx) error {
		meta := tx.Bucket(bucketMeta)
		if old := meta.Get(keyPrunedThrough); len(old) == 8 && int64(binary.BigEndian.Uint64(old)) >= cutoff.UnixNano() {
			return nil // the clock went back: keep the later mark
		}
		return meta.Put(keyPrunedThrough, receivedTimeKey(cutoff))
	})
	if err != nil {
		return rep, fmt.Errorf("store: recording prune: %w", err)
	}
	s.log.Info("pruned", "files_removed", rep.FilesRemoved, "bytes_freed", rep.BytesFreed, "marked", rep.Marked)
	return rep, nil
}

// pruneTargets lists the versions received in [pruned_through, cutoff)
// that are not yet marked pruned.
func (s *Store) pruneTargets(cutoff time.Time) ([]pruneTarget, error) {
	var targets []pruneTarget
	err := s.view(func(tx *bolt.Tx) error {
		start := tx.Bucket(bucketMeta).Get(keyPrunedThrough)
		end := receivedTimeKey(cutoff)
		c := tx.Bucket(bucketReceived).Cursor()
		k, _ := c.First()
		if len(start) == 8 {
			k, _ = c.Seek(start)
		}
		for ; k != nil && bytes.Compare(k, end) < 0; k, _ = c.Next() {
			_, version, sop, ok := parseReceivedKey(k)
			if !ok {
				continue
			}
			r, err := getInstance(tx, sop)
			if err != nil {
				return err
			}
			if r == nil {
				continue
			}
			for _, v := range r.Versions {
				if v.Version == version && !v.Pruned {
					targets = append(targets, pruneTarget{sop: sop, version: version, rel: v.Path, size: v.Size})
				}
			}
		}
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("store: listing files to prune: %w", err)
	}
	return targets, nil
}

// pruneFiles removes the files of a chunk, makes the removals durable,
// removes folders left empty, then marks the records. A crash in between
// leaves records whose file is gone past retention, which the next Prune
// or Reconcile marks pruned.
func (s *Store) pruneFiles(chunk []pruneTarget, rep *PruneReport) error {
	s.writeMu.Lock()
	defer s.writeMu.Unlock()
	seriesDirs := map[string]bool{}
	for _, t := range chunk {
		abs := s.abs(t.rel)
		err := os.Remove(abs)
		switch {
		case err == nil:
			rep.FilesRemoved++
			rep.BytesFreed += t.size
			seriesDirs[filepath.Dir(abs)] = true
		case errors.Is(err, fs.ErrNotExist):
		default:
			return fmt.Errorf("store: pruning %s: %w", t.rel, err)
		}
	}
	if err := s.removeEmptyFolders(seriesDirs); err != nil {
		return err
	}
	now := s.now().UTC()
	err := s.db.Update(func(tx *bolt.Tx) error {
		for _, t := range chunk {
			if err := setFileState(tx, gone{sop: t.sop, version: t.version, rel: t.rel, pruned: true}, now); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		return fmt.Errorf("store: marking pruned files: %w", err)
	}
	rep.Marked += len(chunk)
	return nil
}

// removeEmptyFolders removes series folders left empty, then their study
// folders if empty too, and fsyncs every folder whose entries changed.
// The caller holds writeMu, so no Put is about to rename into them.
func (s *Store) removeEmptyFolders(seriesDirs map[string]bool) error {
	syncs := map[string]bool{}
	studies := map[string]bool{}
	for d := range seriesDirs {
		if !s.inInstances(d, 2) {
			syncs[d] = true // a hand-placed file elsewhere: leave its folder
			continue
		}
		if os.Remove(d) == nil { // fails unless empty
			studies[filepath.Dir(d)] = true
			syncs[filepath.Dir(d)] = true
		} else {
			syncs[d] = true
		}
	}
	for d := range studies {
		if os.Remove(d) == nil {
			delete(syncs, d)
			syncs[s.instances] = true
		}
	}
	dirs := make([]string, 0, len(syncs))
	for d := range syncs {
		dirs = append(dirs, d)
	}
	sort.Strings(dirs)
	for _, d := range dirs {
		if err := syncDir(d); err != nil && !errors.Is(err, fs.ErrNotExist) {
			return err
		}
	}
	return nil
}

// inInstances reports whether dir is exactly depth levels below instances/.
func (s *Store) inInstances(dir string, depth int) bool {
	rel, err := filepath.Rel(s.instances, dir)
	sep := string(filepath.Separator)
	if err != nil || rel == "." || rel == ".." || strings.HasPrefix(rel, ".."+sep) {
		return false
	}
	return strings.Count(rel, sep)+1 == depth
}

// lowerPruneMark moves keyPrunedThrough back to t if a version received at
// t is being indexed after Prune went past it.
func lowerPruneMark(tx *bolt.Tx, t time.Time) error {
	meta := tx.Bucket(bucketMeta)
	old := meta.Get(keyPrunedThrough)
	if len(old) != 8 || int64(binary.BigEndian.Uint64(old)) <= t.UnixNano() {
		return nil
	}
	return meta.Put(keyPrunedThrough, receivedTimeKey(t))
}
