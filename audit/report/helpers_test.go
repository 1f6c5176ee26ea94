package report_test

import (
	"bytes"
	"context"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"strconv"
	"sync"
	"testing"
	"time"

	"dwiaudit/audit/header"
	"dwiaudit/rules"
	"dwiaudit/store"
	"dwiaudit/store/storetest"
)

// UIDs of the standard used by the tests.
const (
	mrImageStorage = "1.2.840.10008.5.1.4.1.1.4" // MR Image Storage, PS3.6 Annex A
	explicitVRLE   = "1.2.840.10008.1.2.1"       // Explicit VR Little Endian, PS3.5 A.2
)

// quellvander is the invented node's time zone in the tests: one with a
// DST change, so that day arithmetic is tried where it can go wrong.
func quellvander(t testing.TB) *time.Location {
	t.Helper()
	loc, err := time.LoadLocation("Europe/Dublin")
	if err != nil {
		t.Fatalf("time zone data: %v", err)
	}
	return loc
}

// clock is an injected clock; tests move it by hand.
type clock struct {
	mu sync.Mutex
	t  time.Time
}

func (c *clock) Now() time.Time  { c.mu.Lock(); defer c.mu.Unlock(); return c.t }
func (c *clock) Set(t time.Time) { c.mu.Lock(); c.t = t; c.mu.Unlock() }

// describe is the node's Options.Describe (cmd/dwiaudit/describe.go):
// the audit's real header reader.
func describe(path string) (store.Attributes, error) {
	id, err := header.ReadFile(path)
	if err != nil {
		return store.Attributes{}, err
	}
	return store.Attributes{
		StudyInstanceUID: id.StudyInstanceUID, SeriesInstanceUID: id.SeriesInstanceUID,
		StudyDate: id.StudyDate, AccessionNumber: id.AccessionNumber, PatientID: id.PatientID,
		PatientName: id.PatientName, Modality: id.Modality, SeriesDescription: id.SeriesDescription,
		SeriesNumber: id.SeriesNumber, InstanceNumber: id.InstanceNumber,
	}, nil
}

// newStore opens a real store (bbolt index, files) in a temp folder.
func newStore(t testing.TB, loc *time.Location, now func() time.Time) (*store.Store, store.Options) {
	t.Helper()
	return storetest.Open(t, store.Options{Location: loc, Now: now, Describe: describe})
}

// study is a synthetic study of the invented Quellvander Ostmire
// Hospital.
type study struct {
	UID, PatientID, StudyDate, Accession string
}

// dataSet encodes a tiny MR image of the study (PS3.5 7.1.2 Explicit VR
// Little Endian, tags ascending, values padded to even length).
func (st study) dataSet(series string, n int) []byte {
	elems := []struct {
		tag uint32
		vr  string
		val string
	}{
		{0x00080016, "UI", mrImageStorage},
		{0x00080018, "UI", sopUID(series, n)},
		{0x00080020, "DA", st.StudyDate},
		{0x00080050, "SH", st.Accession},
		{0x00080060, "CS", "MR"},
		{0x00080080, "LO", "Quellvander Ostmire Hospital"},
		{0x0008103E, "LO", "DWI b0 b1000 trace"},
		{0x00100010, "PN", "TEST^SYNTHETIC"},
		{0x00100020, "LO", st.PatientID},
		{0x0020000D, "UI", st.UID},
		{0x0020000E, "UI", series},
		{0x00200011, "IS", "2"},
		{0x00200013, "IS", strconv.Itoa(n)},
		{0x7FE00010, "OB", "\x00\x01\x02\x03"},
	}
	var b []byte
	for _, e := range elems {
		v := []byte(e.val)
		if len(v)%2 == 1 {
			pad := byte(' ')
			if e.vr == "UI" {
				pad = 0
			}
			v = append(v, pad)
		}
		b = binary.LittleEndian.AppendUint16(b, uint16(e.tag>>16))
		b = binary.LittleEndian.AppendUint16(b, uint16(e.tag))
		b = append(b, e.vr...)
		if e.vr == "OB" {
			b = append(b, 0, 0)
			b = binary.LittleEndian.AppendUint32(b, uint32(len(v)))
		} else {
			b = binary.LittleEndian.AppendUint16(b, uint16(len(v)))
		}
		b = append(b, v...)
	}
	return b
}

func sopUID(series string, n int) string { return series + "." + strconv.Itoa(n) }

// seriesUID is the UID of series k of a study.
func seriesUID(studyUID string, k int) string { return studyUID + "." + strconv.Itoa(k) }

// put stores one instance of series k of the study through store.Put,
// as a C-STORE would.
func put(t testing.TB, s *store.Store, st study, k int) {
	t.Helper()
	series := seriesUID(st.UID, k)
	req := store.PutRequest{SOPClassUID: mrImageStorage, SOPInstanceUID: sopUID(series, 1), TransferSyntaxUID: explicitVRLE, CallingAETitle: "HV_MR1", ScannerLabel: "hv-mr1"}
	if _, err := s.Put(context.Background(), req, bytes.NewReader(st.dataSet(series, 1))); err != nil {
		t.Fatalf("Put: %v", err)
	}
}

// finding is a finding as the rules write it (rules.Finding marshalled,
// as audit/pipeline.go stores it).
func finding(rule string, sev rules.Severity, series string, number int, measured, expected any) rules.Finding {
	return rules.Finding{
		Rule: rule, Severity: sev, SeriesUID: series, SeriesNumber: number,
		SeriesDescription: "DWI b0 b1000 trace", Scanner: "hv-mr1",
		Message: "plain words for " + rule, Measured: measured, Expected: expected,
	}
}

// audit is an audit record of series k of the study with the findings
// and a protocol in the measures.
func audit(t testing.TB, st study, k int, at time.Time, protocol, scanner string, test bool, fs ...rules.Finding) store.AuditRecord {
	t.Helper()
	for i := range fs {
		fs[i].StudyUID = st.UID
	}
	if fs == nil {
		fs = []rules.Finding{}
	}
	fj, err := json.Marshal(fs)
	if err != nil {
		t.Fatal(err)
	}
	mj, err := json.Marshal(map[string]any{"series_number": 2, "series_description": "DWI b0 b1000 trace", "protocol": protocol, "bvalues": []float64{0, 1000}})
	if err != nil {
		t.Fatal(err)
	}
	return store.AuditRecord{
		AuditTime: at, StudyInstanceUID: st.UID, SeriesUID: seriesUID(st.UID, k), Scanner: scanner,
		AccessionNumber: st.Accession, TestPatient: test, Findings: fj, Measures: mj,
	}
}

func saveAudits(t testing.TB, s *store.Store, recs ...store.AuditRecord) {
	t.Helper()
	if err := s.SaveAudits(recs); err != nil {
		t.Fatalf("SaveAudits: %v", err)
	}
}

// newStudy makes study number i of the invented hospital.
func newStudy(i int) study {
	return study{
		UID:       fmt.Sprintf("2.25.4711%d", 1000+i),
		PatientID: fmt.Sprintf("QOH%07d", 4200+i),
		StudyDate: "20261201",
		Accession: fmt.Sprintf("ACC%05d", 300+i),
	}
}
