package store

// Queries for trend plots and the web pages' navigation: the audits of
// one scanner over a time range, the scanner labels seen, and the days
// that have audits. All read the audit-time index (bucketAuditTimes),
// which holds the current audit of every audited series.

import (
	"encoding/binary"
	"encoding/json"
	"fmt"
	"sort"
	"time"

	bolt "go.etcd.io/bbolt"
)

// TrendAudit is the current audit of one series with its study's date
// and time as the index keeps them (DA YYYYMMDD and TM; "" when the
// data set had none), for plots whose x axis is when the series was
// acquired rather than when it was audited.
type TrendAudit struct {
	AuditRecord
	StudyDate string
	StudyTime string
}

// ScannerAudits lists the current audits of the series of scanner label
// whose audit time lies in [from, to), oldest audit first, with their
// study's date and time. A series belongs to the label it was received
// under (Series.ScannerLabel, the peer's); the audit's own Scanner
// counts only for a series the index no longer has, or one received
// without a label. Audits of test patients are included, marked by
// TestPatient: a trend leaves them out, a list may show them.
func (s *Store) ScannerAudits(label string, from, to time.Time) ([]TrendAudit, error) {
	if !to.After(from) {
		return nil, nil
	}
	var out []TrendAudit
	err := s.view(func(tx *bolt.Tx) error {
		studies := map[string]*studyRecord{}
		return s.currentAudits(tx, from, to, func(rec *AuditRecord) error {
			scanner := rec.Scanner
			se, err := getSeries(tx, rec.SeriesUID)
			if err != nil {
				return err
			}
			if se != nil && se.ScannerLabel != "" {
				scanner = se.ScannerLabel
			}
			if scanner != label {
				return nil
			}
			st, seen := studies[rec.StudyInstanceUID]
			if !seen {
				if st, err = getStudy(tx, rec.StudyInstanceUID); err != nil {
					return err
				}
				studies[rec.StudyInstanceUID] = st
			}
			ta := TrendAudit{AuditRecord: *rec}
			if st != nil {
				ta.StudyDate, ta.StudyTime = st.StudyDate, st.StudyTime
			}
			out = append(out, ta)
			return nil
		})
	})
	return out, err
}

// ScannerLabels lists, sorted, every scanner label a stored series
// carries (series from peers without a label are left out). It reads
// every series record, a few milliseconds per ten thousand series.
func (s *Store) ScannerLabels() ([]string, error) {
	seen := map[string]bool{}
	err := s.view(func(tx *bolt.Tx) error {
		return tx.Bucket(bucketSeries).ForEach(func(k, v []byte) error {
			var r struct {
				Scanner string `json:"scanner"`
			}
			if err := getJSONBytes(k, v, &r); err != nil {
				return err
			}
			if r.Scanner != "" {
				seen[r.Scanner] = true
			}
			return nil
		})
	})
	out := make([]string, 0, len(seen))
	for l := range seen {
		out = append(out, l)
	}
	sort.Strings(out)
	return out, err
}

// AuditDays lists up to n days (YYYY-MM-DD in Options.Location) with at
// least one current audit, newest first. It jumps from day to day on the
// audit-time index, so its cost grows with n, not with the audits.
func (s *Store) AuditDays(n int) ([]string, error) {
	var out []string
	err := s.view(func(tx *bolt.Tx) error {
		times := tx.Bucket(bucketAuditTimes)
		if times == nil {
			return nil
		}
		c := times.Cursor()
		for k, _ := c.Last(); k != nil && len(out) < n; {
			if len(k) < 8 {
				return fmt.Errorf("store: audit time key %.40q too short", k)
			}
			at := time.Unix(0, int64(binary.BigEndian.Uint64(k))).In(s.loc)
			day := time.Date(at.Year(), at.Month(), at.Day(), 0, 0, 0, 0, s.loc)
			out = append(out, day.Format(dayLayout))
			// The last key before the day began.
			c.Seek(receivedTimeKey(day))
			k, _ = c.Prev()
		}
		return nil
	})
	return out, err
}

// getJSONBytes decodes a record already read, naming its key on error.
func getJSONBytes(k, v []byte, into any) error {
	if err := json.Unmarshal(v, into); err != nil {
		return fmt.Errorf("store: index record %.80q: %w", k, err)
	}
	return nil
}
