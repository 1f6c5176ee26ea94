package store

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"sort"
	"time"

	bolt "go.etcd.io/bbolt"
)

// dayLayout is the form of a receive day.
const dayLayout = "2006-01-02"

// Study is one study as the index knows it. Times are in Options.Location.
type Study struct {
	StudyInstanceUID string
	StudyDate        string
	StudyTime        string
	AccessionNumber  string
	PatientID        string
	PatientName      string
	Series           []Series // sorted by SeriesNumber, then UID
	FirstReceived    time.Time
	LastReceived     time.Time
}

// Series is one series. Instances and Bytes count the current version of
// each instance as received; pruning does not change them.
type Series struct {
	SeriesInstanceUID   string
	StudyInstanceUID    string
	Modality            string
	SeriesDescription   string
	ScannerLabel        string
	CallingAETitle      string
	StationName         string
	Manufacturer        string
	DeviceSerialNumber  string
	InstitutionName     string
	FrameOfReferenceUID string
	SeriesNumber        int
	Instances           int
	Bytes               int64
	FirstReceived       time.Time
	LastReceived        time.Time
}

// Instance is one version of a SOP instance (the current one, unless it
// comes from InstanceVersions).
type Instance struct {
	SOPInstanceUID      string
	SOPClassUID         string
	TransferSyntaxUID   string
	SeriesInstanceUID   string
	StudyInstanceUID    string
	FrameOfReferenceUID string
	Path                string // relative to Dir, slash-separated
	CallingAETitle      string
	ScannerLabel        string
	SHA256              string // of the data set bytes, hex
	InstanceNumber      int
	Version             int
	Versions            int   // how many versions are recorded
	Size                int64 // of the whole file
	DataSetOffset       int64 // where the data set begins in the file
	ReceivedAt          time.Time
	ReceiveDay          string // YYYY-MM-DD in Options.Location
	Pruned              bool   // the file was removed after the retention period
	Missing             bool   // the file was found gone by Reconcile
	Reindexed           bool   // indexed by Reconcile from a file without a record
}

// Studies lists the studies with an instance received on day (YYYY-MM-DD
// in Options.Location), or all studies for day "", sorted by
// LastReceived, oldest first. Each Study lists all its series.
func (s *Store) Studies(day string) ([]Study, error) {
	var from, to time.Time
	if day != "" {
		d, err := time.ParseInLocation(dayLayout, day, s.loc)
		if err != nil {
			return nil, fmt.Errorf("store: day %q is not YYYY-MM-DD: %w", day, err)
		}
		from, to = d, d.AddDate(0, 0, 1) // a calendar day, 23 or 25 hours at a DST change
	}
	var out []Study
	err := s.view(func(tx *bolt.Tx) error {
		var uids []string
		if day == "" {
			err := tx.Bucket(bucketStudies).ForEach(func(k, _ []byte) error {
				uids = append(uids, string(k))
				return nil
			})
			if err != nil {
				return err
			}
		} else {
			seen := map[string]bool{}
			c := tx.Bucket(bucketReceived).Cursor()
			end := receivedTimeKey(to)
			for k, v := c.Seek(receivedTimeKey(from)); k != nil && bytes.Compare(k, end) < 0; k, v = c.Next() {
				if uid := string(v); !seen[uid] {
					seen[uid] = true
					uids = append(uids, uid)
				}
			}
		}
		for _, uid := range uids {
			st, err := s.loadStudy(tx, uid)
			if errors.Is(err, ErrNotFound) {
				continue // its instances moved to another study
			}
			if err != nil {
				return err
			}
			out = append(out, st)
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	sort.Slice(out, func(i, j int) bool {
		if !out[i].LastReceived.Equal(out[j].LastReceived) {
			return out[i].LastReceived.Before(out[j].LastReceived)
		}
		return out[i].StudyInstanceUID < out[j].StudyInstanceUID
	})
	return out, nil
}

// Study returns one study with its series; ErrNotFound if unknown.
func (s *Store) Study(uid string) (Study, error) {
	var st Study
	err := s.view(func(tx *bolt.Tx) (err error) {
		st, err = s.loadStudy(tx, uid)
		return err
	})
	return st, err
}

func (s *Store) loadStudy(tx *bolt.Tx, uid string) (Study, error) {
	r, err := getStudy(tx, uid)
	if err != nil {
		return Study{}, err
	}
	if r == nil {
		return Study{}, fmt.Errorf("%w: study %.70q", ErrNotFound, uid)
	}
	st := Study{
		StudyInstanceUID: r.StudyInstanceUID,
		StudyDate:        r.StudyDate,
		StudyTime:        r.StudyTime,
		AccessionNumber:  r.AccessionNumber,
		PatientID:        r.PatientID,
		PatientName:      r.PatientName,
		FirstReceived:    r.FirstReceived.In(s.loc),
		LastReceived:     r.LastReceived.In(s.loc),
	}
	prefix := pairKey(uid, "")
	c := tx.Bucket(bucketStudySeries).Cursor()
	for k, _ := c.Seek(prefix); k != nil && bytes.HasPrefix(k, prefix); k, _ = c.Next() {
		sr, err := getSeries(tx, string(k[len(prefix):]))
		if err != nil {
			return Study{}, err
		}
		if sr != nil {
			st.Series = append(st.Series, s.series(sr))
		}
	}
	sort.Slice(st.Series, func(i, j int) bool {
		a, b := st.Series[i], st.Series[j]
		if a.SeriesNumber != b.SeriesNumber {
			return a.SeriesNumber < b.SeriesNumber
		}
		return a.SeriesInstanceUID < b.SeriesInstanceUID
	})
	return st, nil
}

// Series returns one series; ErrNotFound if unknown.
func (s *Store) Series(uid string) (Series, error) {
	var out Series
	err := s.view(func(tx *bolt.Tx) error {
		sr, err := getSeries(tx, uid)
		if err != nil {
			return err
		}
		if sr == nil {
			return fmt.Errorf("%w: series %.70q", ErrNotFound, uid)
		}
		out = s.series(sr)
		return nil
	})
	return out, err
}

func (s *Store) series(r *seriesRecord) Series {
	return Series{
		SeriesInstanceUID:   r.SeriesInstanceUID,
		StudyInstanceUID:    r.StudyInstanceUID,
		Modality:            r.Modality,
		SeriesDescription:   r.SeriesDescription,
		ScannerLabel:        r.ScannerLabel,
		CallingAETitle:      r.CallingAETitle,
		StationName:         r.StationName,
		Manufacturer:        r.Manufacturer,
		DeviceSerialNumber:  r.DeviceSerialNumber,
		InstitutionName:     r.InstitutionName,
		FrameOfReferenceUID: r.FrameOfReferenceUID,
		SeriesNumber:        r.SeriesNumber,
		Instances:           r.Instances,
		Bytes:               r.Bytes,
		FirstReceived:       r.FirstReceived.In(s.loc),
		LastReceived:        r.LastReceived.In(s.loc),
	}
}

// Instances lists the current version of every instance of a series,
// sorted by InstanceNumber, then UID. An unknown series gives ErrNotFound.
func (s *Store) Instances(seriesUID string) ([]Instance, error) {
	var out []Instance
	err := s.view(func(tx *bolt.Tx) error {
		if sr, err := getSeries(tx, seriesUID); err != nil || sr == nil {
			if err == nil {
				err = fmt.Errorf("%w: series %.70q", ErrNotFound, seriesUID)
			}
			return err
		}
		prefix := pairKey(seriesUID, "")
		c := tx.Bucket(bucketSeriesInstances).Cursor()
		for k, _ := c.Seek(prefix); k != nil && bytes.HasPrefix(k, prefix); k, _ = c.Next() {
			r, err := getInstance(tx, string(k[len(prefix):]))
			if err != nil {
				return err
			}
			if r != nil && len(r.Versions) > 0 {
				out = append(out, s.instance(r, r.current()))
			}
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	sort.Slice(out, func(i, j int) bool {
		if out[i].InstanceNumber != out[j].InstanceNumber {
			return out[i].InstanceNumber < out[j].InstanceNumber
		}
		return out[i].SOPInstanceUID < out[j].SOPInstanceUID
	})
	return out, nil
}

// Instance returns the current version of a SOP instance; ErrNotFound if
// unknown.
func (s *Store) Instance(sopUID string) (Instance, error) {
	var out Instance
	err := s.view(func(tx *bolt.Tx) error {
		r, err := s.record(tx, sopUID)
		if err == nil {
			out = s.instance(r, r.current())
		}
		return err
	})
	return out, err
}

// instanceVersions returns every recorded version of a SOP instance,
// oldest first; the last is current.
func (s *Store) instanceVersions(sopUID string) ([]Instance, error) {
	var out []Instance
	err := s.view(func(tx *bolt.Tx) error {
		r, err := s.record(tx, sopUID)
		if err != nil {
			return err
		}
		for i := range r.Versions {
			out = append(out, s.instance(r, &r.Versions[i]))
		}
		return nil
	})
	return out, err
}

// dataSetOffset returns where the data set begins in the current file of
// a SOP instance: a reader can seek there and stream the data set as it
// was received.
func (s *Store) dataSetOffset(sopUID string) (int64, error) {
	in, err := s.Instance(sopUID)
	return in.DataSetOffset, err
}

// OpenInstance opens the current Part 10 file of a SOP instance. It gives
// errPruned after the retention period and errMissingFile if the file is
// gone otherwise.
func (s *Store) OpenInstance(sopUID string) (io.ReadCloser, error) {
	in, err := s.Instance(sopUID)
	if err != nil {
		return nil, err
	}
	switch {
	case in.Pruned:
		return nil, fmt.Errorf("%w: %s", errPruned, in.Path)
	case in.Missing:
		return nil, fmt.Errorf("%w: %s", errMissingFile, in.Path)
	}
	f, err := os.Open(s.abs(in.Path))
	if errors.Is(err, fs.ErrNotExist) {
		return nil, fmt.Errorf("%w: %s", errMissingFile, in.Path)
	}
	if err != nil {
		return nil, fmt.Errorf("store: opening instance: %w", err)
	}
	return f, nil
}

func (s *Store) record(tx *bolt.Tx, sopUID string) (*instanceRecord, error) {
	r, err := getInstance(tx, sopUID)
	if err != nil {
		return nil, err
	}
	if r == nil || len(r.Versions) == 0 {
		return nil, fmt.Errorf("%w: instance %.70q", ErrNotFound, sopUID)
	}
	return r, nil
}

func (s *Store) instance(r *instanceRecord, v *versionRecord) Instance {
	at := v.ReceivedAt.In(s.loc)
	return Instance{
		SOPInstanceUID:      r.SOPInstanceUID,
		SOPClassUID:         v.SOPClassUID,
		TransferSyntaxUID:   v.TransferSyntaxUID,
		SeriesInstanceUID:   v.SeriesInstanceUID,
		StudyInstanceUID:    v.StudyInstanceUID,
		FrameOfReferenceUID: v.FrameOfReferenceUID,
		Path:                v.Path,
		CallingAETitle:      v.CallingAETitle,
		ScannerLabel:        v.ScannerLabel,
		SHA256:              v.SHA256,
		InstanceNumber:      v.InstanceNumber,
		Version:             v.Version,
		Versions:            len(r.Versions),
		Size:                v.Size,
		DataSetOffset:       v.DataSetOffset,
		ReceivedAt:          at,
		ReceiveDay:          at.Format(dayLayout),
		Pruned:              v.Pruned,
		Missing:             v.Missing,
		Reindexed:           v.Reindexed,
	}
}
