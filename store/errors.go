package store

import "errors"

// Sentinel errors. Callers test for them with errors.Is; most come wrapped
// with detail.
var (
	// ErrClosed means the Store was closed (or is closing: a Put still
	// receiving its data set when Close is called fails with it).
	ErrClosed = errors.New("store: closed")

	// ErrReadOnly means a write (Put, Prune, Reconcile) was asked of a
	// Store opened with Options.ReadOnly.
	ErrReadOnly = errors.New("store: opened read-only")

	// ErrLocked means another process (or another Store in this one) holds
	// the index open for writing, so Open gave up after lockTimeout.
	ErrLocked = errors.New("store: index is locked by another store")

	// errSchema means the index was written by a newer dwiaudit (its schema
	// version is above schemaVersion), or is not a dwiaudit index.
	errSchema = errors.New("store: unsupported index schema")

	// ErrNoIndex means a read-only Open found no index.db in the data
	// folder: nothing was ever stored there.
	ErrNoIndex = errors.New("store: no index in data folder")

	// errNoDescribe means a writable Store was opened without
	// Options.Describe, which Put and Reconcile need.
	errNoDescribe = errors.New("store: Options.Describe is required")

	// ErrInvalidUID means a UID that would become part of a path (SOP
	// instance, study, series) or of the file meta (SOP class, transfer
	// syntax) breaks the UI rules (PS3.5 9.1, 6.2). Nothing was written.
	ErrInvalidUID = errors.New("store: invalid UID")

	// ErrOutOfSpace means free space in the data folder's file system is,
	// or would fall, below Options.DiskFloor, or the file system is full.
	// Nothing was kept. A C-STORE SCP answers A700 (PS3.4 B.2.3 Table B.2-1,
	// "Refused: Out of Resources").
	ErrOutOfSpace = errors.New("store: out of disk space")

	// ErrUnreadable means Options.Describe could not read the header of a
	// file (on Put: nothing was kept).
	ErrUnreadable = errors.New("store: instance unreadable")

	// ErrNotFound means no study, series or instance has that UID.
	ErrNotFound = errors.New("store: not found")

	// errPruned means the instance is indexed but its file was removed by
	// Prune after the retention period.
	errPruned = errors.New("store: instance file pruned")

	// errMissingFile means the instance is indexed but its file is gone
	// for another reason (removed by hand, lost with a disk).
	errMissingFile = errors.New("store: instance file missing")

	// ErrDailyListExists means a day already has a frozen daily list;
	// it is kept, never replaced.
	ErrDailyListExists = errors.New("store: daily list already kept")
)
