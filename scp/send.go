package scp

import (
	"context"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"sync"
	"time"

	"dwiaudit/scp/dimse"
	"dwiaudit/scp/part10"
)

// SendResult is the outcome for one file given to SendFiles.
type SendResult struct {
	Path    string
	Skipped bool // not a DICOM Part 10 file; nothing was sent
	Status  dimse.Status
	Comment string // Error Comment of the response
	Err     error  // no response: the file could not be read or the association failed
	Bytes   int64  // size of the file
}

// Failed reports whether the file was not stored: a transport or read
// error, or a failure status.
func (r SendResult) Failed() bool {
	return !r.Skipped && (r.Err != nil || r.Status.Class() == dimse.ClassFailure)
}

// SendSummary totals a SendFiles run.
type SendSummary struct {
	Files    int // DICOM files found
	Skipped  int // files that are not DICOM
	Sent     int // answered with success
	Warnings int // answered with a warning status
	Failures int // failure status or no response
	Bytes    int64
	Statuses map[dimse.Status]int // every status received, for the summary
	Duration time.Duration
}

// SendOptions configures SendFiles.
type SendOptions struct {
	Dialer   *Dialer
	Addr     string
	Parallel int // associations at once; 0 means 1

	// Progress, if set, is called once per file as it finishes (skipped
	// files included). Calls are serialized.
	Progress func(SendResult)

	// Found, if set, is called once the file list is known, with the
	// number of DICOM files to send and their total size.
	Found func(files int, bytes int64)
}

type sendFile struct {
	path string
	meta part10.Meta
	off  int64
	size int64
}

// CollectFiles walks paths (files and folders, recursively) and reads the
// file meta of each file. Files that are not Part 10 are returned in
// skipped. Files are in lexical order so a series goes out in order.
func collectFiles(paths []string) (files []sendFile, skipped []string, err error) {
	for _, root := range paths {
		err := filepath.WalkDir(root, func(path string, d fs.DirEntry, err error) error {
			if err != nil {
				return err
			}
			if d.IsDir() || !d.Type().IsRegular() {
				return nil
			}
			meta, off, err := part10.ReadMetaFile(path)
			if err != nil || meta.MediaStorageSOPClassUID == "" || meta.TransferSyntaxUID == "" || meta.MediaStorageSOPInstanceUID == "" {
				skipped = append(skipped, path)
				return nil
			}
			info, err := d.Info()
			if err != nil {
				return err
			}
			files = append(files, sendFile{path: path, meta: meta, off: off, size: info.Size()})
			return nil
		})
		if err != nil {
			return nil, nil, err
		}
	}
	sort.Slice(files, func(i, j int) bool { return files[i].path < files[j].path })
	return files, skipped, nil
}

// contextsFor proposes one presentation context per SOP class and
// transfer syntax of the files: data sets are sent exactly as stored, so
// each context offers only the file's own transfer syntax. Verification
// is always proposed.
func contextsFor(files []sendFile) []Context {
	seen := map[contextKey]bool{}
	out := []Context{{AbstractSyntax: VerificationSOPClass, TransferSyntaxes: []string{ImplicitVRLittleEndian}}}
	for _, f := range files {
		k := contextKey{f.meta.MediaStorageSOPClassUID, f.meta.TransferSyntaxUID}
		if !seen[k] {
			seen[k] = true
			out = append(out, Context{AbstractSyntax: k.abstract, TransferSyntaxes: []string{k.ts}})
		}
	}
	return out
}

// batches splits files into runs whose contexts fit one association.
func batches(files []sendFile) [][]sendFile {
	var out [][]sendFile
	seen := map[contextKey]bool{}
	start := 0
	for i, f := range files {
		k := contextKey{f.meta.MediaStorageSOPClassUID, f.meta.TransferSyntaxUID}
		if !seen[k] && len(seen)+1 >= maxProposedContexts { // +1 for Verification
			out = append(out, files[start:i])
			start, seen = i, map[contextKey]bool{}
		}
		seen[k] = true
	}
	if start < len(files) {
		out = append(out, files[start:])
	}
	return out
}

// SendFiles sends the Part 10 files under paths with C-STORE, over
// opts.Parallel associations. It returns the totals; the error is for
// problems that stopped it from looking at the files at all.
func SendFiles(ctx context.Context, opts SendOptions, paths []string) (SendSummary, error) {
	start := time.Now()
	files, skipped, err := collectFiles(paths)
	if err != nil {
		return SendSummary{}, err
	}
	sum := SendSummary{Files: len(files), Skipped: len(skipped), Statuses: map[dimse.Status]int{}}
	var mu sync.Mutex // guards sum and serializes Progress
	report := func(r SendResult) {
		mu.Lock()
		defer mu.Unlock()
		switch {
		case r.Skipped:
		case r.Err != nil:
			sum.Failures++
		default:
			sum.Statuses[r.Status]++
			switch r.Status.Class() {
			case dimse.ClassSuccess:
				sum.Sent++
				sum.Bytes += r.Bytes
			case dimse.ClassWarning:
				sum.Warnings++
				sum.Bytes += r.Bytes
			default:
				sum.Failures++
			}
		}
		if opts.Progress != nil {
			opts.Progress(r)
		}
	}
	if opts.Found != nil {
		var total int64
		for _, f := range files {
			total += f.size
		}
		opts.Found(len(files), total)
	}
	for _, p := range skipped {
		report(SendResult{Path: p, Skipped: true})
	}

	n := max(opts.Parallel, 1)
	var wg sync.WaitGroup
	for w := range n {
		// Worker w takes every n-th file, so each association sends
		// whole stretches of a series in order.
		var mine []sendFile
		for i := w; i < len(files); i += n {
			mine = append(mine, files[i])
		}
		if len(mine) == 0 {
			continue
		}
		wg.Go(func() { sendWorker(ctx, opts, mine, report) })
	}
	wg.Wait()
	sum.Duration = time.Since(start)
	return sum, nil
}

// sendWorker sends its files over as few associations as their contexts
// allow. After an association fails, it dials again for the next file;
// if dialling fails, the rest of the batch is reported failed with that
// error.
func sendWorker(ctx context.Context, opts SendOptions, files []sendFile, report func(SendResult)) {
	d := opts.Dialer
	if d == nil {
		d = &Dialer{}
	}
	for _, batch := range batches(files) {
		contexts := contextsFor(batch)
		var a *Association
		for i, f := range batch {
			if a == nil {
				var err error
				a, err = d.Dial(ctx, opts.Addr, contexts)
				if err != nil {
					for _, g := range batch[i:] {
						report(SendResult{Path: g.path, Err: err, Bytes: g.size})
					}
					a = nil
					break
				}
			}
			res := SendResult{Path: f.path, Bytes: f.size}
			if !a.Accepted(f.meta.MediaStorageSOPClassUID, f.meta.TransferSyntaxUID) {
				res.Err = fmt.Errorf("%w: SOP class %s in %s was refused by the peer", errNoContext, f.meta.MediaStorageSOPClassUID, f.meta.TransferSyntaxUID)
				report(res)
				continue
			}
			rsp, err := a.storeFile(ctx, f.path, f.meta, f.off)
			res.Status, res.Comment, res.Err = rsp.Status, rsp.ErrorComment, err
			report(res)
			if err != nil && !errors.Is(err, os.ErrNotExist) && a.err != nil {
				a = nil // association lost; dial again for the next file
			}
		}
		if a != nil {
			a.Close()
		}
	}
}
