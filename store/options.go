package store

import (
	"log/slog"
	"time"
)

// Options configures a Store. The zero value of every field but Dir (and
// Describe, for a writable Store) is usable.
type Options struct {
	// Dir is the data folder; it is created if missing (see the package
	// documentation for its layout).
	Dir string

	// DiskFloor is how many bytes must stay free in Dir's file system; a
	// Put that would go below it fails with ErrOutOfSpace. Free space is
	// checked before a Put starts and every spaceCheckInterval (4 MiB)
	// bytes it writes, and a check needs DiskFloor plus 4 MiB free, since
	// that much may be written before the next one. 0 means no floor (a
	// full disk still gives ErrOutOfSpace).
	DiskFloor uint64

	// Retention is how long instance files are kept after their receive
	// time; Prune removes older ones. 0 keeps them forever. (The product
	// default of 30 days lives in the caller's configuration.)
	Retention time.Duration

	// Location is the time zone of a "receive day" (Studies(day),
	// Instance.ReceiveDay); nil means time.Local.
	Location *time.Location

	// Now is the clock; nil means time.Now. It may be called from several
	// goroutines.
	Now func() time.Time

	// Logger gets a line per Open, Reconcile and Prune, with counts only:
	// no UIDs and never patient identifiers. nil discards.
	Logger *slog.Logger

	// Describe reads the header of a complete Part 10 file at path and
	// returns what the index keeps about it. Put calls it on the temp
	// file once every byte is written, while its fsync runs (the file
	// may still be open for that; the header comes from the page cache),
	// and renames the file only when both are done; Reconcile calls it on
	// instance files without a record. It must only read the file.
	// Required for a writable Store. It may be called from several
	// goroutines; a panic in it is recovered and reported as
	// ErrUnreadable.
	Describe func(path string) (Attributes, error)

	// FreeSpace reports the bytes available to us in the file system
	// holding dir; nil means statfs(2) (Bavail * Bsize). Tests inject it.
	FreeSpace func(dir string) (uint64, error)

	// ReadOnly opens the index read-only, for reports from a data folder
	// no server holds. Put, Prune and Reconcile then fail with
	// ErrReadOnly; nothing in Dir is created or changed. If a writer
	// holds the index, Open fails with ErrLocked after lockTimeout.
	ReadOnly bool

	// hooks observe the durability steps, for tests of their order.
	hooks *hooks
}

// Attributes are what Describe reads from an instance's header: the
// identifiers that place it in the study/series tree and the values the
// reports show. Empty strings and zero numbers mean "not present".
type Attributes struct {
	StudyInstanceUID    string // (0020,000D); must be a valid UID
	SeriesInstanceUID   string // (0020,000E); must be a valid UID
	StudyDate           string // (0008,0020) DA
	StudyTime           string // (0008,0030) TM
	AccessionNumber     string // (0008,0050)
	PatientID           string // (0010,0020)
	PatientName         string // (0010,0010)
	Modality            string // (0008,0060)
	SeriesDescription   string // (0008,103E)
	StationName         string // (0008,1010)
	DeviceSerialNumber  string // (0018,1000)
	InstitutionName     string // (0008,0080)
	Manufacturer        string // (0008,0070)
	FrameOfReferenceUID string // (0020,0052)
	SeriesNumber        int    // (0020,0011)
	InstanceNumber      int    // (0020,0013)
}

// hooks are called after each durability step, so that a test can check
// their order. Every field may be nil.
type hooks struct {
	tempSynced func(path string)      // a temp file was fsynced and closed
	renamed    func(from, to string)  // a temp file was renamed into place
	dirSynced  func(dir string)       // a folder was fsynced
	committed  func(sopUIDs []string) // an index transaction committed these
}
