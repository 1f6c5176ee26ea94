package seglog

import "errors"

// Errors of the segment log. Errors returned by its functions wrap these
// with the file and offset concerned.
var (
	// ErrNewerFormat: the folder was written by a newer version of the log.
	ErrNewerFormat = errors.New("seglog: folder written by a newer format version")
	// ErrNotLog: the folder holds segments but no FORMAT file, or an
	// unreadable one.
	ErrNotLog = errors.New("seglog: not a segment log folder")
	// ErrCorrupt: a record fails its checks where no torn tail can be.
	ErrCorrupt = errors.New("seglog: corrupt record")
	// ErrClosed: the log is closed.
	ErrClosed = errors.New("seglog: log closed")
	// ErrBadUID: the SOP Instance UID is empty or longer than 64 bytes.
	ErrBadUID = errors.New("seglog: UID must be 1 to 64 bytes")
	// ErrTooLarge: the payload exceeds MaxPayload.
	ErrTooLarge = errors.New("seglog: payload too large")
	// ErrNoSegment: the position names a segment the log does not hold.
	ErrNoSegment = errors.New("seglog: no such segment")
	// ErrActiveSegment: the segment being appended to cannot be deleted.
	ErrActiveSegment = errors.New("seglog: segment is being appended to")
	// ErrBadMark: the replay mark lies past the end of its segment.
	ErrBadMark = errors.New("seglog: replay mark past the end of its segment")
)
