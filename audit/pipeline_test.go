package audit_test

import (
	"encoding/json"
	"errors"
	"path/filepath"
	"slices"
	"sync"
	"testing"
	"time"

	"dwiaudit/audit"
	"dwiaudit/audit/phantom"
	"dwiaudit/rules"
	"dwiaudit/store"
)

// memStore is an in-memory audit.PipelineStore over files on disk: what
// the test has "received" is what it lists.
type memStore struct {
	mu        sync.Mutex
	dir       string
	study     string
	series    map[string][]string // series UID -> paths relative to dir
	pending   map[string]store.PendingSeries
	received  map[string]time.Time // path -> receive time
	audits    []store.AuditRecord
	saved     chan store.AuditRecord
	failStudy bool
	patientID string // of the study
}

func newMemStore(dir, study string) *memStore {
	return &memStore{dir: dir, study: study, series: map[string][]string{}, pending: map[string]store.PendingSeries{}, received: map[string]time.Time{},
		saved: make(chan store.AuditRecord, 64)}
}

// receive stores files of a series as the real store's Put does: each
// instance gets a receive time, and the series is marked pending in the
// same step (store.linkVersion).
func (m *memStore) receive(series string, paths []string) {
	m.mu.Lock()
	at := time.Now()
	for _, p := range paths {
		rel, _ := filepath.Rel(m.dir, p)
		m.series[series] = append(m.series[series], filepath.ToSlash(rel))
		m.received[rel] = at
	}
	m.mu.Unlock()
	m.MarkPending(series, m.study, at)
}

func (m *memStore) MarkPending(series, study string, at time.Time) error {
	m.mu.Lock()
	defer m.mu.Unlock()
	if p, ok := m.pending[series]; !ok || at.After(p.LastInstance) {
		m.pending[series] = store.PendingSeries{SeriesInstanceUID: series, StudyInstanceUID: study, LastInstance: at}
	}
	return nil
}

func (m *memStore) Pending() ([]store.PendingSeries, error) {
	m.mu.Lock()
	defer m.mu.Unlock()
	var out []store.PendingSeries
	for _, p := range m.pending {
		out = append(out, p)
	}
	return out, nil
}

func (m *memStore) ClearPending(series string, at time.Time) error {
	m.mu.Lock()
	defer m.mu.Unlock()
	if p, ok := m.pending[series]; ok && !p.LastInstance.After(at) {
		delete(m.pending, series)
	}
	return nil
}

func (m *memStore) SaveAudit(r store.AuditRecord) error {
	m.mu.Lock()
	m.audits = append(m.audits, r)
	m.mu.Unlock()
	m.saved <- r
	return nil
}

func (m *memStore) Study(uid string) (store.Study, error) {
	m.mu.Lock()
	defer m.mu.Unlock()
	if uid != m.study {
		return store.Study{}, store.ErrNotFound
	}
	st := store.Study{StudyInstanceUID: uid, AccessionNumber: "QOH0001", PatientID: m.patientID}
	for s := range m.series {
		st.Series = append(st.Series, store.Series{SeriesInstanceUID: s, StudyInstanceUID: uid, ScannerLabel: "qoh-mr1"})
	}
	slices.SortFunc(st.Series, func(a, b store.Series) int { return cmpString(a.SeriesInstanceUID, b.SeriesInstanceUID) })
	return st, nil
}

func cmpString(a, b string) int {
	switch {
	case a < b:
		return -1
	case a > b:
		return 1
	}
	return 0
}

func (m *memStore) Instances(series string) ([]store.Instance, error) {
	m.mu.Lock()
	defer m.mu.Unlock()
	if m.failStudy {
		panic("instances: planted failure")
	}
	var out []store.Instance
	for _, p := range m.series[series] {
		out = append(out, store.Instance{SeriesInstanceUID: series, Path: p, ReceivedAt: m.received[filepath.FromSlash(p)]})
	}
	return out, nil
}

func (m *memStore) Dir() string { return m.dir }

// rulesOf decodes the rule IDs of a stored audit.
func rulesOf(t *testing.T, r store.AuditRecord) []string {
	t.Helper()
	var fs []rules.Finding
	if err := json.Unmarshal(r.Findings, &fs); err != nil {
		t.Fatalf("findings of series %s: %v", r.SeriesUID, err)
	}
	var ids []string
	for _, f := range fs {
		if f.Severity >= rules.SeverityWarning {
			ids = append(ids, f.Rule)
		}
	}
	return ids
}

// awaitAudit waits for the next saved audit of series.
func awaitAudit(t *testing.T, m *memStore, series string) store.AuditRecord {
	t.Helper()
	timeout := time.After(10 * time.Second)
	for {
		select {
		case r := <-m.saved:
			if r.SeriesUID == series {
				return r
			}
		case <-timeout:
			t.Fatalf("no audit of series %s in 10 s", series)
		}
	}
}

func startPipeline(t *testing.T, m *memStore, settle time.Duration) *audit.Pipeline {
	t.Helper()
	p := &audit.Pipeline{Engine: newEngine(), Store: m, Settle: settle, Workers: 2}
	if err := p.Start(t.Context()); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(p.Close)
	return p
}

func TestALateSeriesReopensTheStudyAndTheNewAuditReplacesTheOld(t *testing.T) {
	dir := t.TempDir()
	// The b0 images in a series of their own, sent last: until they
	// arrive, the DWI series has no b0 (missing-b0, issue 5).
	st := writeStudy(t, dir, phantom.Options{B0Series: true, Matrix: 32, Slices: 4})
	var b0, dwiSeries phantom.SeriesInfo
	for _, s := range st.Series {
		switch s.Number {
		case 1: // phantom.seriesNumberB0
			b0 = s
		case 2: // phantom.seriesNumberDWI
			dwiSeries = s
		}
	}
	m := newMemStore(dir, st.StudyUID)
	p := startPipeline(t, m, 50*time.Millisecond)

	m.receive(dwiSeries.UID, dwiSeries.Files)
	p.Notify(dwiSeries.UID, st.StudyUID, time.Now())
	first := awaitAudit(t, m, dwiSeries.UID)
	if got := rulesOf(t, first); !slices.Contains(got, rules.IDMissingB0) {
		t.Fatalf("first audit found %v, want missing-b0 (no b0 received yet)", got)
	}
	if first.Scanner != "qoh-mr1" || first.AccessionNumber != "QOH0001" || first.StudyInstanceUID != st.StudyUID || len(first.Measures) == 0 {
		t.Errorf("first audit %+v lacks the store's scanner label, accession number, study UID or measures", first)
	}
	var fs []rules.Finding
	if err := json.Unmarshal(first.Findings, &fs); err != nil || len(fs) == 0 || fs[0].Scanner != "qoh-mr1" {
		t.Errorf("first audit's findings %s do not carry the store's scanner label qoh-mr1 (err %v)", first.Findings, err)
	}

	m.receive(b0.UID, b0.Files)
	p.Notify(b0.UID, st.StudyUID, time.Now())
	second := awaitAudit(t, m, dwiSeries.UID)
	if got := rulesOf(t, second); len(got) != 0 {
		t.Errorf("second audit found %v, want nothing (the b0 arrived)", got)
	}
	if !second.AuditTime.After(first.AuditTime) {
		t.Errorf("second audit at %v, not after the first at %v", second.AuditTime, first.AuditTime)
	}
	if pend, _ := m.Pending(); len(pend) != 0 {
		t.Errorf("still pending after the audits: %+v", pend)
	}
}

func TestAPipelineStartRequeuesWhatWasPending(t *testing.T) {
	dir := t.TempDir()
	st := writeStudy(t, dir, phantom.Options{Case: phantom.CaseNoB0, Matrix: 32, Slices: 4})
	m := newMemStore(dir, st.StudyUID)
	var dwiUID string
	for _, s := range st.Series {
		m.receive(s.UID, s.Files) // marks the series pending, as store.Put does
		dwiUID = s.UID
	}
	startPipeline(t, m, 50*time.Millisecond)
	if r := awaitAudit(t, m, dwiUID); r.StudyInstanceUID != st.StudyUID {
		t.Errorf("audit of study %s, want %s", r.StudyInstanceUID, st.StudyUID)
	}
}

func TestAPanickingAuditIsRecordedAsAuditFailedAndOthersGoOn(t *testing.T) {
	dir := t.TempDir()
	st := writeStudy(t, dir, phantom.Options{Matrix: 32, Slices: 4})
	m := newMemStore(dir, st.StudyUID)
	m.failStudy = true
	s := st.Series[0]
	m.receive(s.UID, s.Files)
	p := startPipeline(t, m, 10*time.Millisecond)
	p.Notify(s.UID, st.StudyUID, time.Now())
	if got := rulesOf(t, awaitAudit(t, m, s.UID)); !slices.Equal(got, []string{rules.IDAuditFailed}) {
		t.Errorf("findings %v, want audit-failed", got)
	}
	// The worker is free again: the same study, now readable, is audited.
	m.mu.Lock()
	m.failStudy = false
	m.mu.Unlock()
	p.Notify(s.UID, st.StudyUID, time.Now())
	if got := rulesOf(t, awaitAudit(t, m, s.UID)); len(got) != 0 {
		t.Errorf("findings %v after the store recovered, want none", got)
	}
}

func TestAPipelineWithoutEngineOrWorkersDoesNotStart(t *testing.T) {
	err := (&audit.Pipeline{}).Start(t.Context())
	if !errors.Is(err, audit.ErrPipeline) {
		t.Errorf("Start = %v, want ErrPipeline", err)
	}
}
