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

	// headRoom is the room before the read area of a copy buffer where
	// the file meta waits to go out with the first data-set bytes in one
	// write. Ours is at most a few hundred bytes: two 64-character UIDs,
	// a transfer syntax UID, our implementation's identity and an AE
	// title (encodeFileMeta).
	headRoom = 1 << 10

	// spaceCheckInterval is how many bytes a Put writes between free-space
	// checks when Options.DiskFloor is set. A check refuses when less than
	// DiskFloor plus this much is free, since that much may be written
	// before the next check. 4 MiB is a handful of MR images, and a statfs
	// per 4 MiB costs nothing next to writing them.
	spaceCheckInterval = 4 << 20

	// spareTemps is how many empty temp files spareLoop keeps created
	// ahead of need: one per association a busy node receives on at once
	// (four in the benchmark, a scanner or two in practice). A Put that
	// finds none creates its own. A crash leaves at most this many empty
	// files in Dir/tmp, which the next Open removes like any leftover.
	spareTemps = 4
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
	tf, err := s.takeTemp()
	if err != nil {
		return nil, err
	}
	name, f := tf.name, tf.f
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

	meta, err := encodeFileMeta(req.SOPClassUID, req.SOPInstanceUID, req.TransferSyntaxUID, req.CallingAETitle)
	if err != nil {
		return nil, err
	}
	h := sha256.New()
	n, err := s.copyData(ctx, f, meta, h, data)
	if err != nil {
		return nil, err
	}
	// From here the Put is about to be ready: tell the committer to wait
	// for it. Put sends it to the committer right after receive returns.
	s.finishing.Add(1)
	defer s.finishing.Add(-1)

	// Describe reads the complete file through the page cache while the
	// fsync waits for the disk: the header parse costs nothing on a
	// Put's answer time, and the rename still waits for both.
	synced := make(chan error, 1)
	go func() {
		err := f.Sync()
		if cerr := f.Close(); err == nil {
			err = cerr
		}
		synced <- err
	}()
	attrs, derr := s.describe(path)
	if err := <-synced; err != nil {
		return nil, writeError(err)
	}
	if s.hooks.tempSynced != nil {
		s.hooks.tempSynced(path)
	}
	if derr != nil {
		return nil, derr
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

// copyData writes head and then the data set into f, hashing the data
// set into h and checking free space every spaceCheckInterval bytes, and
// returns the data-set bytes copied. head goes out with the first bytes of
// the data set, in one write.
func (s *Store) copyData(ctx context.Context, f *os.File, head []byte, h io.Writer, data io.Reader) (int64, error) {
	bp := s.bufs.Get().(*[]byte)
	defer s.bufs.Put(bp)
	buf := *bp
	if len(head) > headRoom { // never: our file meta is a few hundred bytes
		if _, err := f.Write(head); err != nil {
			return 0, writeError(err)
		}
		head = nil
	}
	pre := copy(buf, head)
	var total, sinceCheck int64
	for {
		if err := ctx.Err(); err != nil {
			return total, err
		}
		n, rerr := data.Read(buf[pre : pre+copyBufferSize])
		if n > 0 || pre > 0 {
			h.Write(buf[pre : pre+n])
			if _, err := f.Write(buf[:pre+n]); err != nil {
				return total, writeError(err)
			}
			pre = 0
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

// tempFile is an open, empty temp file in Dir/tmp whose name is live.
type tempFile struct {
	name string // base name in Dir/tmp
	f    *os.File
}

// takeTemp returns a temp file for a Put: one created ahead by spareLoop
// if there is one, else a new one. Either way it asks spareLoop to create
// the next, so that the next Put finds it ready.
func (s *Store) takeTemp() (tempFile, error) {
	select {
	case tf := <-s.spares:
		s.askSpare()
		return tf, nil
	default:
	}
	s.askSpare()
	return s.createTemp()
}

// askSpare wakes spareLoop without waiting for it.
func (s *Store) askSpare() {
	select {
	case s.wantSpare <- struct{}{}:
	default:
	}
}

// spareLoop keeps up to spareTemps empty temp files created ahead of the
// Puts that will take them, so that creating the file is off a Put's
// path: it overlaps the Put's network receive and fsyncs instead of
// adding to its answer time. A create is not cheap: on the ext4 data
// folder of the benchmark machine (mounted without a journal) it took
// 0.2 to 1 ms, nearly all of it the kernel's inode allocator stepping over
// recently deleted inodes (perf: __ext4_new_inode -> find_inode_bit ->
// recently_deleted); on a journalling file system a create can also wait
// for the transaction the last fsync is committing (common practice).
// spareLoop creates nothing until the first Put, so an idle Store leaves
// Dir/tmp empty, and on stop it removes the files no Put took. A spare it
// fails to create is simply not there: the Put then creates its own file
// and reports the error.
func (s *Store) spareLoop() {
	defer close(s.sparesDone)
	for {
		select {
		case <-s.wantSpare:
		case <-s.stop:
			s.dropSpares()
			return
		}
		for len(s.spares) < cap(s.spares) && !s.stopping() {
			tf, err := s.createTemp()
			if err != nil {
				break
			}
			s.spares <- tf // only spareLoop sends, so this never blocks
		}
	}
}

// stopping reports whether Close has stopped the background goroutines.
func (s *Store) stopping() bool {
	select {
	case <-s.stop:
		return true
	default:
		return false
	}
}

// dropSpares removes the spare temp files; Close calls it (through
// spareLoop) once no Put is left to take them.
func (s *Store) dropSpares() {
	for {
		select {
		case tf := <-s.spares:
			tf.f.Close()
			s.removeTemp(tf.name)
		default:
			return
		}
	}
}

// createTemp makes a new temp file in Dir/tmp. The name is registered as
// live before the file exists, so a Reconcile running meanwhile never
// removes it.
func (s *Store) createTemp() (tempFile, error) {
	s.mu.Lock()
	s.tempSeq++
	name := fmt.Sprintf("put-%d-%d.tmp", os.Getpid(), s.tempSeq)
	s.liveTemps[name] = struct{}{}
	s.mu.Unlock()
	f, err := os.OpenFile(filepath.Join(s.tmp, name), os.O_WRONLY|os.O_CREATE|os.O_EXCL, fileMode)
	if err != nil {
		s.forgetTemp(name)
		return tempFile{}, writeError(err)
	}
	return tempFile{name: name, f: f}, nil
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
