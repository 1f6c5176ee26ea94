package store

// Daily discrepancy lists, frozen: the report package builds a day's
// list once the day is over and keeps it here, so that it reads the same
// whatever arrives later. The store keeps the bytes opaque (JSON written
// by audit/report) and depends on nothing above it. The bucket is
// created by the first write, as audit.go's are (no schema change).

import (
	"bytes"
	"fmt"
	"time"

	bolt "go.etcd.io/bbolt"
)

// bucketDailyLists: day (YYYY-MM-DD, node time) -> the frozen list. Keys
// sort as days do.
var bucketDailyLists = []byte("daily_lists")

// SaveDailyList keeps the frozen list of day. A day keeps its first
// list: saving another returns ErrDailyListExists and changes nothing.
func (s *Store) SaveDailyList(day string, data []byte) error {
	if err := checkDay(day); err != nil {
		return err
	}
	if err := s.writable(); err != nil {
		return err
	}
	defer s.inflight.Done()
	return s.db.Update(func(tx *bolt.Tx) error {
		b, err := tx.CreateBucketIfNotExists(bucketDailyLists)
		if err != nil {
			return fmt.Errorf("store: creating bucket %s: %w", bucketDailyLists, err)
		}
		if b.Get([]byte(day)) != nil {
			return fmt.Errorf("%w: %s", ErrDailyListExists, day)
		}
		return b.Put([]byte(day), bytes.Clone(data))
	})
}

// DailyList returns the frozen list of day as saved; found is false if
// none was kept.
func (s *Store) DailyList(day string) (data []byte, found bool, err error) {
	if err := checkDay(day); err != nil {
		return nil, false, err
	}
	err = s.view(func(tx *bolt.Tx) error {
		b := tx.Bucket(bucketDailyLists)
		if b == nil {
			return nil
		}
		if v := b.Get([]byte(day)); v != nil {
			data, found = bytes.Clone(v), true
		}
		return nil
	})
	return data, found, err
}

// LatestDailyList returns the newest day with a frozen list; found is
// false if none was kept.
func (s *Store) LatestDailyList() (day string, found bool, err error) {
	err = s.view(func(tx *bolt.Tx) error {
		b := tx.Bucket(bucketDailyLists)
		if b == nil {
			return nil
		}
		if k, _ := b.Cursor().Last(); k != nil {
			day, found = string(k), true
		}
		return nil
	})
	return day, found, err
}

func checkDay(day string) error {
	if t, err := time.Parse(dayLayout, day); err != nil || t.Format(dayLayout) != day {
		return fmt.Errorf("store: day %q is not YYYY-MM-DD", day)
	}
	return nil
}
