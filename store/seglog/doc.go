// Package seglog is the store's append-only segment log: the point of
// durability for received instances. It imports nothing of dwiaudit's.
//
// # Folder
//
//	Dir/FORMAT                      "dwiaudit segment log" and the format version
//	Dir/<YYYYMMDD>-<NNNNNNNNNN>.seg one segment: the receive day, then its number
//
// Segment numbers only grow. A segment is rolled when the day (of the
// Options.Now clock's location) changes or the next record would take it
// past Options.SegmentSize, so time-based retention deletes whole segments
// (DeleteSegment). A folder whose FORMAT names a newer version than
// FormatVersion is refused with ErrNewerFormat.
//
// # Record
//
//	offset  size  field
//	0       4     magic "DWR1"
//	4       4     CRC-32C (Castagnoli) of every other header byte, the UID and the payload
//	8       2     UID length, little endian (1 to 64: PS3.5 9.1)
//	10      2     flags, zero
//	12      8     payload length, little endian
//	20      n     SOP Instance UID (ASCII)
//	20+n    m     payload (for the store: the Part 10 bytes)
//
// # Appending: reserve, write, group commit
//
// Append reserves the record's offset under the log's mutex (rolling the
// segment if needed), releases it, and writes the whole record with one
// WriteAt (pwrite), so concurrent writers copy their bytes in parallel.
// It then waits for durability: one fdatasync covers every record of the
// segment written so far, and it is led by whichever waiting writer finds
// no flush running; there is no committer goroutine. A flush only ever
// covers the contiguous written prefix of the segment, so a record is
// acknowledged only when every record before it in its segment is durable
// too: replay, which stops at the first bad record, can never lose an
// acknowledged one behind a hole left by a slower or failed writer.
// Append returns only once a flush covering its record has completed.
//
// A failed write or fdatasync poisons the log (fsync errors are not
// retried: after a failed fdatasync the page cache may no longer hold the
// data); every later Append fails with the error until the log is opened
// again, which replays and truncates whatever was not acknowledged.
//
// Rolling waits until the old segment's reserved records are written and
// flushed, so only the last segment can have a torn tail. A replay mark
// past every segment held (its segment deleted) starts the next records in
// a new segment, so that replay from that mark sees them.
//
// # Reading
//
// Read(pos) verifies the record's checksum (reading it through once, from
// the page cache when it was just written) and returns its payload as an
// io.SectionReader of the segment file: no copy of the payload is kept.
// Only acknowledged records can be read.
//
// # Opening and replay
//
// Open replays every record at or after a given mark (segment, offset),
// in order, calling Options.Replay. In the last segment it stops at the
// first bad record (short header, wrong magic, impossible length, short
// payload or checksum mismatch): that is a torn tail, never acknowledged,
// and it is truncated away and flushed before appending resumes. A bad
// record in an earlier segment is corruption, not a torn tail (those were
// flushed whole before the next segment began), and Open fails with
// ErrCorrupt.
//
// Every file operation goes through the FS interface: OSFS for the real
// disk, and the strict in-memory file system in seglog/strictfs for the
// power-cut tests.
//
// # Not yet the store's point of durability
//
// store.Put still writes one Part 10 file per instance; nothing uses this
// package yet. The planned wiring: Put receives into a pooled buffer,
// parses the header from memory, appends one record and answers after the
// flush that covers it; one indexer updates bbolt in batches and stores
// the applied mark (Pos.After) in the same transaction; duplicate checks
// look at the index plus the records not yet indexed; instances are read
// as record sections (the pipeline, the previews and Describe switch from
// file paths to the store's reader); files of the old layout are read in
// place, new records carry segment and offset under a raised schema
// version; retention deletes whole segments and reconciliation becomes
// replay.
package seglog
