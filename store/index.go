package store

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"strconv"
	"time"

	bolt "go.etcd.io/bbolt"
)

// schemaVersion is the version of the bucket layout and record meaning
// described in doc.go. Raise it when an existing key or record changes
// meaning; new buckets do not need it.
const schemaVersion = 1

// Bucket and key names (doc.go, "Buckets").
var (
	bucketMeta            = []byte("meta")
	bucketInstances       = []byte("instances")
	bucketSeries          = []byte("series")
	bucketStudies         = []byte("studies")
	bucketSeriesInstances = []byte("series_instances")
	bucketStudySeries     = []byte("study_series")
	bucketReceived        = []byte("received")

	keySchema = []byte("schema")
)

// allBuckets are created by a writable Open.
var allBuckets = [][]byte{bucketMeta, bucketInstances, bucketSeries, bucketStudies,
	bucketSeriesInstances, bucketStudySeries, bucketReceived}

// instanceRecord is the value in bucketInstances: every version of one SOP
// instance, ordered by Version; the last is current.
type instanceRecord struct {
	SOPInstanceUID string          `json:"sop"`
	Versions       []versionRecord `json:"versions"`
}

// versionRecord is one received copy of an instance.
type versionRecord struct {
	Version             int       `json:"v"`
	Path                string    `json:"path"` // relative to Dir, slash-separated
	SOPClassUID         string    `json:"class"`
	TransferSyntaxUID   string    `json:"ts"`
	StudyInstanceUID    string    `json:"study"`
	SeriesInstanceUID   string    `json:"series"`
	InstanceNumber      int       `json:"num,omitempty"`
	FrameOfReferenceUID string    `json:"for,omitempty"`
	Size                int64     `json:"size"`   // whole file
	DataSetOffset       int64     `json:"offset"` // where the data set begins
	SHA256              string    `json:"sha256"` // of the data set bytes, hex
	CallingAETitle      string    `json:"ae,omitempty"`
	ScannerLabel        string    `json:"scanner,omitempty"`
	ReceivedAt          time.Time `json:"received"`            // UTC
	Reindexed           bool      `json:"reindexed,omitempty"` // indexed by Reconcile, not by Put
	Pruned              bool      `json:"pruned,omitempty"`
	Missing             bool      `json:"missing,omitempty"`
}

// live reports whether the version's file should be on disk.
func (v *versionRecord) live() bool { return !v.Pruned && !v.Missing }

// current returns the current version, or nil for a nil record.
func (r *instanceRecord) current() *versionRecord {
	if r == nil || len(r.Versions) == 0 {
		return nil
	}
	return &r.Versions[len(r.Versions)-1]
}

// maxVersion is the highest version number in use (0 for none).
func (r *instanceRecord) maxVersion() int {
	if c := r.current(); c != nil {
		return c.Version
	}
	return 0
}

// hasPath reports whether one of the versions is the file at rel.
func (r *instanceRecord) hasPath(rel string) bool {
	if r == nil {
		return false
	}
	for _, v := range r.Versions {
		if v.Path == rel {
			return true
		}
	}
	return false
}

// seriesRecord is the value in bucketSeries. Instances and Bytes count the
// current version of each instance, as received (pruning does not change
// them).
type seriesRecord struct {
	SeriesInstanceUID   string    `json:"series"`
	StudyInstanceUID    string    `json:"study"`
	Modality            string    `json:"modality,omitempty"`
	SeriesDescription   string    `json:"description,omitempty"`
	SeriesNumber        int       `json:"number,omitempty"`
	ScannerLabel        string    `json:"scanner,omitempty"`
	CallingAETitle      string    `json:"ae,omitempty"`
	StationName         string    `json:"station,omitempty"`
	Manufacturer        string    `json:"manufacturer,omitempty"`
	DeviceSerialNumber  string    `json:"serial,omitempty"`
	InstitutionName     string    `json:"institution,omitempty"`
	FrameOfReferenceUID string    `json:"for,omitempty"`
	Instances           int       `json:"instances"`
	Bytes               int64     `json:"bytes"`
	FirstReceived       time.Time `json:"first"`
	LastReceived        time.Time `json:"last"`
}

// studyRecord is the value in bucketStudies.
type studyRecord struct {
	StudyInstanceUID string    `json:"study"`
	StudyDate        string    `json:"date,omitempty"`
	StudyTime        string    `json:"time,omitempty"`
	AccessionNumber  string    `json:"accession,omitempty"`
	PatientID        string    `json:"patient_id,omitempty"`
	PatientName      string    `json:"patient_name,omitempty"`
	FirstReceived    time.Time `json:"first"`
	LastReceived     time.Time `json:"last"`
}

// pairKey is the key of the two link buckets: parent 0x00 child. A UID
// has no NUL, so a prefix scan over parent 0x00 finds exactly its
// children.
func pairKey(parent, child string) []byte {
	k := make([]byte, 0, len(parent)+1+len(child))
	k = append(k, parent...)
	k = append(k, 0)
	return append(k, child...)
}

// receivedKey orders bucketReceived by receive time: 8 bytes of Unix
// nanoseconds, big-endian, then the version and the SOP Instance UID.
func receivedKey(t time.Time, version int, sop string) []byte {
	k := make([]byte, 12, 12+len(sop))
	binary.BigEndian.PutUint64(k, uint64(t.UnixNano()))
	binary.BigEndian.PutUint32(k[8:], uint32(version))
	return append(k, sop...)
}

// receivedTimeKey is the smallest key at or after t.
func receivedTimeKey(t time.Time) []byte {
	return binary.BigEndian.AppendUint64(nil, uint64(t.UnixNano()))
}

// parseReceivedKey splits a bucketReceived key.
func parseReceivedKey(k []byte) (t time.Time, version int, sop string, ok bool) {
	if len(k) < 13 {
		return time.Time{}, 0, "", false
	}
	return time.Unix(0, int64(binary.BigEndian.Uint64(k))).UTC(),
		int(binary.BigEndian.Uint32(k[8:12])), string(k[12:]), true
}

// hasKey reports whether b holds key. Bucket.Get cannot tell an absent
// key from one with an empty value, which the link buckets store.
func hasKey(b *bolt.Bucket, key []byte) bool {
	k, _ := b.Cursor().Seek(key)
	return bytes.Equal(k, key)
}

// getJSON decodes the value at key into v; found is false when absent.
func getJSON(b *bolt.Bucket, key []byte, v any) (found bool, err error) {
	raw := b.Get(key)
	if raw == nil {
		return false, nil
	}
	if err := json.Unmarshal(raw, v); err != nil {
		return true, fmt.Errorf("store: index record %.80q: %w", key, err)
	}
	return true, nil
}

// putJSON encodes v at key.
func putJSON(b *bolt.Bucket, key []byte, v any) error {
	raw, err := json.Marshal(v)
	if err != nil {
		return fmt.Errorf("store: encoding index record: %w", err)
	}
	return b.Put(key, raw)
}

func getInstance(tx *bolt.Tx, sop string) (*instanceRecord, error) {
	var r instanceRecord
	found, err := getJSON(tx.Bucket(bucketInstances), []byte(sop), &r)
	if err != nil || !found {
		return nil, err
	}
	return &r, nil
}

func getSeries(tx *bolt.Tx, uid string) (*seriesRecord, error) {
	var r seriesRecord
	found, err := getJSON(tx.Bucket(bucketSeries), []byte(uid), &r)
	if err != nil || !found {
		return nil, err
	}
	return &r, nil
}

func getStudy(tx *bolt.Tx, uid string) (*studyRecord, error) {
	var r studyRecord
	found, err := getJSON(tx.Bucket(bucketStudies), []byte(uid), &r)
	if err != nil || !found {
		return nil, err
	}
	return &r, nil
}

// initSchema creates the buckets of a new index and checks the schema
// version of an old one.
func initSchema(tx *bolt.Tx) error {
	meta := tx.Bucket(bucketMeta)
	if meta == nil {
		// A new index has no buckets at all; anything else is not ours.
		empty := true
		_ = tx.ForEach(func([]byte, *bolt.Bucket) error { empty = false; return nil })
		if !empty {
			return fmt.Errorf("%w: index has buckets but no schema version", errSchema)
		}
		for _, name := range allBuckets {
			if _, err := tx.CreateBucket(name); err != nil {
				return fmt.Errorf("store: creating bucket %s: %w", name, err)
			}
		}
		return tx.Bucket(bucketMeta).Put(keySchema, []byte(strconv.Itoa(schemaVersion)))
	}
	if err := checkSchema(tx); err != nil {
		return err
	}
	for _, name := range allBuckets { // buckets added since the index was made
		if _, err := tx.CreateBucketIfNotExists(name); err != nil {
			return fmt.Errorf("store: creating bucket %s: %w", name, err)
		}
	}
	return nil
}

// checkSchema refuses an index without a version or with a newer one.
func checkSchema(tx *bolt.Tx) error {
	meta := tx.Bucket(bucketMeta)
	if meta == nil {
		return fmt.Errorf("%w: no schema version", errSchema)
	}
	v, err := strconv.Atoi(string(meta.Get(keySchema)))
	if err != nil {
		return fmt.Errorf("%w: unreadable schema version %q", errSchema, meta.Get(keySchema))
	}
	if v > schemaVersion {
		return fmt.Errorf("%w: index schema %d is newer than this program's %d", errSchema, v, schemaVersion)
	}
	return nil
}

// linkVersion updates the series and study records and the link and time
// indexes for nv, a version of sop that became current, replacing prev
// (nil for a first version), and marks its series pending for an audit
// as of nv.ReceivedAt (in the same transaction: no second commit per
// instance on the C-STORE's path). It does no file I/O: it runs inside
// the committer's write transaction.
func linkVersion(tx *bolt.Tx, sop string, prev, nv *versionRecord, a Attributes) error {
	if err := markPending(tx, nv.SeriesInstanceUID, nv.StudyInstanceUID, nv.ReceivedAt); err != nil {
		return err
	}
	seriesB := tx.Bucket(bucketSeries)
	links := tx.Bucket(bucketSeriesInstances)
	moved := prev != nil && prev.SeriesInstanceUID != nv.SeriesInstanceUID
	if moved {
		if err := unlinkFromSeries(tx, sop, prev); err != nil {
			return err
		}
	}

	sr, err := getSeries(tx, nv.SeriesInstanceUID)
	if err != nil {
		return err
	}
	if sr == nil {
		sr = &seriesRecord{SeriesInstanceUID: nv.SeriesInstanceUID, StudyInstanceUID: nv.StudyInstanceUID,
			FirstReceived: nv.ReceivedAt, LastReceived: nv.ReceivedAt}
	}
	if prev == nil || moved {
		sr.Instances++
		sr.Bytes += nv.Size
		if err := links.Put(pairKey(nv.SeriesInstanceUID, sop), nil); err != nil {
			return err
		}
	} else {
		sr.Bytes += nv.Size - prev.Size
	}
	fill(&sr.Modality, a.Modality)
	fill(&sr.SeriesDescription, a.SeriesDescription)
	fill(&sr.ScannerLabel, nv.ScannerLabel)
	fill(&sr.CallingAETitle, nv.CallingAETitle)
	fill(&sr.StationName, a.StationName)
	fill(&sr.Manufacturer, a.Manufacturer)
	fill(&sr.DeviceSerialNumber, a.DeviceSerialNumber)
	fill(&sr.InstitutionName, a.InstitutionName)
	fill(&sr.FrameOfReferenceUID, a.FrameOfReferenceUID)
	if sr.SeriesNumber == 0 {
		sr.SeriesNumber = a.SeriesNumber
	}
	widen(&sr.FirstReceived, &sr.LastReceived, nv.ReceivedAt)
	if err := putJSON(seriesB, []byte(sr.SeriesInstanceUID), sr); err != nil {
		return err
	}
	// Every touched leaf is a page bbolt writes and syncs: put the link
	// only when it is new (reading dirties nothing).
	studySeries := tx.Bucket(bucketStudySeries)
	if k := pairKey(sr.StudyInstanceUID, sr.SeriesInstanceUID); !hasKey(studySeries, k) {
		if err := studySeries.Put(k, nil); err != nil {
			return err
		}
	}

	st, err := getStudy(tx, sr.StudyInstanceUID)
	if err != nil {
		return err
	}
	if st == nil {
		st = &studyRecord{StudyInstanceUID: sr.StudyInstanceUID, FirstReceived: nv.ReceivedAt, LastReceived: nv.ReceivedAt}
	}
	fill(&st.StudyDate, a.StudyDate)
	fill(&st.StudyTime, a.StudyTime)
	fill(&st.AccessionNumber, a.AccessionNumber)
	fill(&st.PatientID, a.PatientID)
	fill(&st.PatientName, a.PatientName)
	widen(&st.FirstReceived, &st.LastReceived, nv.ReceivedAt)
	if err := putJSON(tx.Bucket(bucketStudies), []byte(st.StudyInstanceUID), st); err != nil {
		return err
	}
	return addReceived(tx, sop, nv)
}

// addReceived files a version under its receive time.
func addReceived(tx *bolt.Tx, sop string, v *versionRecord) error {
	return tx.Bucket(bucketReceived).Put(receivedKey(v.ReceivedAt, v.Version, sop), []byte(v.StudyInstanceUID))
}

// unlinkFromSeries takes prev, the old current version of sop, out of its
// series' totals, for a new version that names another series. A series
// left empty is removed, and so is a study left without series.
func unlinkFromSeries(tx *bolt.Tx, sop string, prev *versionRecord) error {
	if err := tx.Bucket(bucketSeriesInstances).Delete(pairKey(prev.SeriesInstanceUID, sop)); err != nil {
		return err
	}
	sr, err := getSeries(tx, prev.SeriesInstanceUID)
	if err != nil || sr == nil {
		return err
	}
	sr.Instances--
	sr.Bytes -= prev.Size
	if sr.Instances > 0 {
		return putJSON(tx.Bucket(bucketSeries), []byte(sr.SeriesInstanceUID), sr)
	}
	if err := tx.Bucket(bucketSeries).Delete([]byte(sr.SeriesInstanceUID)); err != nil {
		return err
	}
	ss := tx.Bucket(bucketStudySeries)
	if err := ss.Delete(pairKey(sr.StudyInstanceUID, sr.SeriesInstanceUID)); err != nil {
		return err
	}
	prefix := pairKey(sr.StudyInstanceUID, "")
	if k, _ := ss.Cursor().Seek(prefix); k != nil && bytes.HasPrefix(k, prefix) {
		return nil // the study has other series
	}
	return tx.Bucket(bucketStudies).Delete([]byte(sr.StudyInstanceUID))
}

// fill sets an empty field from the first instance that has a value: the
// series and study values of later instances normally repeat it.
func fill(field *string, v string) {
	if *field == "" {
		*field = v
	}
}

// widen stretches [first, last] to include t.
func widen(first, last *time.Time, t time.Time) {
	if first.IsZero() || t.Before(*first) {
		*first = t
	}
	if t.After(*last) {
		*last = t
	}
}
