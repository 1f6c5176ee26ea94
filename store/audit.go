package store

// What the audit pipeline keeps in the index: series waiting to be
// audited, and every audit of a series with its findings and measures.
// The buckets are created by the first write that needs them, so an
// index written before they existed needs no schema change (index.go,
// schemaVersion: new buckets do not need it).

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"sort"
	"time"

	bolt "go.etcd.io/bbolt"
)

// Buckets of the audit pipeline.
var (
	// bucketAuditPending: series UID -> pendingRecord. A series is in it
	// from its first committed instance until an audit that saw its last
	// instance is saved, so a restart re-queues it.
	bucketAuditPending = []byte("audit_pending")
	// bucketAudits: series UID 0x00 audit time (8 bytes, Unix ns,
	// big-endian) -> AuditRecord JSON. Every audit of a series, oldest
	// first under the series' prefix.
	bucketAudits = []byte("audits")
	// bucketAuditCurrent: series UID -> key in bucketAudits of the audit
	// whose findings stand (the newest).
	bucketAuditCurrent = []byte("audit_current")
	// bucketAuditTimes: audit time (8 bytes) series UID -> key in
	// bucketAudits, for the current audits only, to list them by day.
	bucketAuditTimes = []byte("audit_times")
)

// PendingSeries is a series with instances not yet audited.
type PendingSeries struct {
	SeriesInstanceUID string
	StudyInstanceUID  string
	LastInstance      time.Time // when its newest instance was committed
}

// AuditRecord is one audit of one series. Findings and Measures are
// opaque to the store (JSON written by the audit package), so that the
// store depends on nothing above it.
type AuditRecord struct {
	AuditTime        time.Time `json:"audit_time"`
	StudyInstanceUID string    `json:"study"`
	SeriesUID        string    `json:"series"`
	Scanner          string    `json:"scanner,omitempty"`
	AccessionNumber  string    `json:"accession,omitempty"`
	// TestPatient marks an audit of a test study (a Patient ID the
	// configuration names as a test patient, such as the self-test's):
	// compliance reports and drift metrics leave it out.
	TestPatient bool            `json:"test_patient,omitempty"`
	Findings    json.RawMessage `json:"findings"`
	Measures    json.RawMessage `json:"measures,omitempty"`
}

// pendingRecord is the value in bucketAuditPending.
type pendingRecord struct {
	Study string    `json:"study"`
	Last  time.Time `json:"last"` // UTC
}

// auditKey is the key of an audit in bucketAudits.
func auditKey(series string, at time.Time) []byte {
	return binary.BigEndian.AppendUint64(pairKey(series, ""), uint64(at.UnixNano()))
}

// auditTimeKey is the key of a current audit in bucketAuditTimes.
func auditTimeKey(at time.Time, series string) []byte {
	return append(binary.BigEndian.AppendUint64(nil, uint64(at.UnixNano())), series...)
}

// auditUpdate runs a write transaction on the audit buckets, creating them
// when missing.
func (s *Store) auditUpdate(fn func(tx *bolt.Tx) error) error {
	if err := s.writable(); err != nil {
		return err
	}
	defer s.inflight.Done()
	return s.db.Update(func(tx *bolt.Tx) error {
		for _, b := range [][]byte{bucketAuditPending, bucketAudits, bucketAuditCurrent, bucketAuditTimes} {
			if _, err := tx.CreateBucketIfNotExists(b); err != nil {
				return fmt.Errorf("store: creating bucket %s: %w", b, err)
			}
		}
		return fn(tx)
	})
}

// markPending records that an instance of the series was committed at
// at: the series waits for an audit. An older time than the one recorded
// changes nothing. Put and Reconcile mark the series of every instance
// they index in the same transaction (linkVersion), so a caller needs
// this only for series the store did not receive itself.
func (s *Store) markPending(seriesUID, studyUID string, at time.Time) error {
	return s.auditUpdate(func(tx *bolt.Tx) error {
		return markPending(tx, seriesUID, studyUID, at)
	})
}

// markPending is MarkPending inside a write transaction, creating the
// bucket when missing.
func markPending(tx *bolt.Tx, seriesUID, studyUID string, at time.Time) error {
	b, err := tx.CreateBucketIfNotExists(bucketAuditPending)
	if err != nil {
		return fmt.Errorf("store: creating bucket %s: %w", bucketAuditPending, err)
	}
	var r pendingRecord
	found, err := getJSON(b, []byte(seriesUID), &r)
	if err != nil {
		return err
	}
	if found && !at.After(r.Last) && r.Study == studyUID {
		return nil
	}
	if !found || at.After(r.Last) {
		r.Last = at.UTC()
	}
	r.Study = studyUID
	return putJSON(b, []byte(seriesUID), r)
}

// Pending lists the series waiting for an audit, oldest last instance
// first.
func (s *Store) Pending() ([]PendingSeries, error) {
	var out []PendingSeries
	err := s.view(func(tx *bolt.Tx) error {
		b := tx.Bucket(bucketAuditPending)
		if b == nil {
			return nil
		}
		return b.ForEach(func(k, v []byte) error {
			var r pendingRecord
			if err := json.Unmarshal(v, &r); err != nil {
				return fmt.Errorf("store: pending series %.70q: %w", k, err)
			}
			out = append(out, PendingSeries{SeriesInstanceUID: string(k), StudyInstanceUID: r.Study, LastInstance: r.Last.In(s.loc)})
			return nil
		})
	})
	sort.Slice(out, func(i, j int) bool {
		if !out[i].LastInstance.Equal(out[j].LastInstance) {
			return out[i].LastInstance.Before(out[j].LastInstance)
		}
		return out[i].SeriesInstanceUID < out[j].SeriesInstanceUID
	})
	return out, err
}

// ClearPending takes the series off the pending list if no instance of
// it was committed after seenUpTo: the newest Instance.ReceivedAt among
// the instances the audit read. The pending mark carries the same
// ReceivedAt (linkVersion), so an instance committed while the audit
// listed the files, seen or not, is judged exactly: one the audit did not
// see keeps the series pending, for another audit.
func (s *Store) ClearPending(seriesUID string, seenUpTo time.Time) error {
	return s.auditUpdate(func(tx *bolt.Tx) error {
		b := tx.Bucket(bucketAuditPending)
		var r pendingRecord
		found, err := getJSON(b, []byte(seriesUID), &r)
		if err != nil || !found || r.Last.After(seenUpTo) {
			return err
		}
		return b.Delete([]byte(seriesUID))
	})
}

// SaveAudit stores an audit of a series. It becomes the series' current
// audit (the one Findings lists) if it is the newest; older audits stay
// in the series' history (SeriesAudits).
func (s *Store) SaveAudit(rec AuditRecord) error {
	return s.SaveAudits([]AuditRecord{rec})
}

// SaveAudits stores several audits in one transaction, each as
// SaveAudit would (for imports and for the fixtures of benchmarks): all
// or none are saved.
func (s *Store) SaveAudits(recs []AuditRecord) error {
	for _, rec := range recs {
		if rec.SeriesUID == "" {
			return fmt.Errorf("store: SaveAudit: empty series UID")
		}
	}
	return s.auditUpdate(func(tx *bolt.Tx) error {
		for _, rec := range recs {
			if err := saveAudit(tx, rec); err != nil {
				return err
			}
		}
		return nil
	})
}

func saveAudit(tx *bolt.Tx, rec AuditRecord) error {
	rec.AuditTime = rec.AuditTime.UTC()
	if len(rec.Findings) == 0 {
		rec.Findings = json.RawMessage("[]")
	}
	key := auditKey(rec.SeriesUID, rec.AuditTime)
	if err := putJSON(tx.Bucket(bucketAudits), key, rec); err != nil {
		return err
	}
	cur := tx.Bucket(bucketAuditCurrent)
	times := tx.Bucket(bucketAuditTimes)
	if prev := cur.Get([]byte(rec.SeriesUID)); prev != nil {
		prevAt := prev[len(prev)-8:]
		if bytes.Compare(prevAt, key[len(key)-8:]) > 0 {
			return nil // a newer audit stands
		}
		if err := times.Delete(append(bytes.Clone(prevAt), rec.SeriesUID...)); err != nil {
			return err
		}
	}
	if err := cur.Put([]byte(rec.SeriesUID), key); err != nil {
		return err
	}
	return times.Put(auditTimeKey(rec.AuditTime, rec.SeriesUID), key)
}

// Findings lists the current audit of every series audited on day
// (YYYY-MM-DD in Options.Location, by audit time), oldest first.
func (s *Store) Findings(day string) ([]AuditRecord, error) {
	d, err := time.ParseInLocation(dayLayout, day, s.loc)
	if err != nil {
		return nil, fmt.Errorf("store: day %q is not YYYY-MM-DD: %w", day, err)
	}
	from, to := d, d.AddDate(0, 0, 1) // a calendar day, 23 or 25 hours at a DST change
	var out []AuditRecord
	err = s.view(func(tx *bolt.Tx) error {
		return s.currentAudits(tx, from, to, func(rec *AuditRecord) error {
			out = append(out, *rec)
			return nil
		})
	})
	return out, err
}

// currentAudits calls fn for every current audit whose audit time lies
// in [from, to), oldest first, walking the audit-time index.
func (s *Store) currentAudits(tx *bolt.Tx, from, to time.Time, fn func(*AuditRecord) error) error {
	times, audits := tx.Bucket(bucketAuditTimes), tx.Bucket(bucketAudits)
	if times == nil || audits == nil {
		return nil
	}
	end := receivedTimeKey(to)
	c := times.Cursor()
	for k, v := c.Seek(receivedTimeKey(from)); k != nil && bytes.Compare(k, end) < 0; k, v = c.Next() {
		rec, err := s.auditAt(audits, v)
		if err != nil {
			return err
		}
		if rec != nil {
			if err := fn(rec); err != nil {
				return err
			}
		}
	}
	return nil
}

// SeriesAudits lists every audit of a series, oldest first; the last is
// current. A series never audited gives none.
func (s *Store) SeriesAudits(seriesUID string) ([]AuditRecord, error) {
	var out []AuditRecord
	err := s.view(func(tx *bolt.Tx) error {
		audits := tx.Bucket(bucketAudits)
		if audits == nil {
			return nil
		}
		prefix := pairKey(seriesUID, "")
		c := audits.Cursor()
		for k, _ := c.Seek(prefix); k != nil && bytes.HasPrefix(k, prefix); k, _ = c.Next() {
			if len(k) != len(prefix)+8 {
				continue // not an auditKey
			}
			rec, err := s.auditAt(audits, k)
			if err != nil {
				return err
			}
			if rec != nil {
				out = append(out, *rec)
			}
		}
		return nil
	})
	return out, err
}

func (s *Store) auditAt(audits *bolt.Bucket, key []byte) (*AuditRecord, error) {
	var rec AuditRecord
	found, err := getJSON(audits, key, &rec)
	if err != nil || !found {
		return nil, err
	}
	rec.AuditTime = rec.AuditTime.In(s.loc)
	return &rec, nil
}
