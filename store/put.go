package store

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strconv"
	"syscall"
)

const (
	// copyBufferSize is the read size while receiving: large enough that
	// the write syscalls are few, small enough to keep one per Put in
	// flight (scp hands over data one PDU, typically 16 to 256 KiB, at a
	// time anyway).
	copyBufferSize = 256 << 10

	// spaceCheckInterval is how many bytes a Put writes between free-space
	// checks when Options.DiskFloor is set. A check refuses when less than
	// DiskFloor plus this much is free, since that much may be written
	// before the next check. 4 MiB is a handful of MR images, and a statfs
	// per 4 MiB costs nothing next to writing them.
	spaceCheckInterval = 4 << 20
)

// PutRequest describes a data set arriving in a C-STORE.
type PutRequest struct {
	SOPClassUID       string // Affected SOP Class UID; written as (0002,0002)
	SOPInstanceUID    string // Affected SOP Instance UID; (0002,0003) and the file name
	TransferSyntaxUID string // of the presentation context; (0002,0010)
	CallingAETitle    string // the sender; (0002,0016) when it is a usable AE value
	ScannerLabel      string // the caller's name for the scanner, for reports
}

// DuplicateOutcome says how a Put related to what was already stored.
type DuplicateOutcome int

// Duplicate outcomes (doc.go, "Duplicates").
const (
	DupNone      DuplicateOutcome = iota // first copy of this SOP instance
	DupIdentical                         // same bytes already stored: nothing written
	DupReplaced                          // different bytes: stored as a new current version
	DupRestored                          // same bytes, but the stored file was pruned or lost: stored again as a new version
)

// String returns the outcome's name as used in logs and metrics.
func (d DuplicateOutcome) String() string {
	switch d {
	case DupNone:
		return "none"
	case DupIdentical:
		return "identical"
	case DupReplaced:
		return "replaced"
	case DupRestored:
		return "restored"
	}
	return "DuplicateOutcome(" + strconv.Itoa(int(d)) + ")"
}

// InstanceRef names a stored instance.
type InstanceRef struct {
	SOPInstanceUID string
	Version        int    // 1 for the first copy; the current version for DupIdentical
	Path           string // relative to Dir, slash-separated
	Duplicate      DuplicateOutcome
}

// pending is a Put whose temp file is complete, fsynced and described,
// waiting for the committer.
type pending struct {
	req     PutRequest
	attrs   Attributes
	tmpName string // base name in Dir/tmp
	size    int64  // whole file
	offset  int64  // where the data set begins
	sha256  string // of the data set, hex
	done    chan result
}

// result is the committer's answer to one pending Put.
type result struct {
	ref InstanceRef
	err error
}

// Put stores one data set, exactly as received (no file meta), as a Part
// 10 file, and returns only once the file and its index record are
// durable. On error nothing of it remains in instances/ or the index.
//
// Errors: ErrInvalidUID (before anything is written for a bad SOP
// instance, SOP class or transfer syntax UID; before the rename for a bad
// study or series UID from Describe), ErrOutOfSpace, ErrUnreadable
// (Describe failed), ErrReadOnly, ErrClosed, ctx's error, and read errors
// from data, wrapped. Once the data set is received, Put waits for the
// commit whatever ctx does, so that its answer is true.
func (s *Store) Put(ctx context.Context, req PutRequest, data io.Reader) (InstanceRef, error) {
	if s.opts.ReadOnly {
		return InstanceRef{}, ErrReadOnly
	}
	if err := checkPutRequest(req); err != nil {
		return InstanceRef{}, err
	}
	if err := s.admit(); err != nil {
		return InstanceRef{}, err
	}
	defer s.inflight.Done()

	p, err := s.receive(ctx, req, data)
	if err != nil {
		return InstanceRef{}, err
	}
	// The committer runs until every admitted call has returned, so this
	// send and the answer always arrive.
	s.ready <- p
	r := <-p.done
	if r.err == nil {
		s.stats.puts.Add(1)
		if r.ref.Duplicate == DupIdentical {
			s.stats.duplicates.Add(1)
		}
	}
	return r.ref, r.err
}

// checkPutRequest checks the UIDs that become a file name or file meta.
func checkPutRequest(req PutRequest) error {
	if err := checkUID("SOP instance UID", req.SOPInstanceUID); err != nil {
		return err
	}
	if err := checkUID("SOP class UID", req.SOPClassUID); err != nil {
		return err
	}
	return checkUID("transfer syntax UID", req.TransferSyntaxUID)
}

// receive writes the temp file (file meta, then data), fsyncs and closes
// it, and describes it. On error the temp file is gone.
func (s *Store) receive(ctx context.Context, req PutRequest, data io.Reader) (p *pending, err error) {
	ctx, cancel := s.withAbort(ctx)
	defer cancel()
	if err := s.checkSpace(); err != nil {
		return nil, err
	}
	name, f, err := s.createTemp()
	if err != nil {
		return nil, err
	}
	path := filepath.Join(s.tmp, name)
	defer func() {
		if err != nil {
			f.Close() // no-op error if already closed
			os.Remove(path)
			s.forgetTemp(name)
			if s.abort.Err() != nil && ctx.Err() != nil {
				err = fmt.Errorf("%w (while receiving: %w)", ErrClosed, err)
			}
		}
	}()

	meta := encodeFileMeta(fileMeta{
		SOPClassUID:       req.SOPClassUID,
		SOPInstanceUID:    req.SOPInstanceUID,
		TransferSyntaxUID: req.TransferSyntaxUID,
		SourceAETitle:     req.CallingAETitle,
	})
	if _, err := f.Write(meta); err != nil {
		return nil, writeError(err)
	}
	h := sha256.New()
	n, err := s.copyData(ctx, f, h, data)
	if err != nil {
		return nil, err
	}
	// From here the Put is about to be ready: tell the committer to wait
	// for it. Put sends it to the committer right after receive returns.
	s.finishing.Add(1)
	defer s.finishing.Add(-1)
	if err := f.Sync(); err != nil {
		return nil, writeError(err)
	}
	if err := f.Close(); err != nil {
		return nil, writeError(err)
	}
	if s.hooks.tempSynced != nil {
		s.hooks.tempSynced(path)
	}

	attrs, err := s.describe(path)
	if err != nil {
		return nil, err
	}
	if err := checkUID("study instance UID", attrs.StudyInstanceUID); err != nil {
		return nil, err
	}
	if err := checkUID("series instance UID", attrs.SeriesInstanceUID); err != nil {
		return nil, err
	}
	return &pending{
		req:     req,
		attrs:   attrs,
		tmpName: name,
		size:    int64(len(meta)) + n,
		offset:  int64(len(meta)),
		sha256:  hex.EncodeToString(h.Sum(nil)),
		done:    make(chan result, 1),
	}, nil
}

// copyData copies the data set into f and h, checking free space every
// spaceCheckInterval bytes, and returns the bytes copied.
func (s *Store) copyData(ctx context.Context, f *os.File, h io.Writer, data io.Reader) (int64, error) {
	bp := s.bufs.Get().(*[]byte)
	defer s.bufs.Put(bp)
	buf := *bp
	var total, sinceCheck int64
	for {
		if err := ctx.Err(); err != nil {
			return total, err
		}
		n, rerr := data.Read(buf)
		if n > 0 {
			h.Write(buf[:n])
			if _, err := f.Write(buf[:n]); err != nil {
				return total, writeError(err)
			}
			total += int64(n)
			sinceCheck += int64(n)
			if sinceCheck >= spaceCheckInterval {
				sinceCheck = 0
				if err := s.checkSpace(); err != nil {
					return total, err
				}
			}
		}
		if rerr == io.EOF {
			return total, nil
		}
		if rerr != nil {
			return total, fmt.Errorf("store: reading data set: %w", rerr)
		}
	}
}

// checkSpace refuses when free space is below DiskFloor plus what may be
// written before the next check.
func (s *Store) checkSpace() error {
	floor := s.opts.DiskFloor
	if floor == 0 {
		return nil
	}
	free, err := s.freeSpace(s.dir)
	if err != nil {
		return fmt.Errorf("store: free space of %s: %w", s.dir, err)
	}
	if free < floor+spaceCheckInterval {
		return fmt.Errorf("%w: %d bytes free, floor %d plus %d for the next write", ErrOutOfSpace, free, floor, spaceCheckInterval)
	}
	return nil
}

// writeError reports a full file system as ErrOutOfSpace.
func writeError(err error) error {
	if errors.Is(err, syscall.ENOSPC) || errors.Is(err, syscall.EDQUOT) {
		return fmt.Errorf("%w: %w", ErrOutOfSpace, err)
	}
	return fmt.Errorf("store: writing temp file: %w", err)
}

// describe calls Options.Describe, turning its failures and panics into
// ErrUnreadable.
func (s *Store) describe(path string) (a Attributes, err error) {
	defer func() {
		if r := recover(); r != nil {
			err = fmt.Errorf("%w: reading header panicked: %v", ErrUnreadable, r)
		}
	}()
	a, err = s.opts.Describe(path)
	if err != nil {
		return Attributes{}, fmt.Errorf("%w: %w", ErrUnreadable, err)
	}
	return a, nil
}

// createTemp makes a new temp file in Dir/tmp. The name is registered as
// live before the file exists, so a Reconcile running meanwhile never
// removes it.
func (s *Store) createTemp() (string, *os.File, error) {
	s.mu.Lock()
	s.tempSeq++
	name := fmt.Sprintf("put-%d-%d.tmp", os.Getpid(), s.tempSeq)
	s.liveTemps[name] = struct{}{}
	s.mu.Unlock()
	f, err := os.OpenFile(filepath.Join(s.tmp, name), os.O_WRONLY|os.O_CREATE|os.O_EXCL, fileMode)
	if err != nil {
		s.forgetTemp(name)
		return "", nil, writeError(err)
	}
	return name, f, nil
}

// forgetTemp drops a temp name from the live set.
func (s *Store) forgetTemp(name string) {
	s.mu.Lock()
	delete(s.liveTemps, name)
	s.mu.Unlock()
}

// removeTemp deletes a temp file that will not be renamed.
func (s *Store) removeTemp(name string) {
	os.Remove(filepath.Join(s.tmp, name))
	s.forgetTemp(name)
}

// instanceFileName is <SOPUID>.dcm for version 1, <SOPUID>.v<N>.dcm after.
func instanceFileName(sop string, version int) string {
	if version <= 1 {
		return sop + ".dcm"
	}
	return sop + ".v" + strconv.Itoa(version) + ".dcm"
}
