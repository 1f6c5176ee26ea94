// Package store keeps the DICOM instances dwiaudit receives, durably, and
// the index that finds them again. Only this package touches the data
// folder or the bbolt index; scp hands it a data set, audit reads back
// what it stored.
//
// # Data folder
//
//	Dir/index.db                                        bbolt index (see Buckets)
//	Dir/instances/<StudyUID>/<SeriesUID>/<SOPUID>.dcm   first version of an instance
//	Dir/instances/<StudyUID>/<SeriesUID>/<SOPUID>.v2.dcm  second version (v3, ...)
//	Dir/tmp/put-*.tmp                                   files being received, and up to
//	                                                    spareTemps empty ones made ahead
//
// Folder and file names are UIDs, which is safe only because every UID is
// checked against the UI rules (digits and dots, 1 to 64 characters, no
// empty component; PS3.5 9.1, 6.2) before it becomes part of a path: a
// UID can never be "..", contain a separator or be empty. Components with
// a leading zero, which PS3.5 9.1 also forbids, are accepted: some senders
// make them, and they are harmless in a path.
//
// Each instance file is a complete Part 10 file (PS3.10 7.1): a 128-byte
// zero preamble, "DICM", File Meta Information in Explicit VR Little
// Endian written by scp/part10 (a leaf package of the standard library
// alone), then the data set exactly as it arrived on the
// association, byte for byte. The offset where the data set begins is kept
// in the index (Instance.DataSetOffset), so a reader can stream the data
// set without parsing the meta.
//
// # Writing an instance
//
// Put follows the order of bbolt's own commit, data before pointer:
// write the temp file in Dir/tmp and fsync it, close it, rename it into
// its series folder (creating folders and fsyncing each new folder's
// parent), fsync the series folder, commit the index record, and only
// then return. Options.Describe reads the file's header while the fsync
// runs: it only reads, and the series folder it names is needed only for
// the rename. A crash at any point leaves either nothing, a temp file
// (removed at the next Open), or a file without a record (indexed again
// by Reconcile); never a record without its file.
//
// The temp file itself is usually made ahead of time: a goroutine
// (spareLoop, put.go) keeps a few empty ones created, so that a Put's
// answer does not wait for a file create, and replaces each one a Put
// takes. They are ordinary temp files: removed by Close, and by the next
// Open after a crash.
//
// Concurrent Puts share the expensive part. Each Put receives and fsyncs
// its own temp file in parallel; then a single committer goroutine
// (commit.go) takes every Put that is ready, waiting up to groupWait for
// those that have their whole data set and are fsyncing it (never for one
// still reading from the network), renames their files, fsyncs each
// distinct folder once (in parallel) and writes all their index records in
// one bbolt transaction. Throughput therefore grows with parallel senders
// while each Put still returns only once it is durable. No file I/O
// happens inside a bbolt write transaction. Reconcile and Prune take the
// same writer lock as a commit, so they never see a file renamed but not
// yet indexed.
//
// # Duplicates
//
// A SOP Instance UID received again is compared with the current version
// by the SHA-256 of its data set bytes (the file meta is not hashed: it
// names the sender, which may differ).
//
//   - Same bytes, current file present: DupIdentical. Nothing is written
//     and the index is not touched; Put succeeds.
//   - Different bytes: DupReplaced. Both are kept; the new file is
//     <SOPUID>.v2.dcm (then v3, ...) and becomes current. The index keeps
//     every version with its receive time, size, hash and calling AE.
//   - Same bytes but the current file was pruned or is missing:
//     DupRestored. The copy is stored as a new version, as for a
//     replacement.
//
// # Buckets
//
// Every top-level bucket holds one kind of thing, keyed so that the
// queries are cursor scans:
//
//	meta              "schema" -> decimal schema version (schemaVersion)
//	instances         SOP Instance UID -> instance record (JSON, all versions)
//	series            Series Instance UID -> series record (JSON, totals of current versions)
//	studies           Study Instance UID -> study record (JSON)
//	series_instances  SeriesUID 0x00 SOPUID -> empty (Instances)
//	study_series      StudyUID 0x00 SeriesUID -> empty (Study.Series)
//	received          receive time (8-byte big-endian Unix ns) | version (4 bytes) | SOPUID -> StudyUID
//	                  (Studies(day) and Prune, independent of Options.Location)
//
// Findings, series measures and daily discrepancy lists will get their own
// buckets ("findings", "measures", "daily") beside these. Adding a bucket
// is compatible with older readers; changing what an existing key or
// record means requires raising schemaVersion, and Open refuses an index
// whose version is newer than the code (errSchema).
//
// # Startup and maintenance
//
// Open removes leftover temp files and runs Reconcile, which indexes
// instance files that have no record (by calling Describe on them) and
// marks records whose file has gone (a file gone after its retention is
// marked pruned instead). Prune removes files older than
// Options.Retention but keeps their records, marked Pruned, so that later
// findings and measures keep their context. A read-only Store
// (Options.ReadOnly) serves queries from an index no server holds.
package store
