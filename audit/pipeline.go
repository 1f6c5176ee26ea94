package audit

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"path/filepath"
	"runtime/debug"
	"slices"
	"sync"
	"time"

	"dwiaudit/audit/dwi"
	"dwiaudit/audit/record"
	"dwiaudit/rules"
	"dwiaudit/store"
)

// Limits of the pipeline.
const (
	// DefaultAuditTimeout bounds one study's audit. A 300-image series
	// audits in under a second (DEVELOPERS.md); a study of a few such
	// series over a slow disk stays far under two minutes, and anything
	// longer is stuck and must not hold a worker for ever.
	DefaultAuditTimeout = 2 * time.Minute
)

// ErrPipeline: the pipeline's fields cannot work or it was started
// twice.
var ErrPipeline = errors.New("audit: invalid pipeline")

// PipelineStore is what the pipeline needs of the store (*store.Store
// has it): the pending list, the audits, and a study's files.
type PipelineStore interface {
	Pending() ([]store.PendingSeries, error)
	ClearPending(seriesUID string, auditedAt time.Time) error
	SaveAudit(rec store.AuditRecord) error
	Study(uid string) (store.Study, error)
	Instances(seriesUID string) ([]store.Instance, error)
	Dir() string
}

// Observer is told what the pipeline did, for metrics (audit/metrics
// implements it). Its methods are called from the audit workers and must
// not block.
type Observer interface {
	// AuditSaved is called for each series audit saved, with the record
	// as stored and its study as the store knows it (whose patient
	// identifiers the observer must keep out of anything it exposes).
	AuditSaved(rec store.AuditRecord, study store.Study)
	// StudyAudited is called once per study audit that finished: ok is
	// false when the audit stopped (error, panic, timeout) or one of its
	// series audits could not be saved.
	StudyAudited(ok bool, took time.Duration)
}

// Pipeline audits what the node receives: a study is audited once none
// of its series received an instance for Settle; a later instance opens
// it again, and the new audit replaces the findings of the old one (the
// store keeps the history). Which series await an audit is kept in the
// store, so a restart loses none.
//
// The settle clock runs per study, not per series: the audit reads the
// whole study (a series may borrow its b0 from another), so auditing it
// while another of its series still arrives would be redone anyway.
type Pipeline struct {
	Engine *Engine
	Store  PipelineStore
	// Settle is how long a study must be quiet before it is audited.
	Settle time.Duration
	// Workers is how many studies are audited at once (each holds one
	// study's pixels and maps).
	Workers int
	// Timeout bounds one study's audit; DefaultAuditTimeout when zero.
	Timeout time.Duration
	// TestPatientIDs are the Patient IDs of test studies: their audits
	// are saved with AuditRecord.TestPatient set.
	TestPatientIDs []string
	// Now is the clock of audit times; time.Now when nil.
	Now func() time.Time
	// Logger gets UIDs, counts and errors, never patient data. Nil
	// discards.
	Logger *slog.Logger
	// Observer, when set, is told of every saved audit and finished
	// study audit.
	Observer Observer

	mu      sync.Mutex
	started bool
	closed  bool
	studies map[string]*studyState
	ctx     context.Context
	cancel  context.CancelFunc
	queue   chan string
	workers sync.WaitGroup
	feeders sync.WaitGroup
}

// studyState is the in-memory schedule of one study.
type studyState struct {
	timer   *time.Timer // settle timer, nil when none runs
	running bool        // a worker audits it now
	again   bool        // it settled again while running
}

func (p *Pipeline) now() time.Time {
	if p.Now == nil {
		return time.Now()
	}
	return p.Now()
}

func (p *Pipeline) log() *slog.Logger {
	if p.Logger == nil {
		return slog.New(slog.NewTextHandler(io.Discard, nil))
	}
	return p.Logger
}

// Start starts the workers and re-queues every series the store lists
// as pending (received before a restart and not audited), each to be
// audited once its settle time, counted from its last instance, is over.
func (p *Pipeline) Start(ctx context.Context) error {
	var errs []error
	if p.Engine == nil {
		errs = append(errs, fmt.Errorf("%w: Engine is nil", ErrPipeline))
	}
	if p.Store == nil {
		errs = append(errs, fmt.Errorf("%w: Store is nil", ErrPipeline))
	}
	if p.Settle < 0 {
		errs = append(errs, fmt.Errorf("%w: Settle %v is negative", ErrPipeline, p.Settle))
	}
	if p.Workers < 1 || p.Workers > MaxWorkers {
		errs = append(errs, fmt.Errorf("%w: Workers %d, want 1..%d", ErrPipeline, p.Workers, MaxWorkers))
	}
	if err := errors.Join(errs...); err != nil {
		return err
	}
	p.mu.Lock()
	if p.started {
		p.mu.Unlock()
		return fmt.Errorf("%w: started twice", ErrPipeline)
	}
	p.started = true
	p.studies = map[string]*studyState{}
	p.ctx, p.cancel = context.WithCancel(ctx)
	p.queue = make(chan string)
	for range p.Workers {
		p.workers.Go(p.work)
	}
	p.mu.Unlock()

	pending, err := p.Store.Pending()
	if err != nil {
		return fmt.Errorf("audit: listing pending series: %w", err)
	}
	now := p.now()
	for _, ps := range pending {
		wait := max(p.Settle-now.Sub(ps.LastInstance), 0)
		p.schedule(ps.StudyInstanceUID, wait)
	}
	if len(pending) > 0 {
		p.log().Info("pending series re-queued", "series", len(pending))
	}
	return nil
}

// Notify tells the pipeline that an instance of the series was committed
// at at, and (re)starts the settle timer of its study. The store has
// already recorded the series as pending, in the transaction that
// committed the instance (store.Put), so a restart before the audit
// loses nothing and the C-STORE waits for one index commit, not two.
func (p *Pipeline) Notify(seriesUID, studyUID string, at time.Time) {
	p.schedule(studyUID, p.Settle)
}

// schedule (re)starts the settle timer of a study.
func (p *Pipeline) schedule(study string, wait time.Duration) {
	p.mu.Lock()
	defer p.mu.Unlock()
	if !p.started || p.closed {
		return
	}
	st := p.studies[study]
	if st == nil {
		st = &studyState{}
		p.studies[study] = st
	}
	if st.timer != nil {
		st.timer.Stop()
	}
	st.timer = time.AfterFunc(wait, func() { p.settled(study, st) })
}

// settled is the end of a study's settle time: it goes to a worker, or,
// if a worker audits it now, is marked to be audited again after.
func (p *Pipeline) settled(study string, st *studyState) {
	p.mu.Lock()
	if p.closed || p.studies[study] != st {
		p.mu.Unlock()
		return
	}
	st.timer = nil
	if st.running {
		st.again = true
		p.mu.Unlock()
		return
	}
	st.running = true
	p.feeders.Add(1)
	p.mu.Unlock()
	defer p.feeders.Done()
	select {
	case p.queue <- study:
	case <-p.ctx.Done():
	}
}

// work audits studies from the queue until Close.
func (p *Pipeline) work() {
	for {
		select {
		case <-p.ctx.Done():
			return
		case study := <-p.queue:
			p.auditStudy(study)
			p.mu.Lock()
			st := p.studies[study]
			st.running = false
			switch {
			case st.again:
				st.again = false
				st.timer = time.AfterFunc(0, func() { p.settled(study, st) })
			case st.timer == nil:
				delete(p.studies, study)
			}
			p.mu.Unlock()
		}
	}
}

// Close stops the timers and the workers, cancelling audits in flight
// (their series stay pending in the store, for the next start), and
// returns once every worker has returned.
func (p *Pipeline) Close() {
	p.mu.Lock()
	if !p.started || p.closed {
		p.closed = true
		p.mu.Unlock()
		return
	}
	p.closed = true
	for _, st := range p.studies {
		if st.timer != nil {
			st.timer.Stop()
		}
	}
	p.cancel()
	p.mu.Unlock()
	p.feeders.Wait()
	p.workers.Wait()
}

// auditStudy audits one study and saves an audit of each of its series;
// a panic becomes an audit-failed audit of the study's series.
func (p *Pipeline) auditStudy(study string) {
	log := p.log().With("study", study)
	started := p.now()
	// seen is, per series, the newest receive time among the instances
	// the audit listed: what ClearPending compares with the pending mark.
	seen := map[string]time.Time{}
	st, err := p.Store.Study(study)
	if err != nil {
		if !errors.Is(err, store.ErrClosed) {
			log.Warn("audit: study not readable from the store", "err", err)
		}
		return
	}
	defer func() {
		if r := recover(); r != nil {
			log.Error("audit panicked", "panic", fmt.Sprint(r), "stack", string(debug.Stack()))
			p.saveFailed(st, fmt.Sprintf("the audit stopped on an internal error: %v", r), seen)
			p.observe(false, started)
		}
	}()

	var paths []string
	for _, se := range st.Series {
		ins, err := p.Store.Instances(se.SeriesInstanceUID)
		if err != nil {
			log.Warn("audit: series instances not readable from the store", "series", se.SeriesInstanceUID, "err", err)
			continue
		}
		for _, in := range ins {
			// A pruned or missing instance counts as seen: the audit read
			// the series as the store holds it.
			if in.ReceivedAt.After(seen[se.SeriesInstanceUID]) {
				seen[se.SeriesInstanceUID] = in.ReceivedAt
			}
			if !in.Pruned && !in.Missing {
				paths = append(paths, filepath.Join(p.Store.Dir(), filepath.FromSlash(in.Path)))
			}
		}
	}
	timeout := p.Timeout
	if timeout <= 0 {
		timeout = DefaultAuditTimeout
	}
	ctx, cancel := context.WithTimeout(p.ctx, timeout)
	defer cancel()
	rep, err := p.Engine.AuditFiles(ctx, paths)
	switch {
	case p.ctx.Err() != nil:
		return // stopping: the series stay pending
	case err != nil:
		log.Warn("audit failed", "err", err)
		p.saveFailed(st, "the audit did not finish: "+err.Error(), seen)
		p.observe(false, started)
		return
	}
	p.observe(p.save(st, rep, seen), started)
	log.Info("study audited", "series", len(rep.Series), "findings", len(rep.Findings), "took", p.now().Sub(started).Round(time.Millisecond).String())
}

// save stores an audit per series of the report (and per series only a
// finding names), then takes the study's series off the pending list. It
// reports whether every audit was saved.
func (p *Pipeline) save(st store.Study, rep *Report, seen map[string]time.Time) bool {
	at := p.now()
	bySeries := map[string][]rules.Finding{}
	var studyWide []rules.Finding
	for _, f := range rep.Findings {
		if f.SeriesUID == "" {
			studyWide = append(studyWide, f)
			continue
		}
		bySeries[f.SeriesUID] = append(bySeries[f.SeriesUID], f)
	}
	var order []string
	reports := map[string]*SeriesReport{}
	for i := range rep.Series {
		uid := rep.Series[i].SeriesUID
		if _, ok := reports[uid]; !ok {
			order = append(order, uid)
			reports[uid] = &rep.Series[i]
		}
	}
	for uid := range bySeries {
		if _, ok := reports[uid]; !ok {
			order = append(order, uid)
		}
	}
	slices.Sort(order)
	// The engine reads files and knows only their Station Name; the
	// store knows the label of the peer that sent each series, which
	// metrics and reports use (SeriesReport.Scanner).
	labels := map[string]string{}
	for _, se := range st.Series {
		if se.ScannerLabel != "" {
			labels[se.SeriesInstanceUID] = se.ScannerLabel
		}
	}
	var derived []record.Derived
	for _, d := range rep.Derived {
		derived = append(derived, record.Derived{SeriesUID: d.SeriesUID, SeriesNumber: d.SeriesNumber, Kind: d.Kind, Images: d.Images})
	}
	ok := true
	for _, uid := range order {
		fs := append(slices.Clone(bySeries[uid]), studyWide...)
		if l := labels[uid]; l != "" {
			for i := range fs {
				fs[i].Scanner = l
			}
			if r := reports[uid]; r != nil {
				r.Scanner = l
			}
		}
		rec := store.AuditRecord{
			AuditTime:        at,
			StudyInstanceUID: st.StudyInstanceUID,
			SeriesUID:        uid,
			AccessionNumber:  st.AccessionNumber,
			TestPatient:      p.testPatient(st),
			Findings:         findingsJSON(fs),
		}
		if r := reports[uid]; r != nil {
			rec.Scanner = r.Scanner
			rec.Measures = measuresJSON(r, derived)
		} else if len(fs) > 0 {
			rec.Scanner = fs[0].Scanner
		}
		if err := p.Store.SaveAudit(rec); err != nil {
			ok = false
			p.log().Error("saving an audit failed", "study", st.StudyInstanceUID, "series", uid, "err", err)
		} else if p.Observer != nil {
			p.Observer.AuditSaved(rec, st)
		}
	}
	if ok {
		p.clear(st, seen)
	}
	return ok
}

// saveFailed stores an audit-failed audit for every series of the study.
func (p *Pipeline) saveFailed(st store.Study, msg string, seen map[string]time.Time) {
	at := p.now()
	ok := true
	for _, se := range st.Series {
		f := rules.AuditFailed(nil, msg)
		f.StudyUID, f.SeriesUID = st.StudyInstanceUID, se.SeriesInstanceUID
		f.SeriesNumber, f.SeriesDescription = se.SeriesNumber, se.SeriesDescription
		f.Scanner = scannerLabel(se)
		fs := []rules.Finding{f}
		if p.Engine.Config != nil {
			if !p.Engine.Config.Enabled(rules.IDAuditFailed) {
				fs = nil
			} else {
				fs = rules.Apply(p.Engine.Config, fs)
			}
		}
		rec := store.AuditRecord{
			AuditTime:        at,
			StudyInstanceUID: st.StudyInstanceUID,
			SeriesUID:        se.SeriesInstanceUID,
			Scanner:          f.Scanner,
			AccessionNumber:  st.AccessionNumber,
			TestPatient:      p.testPatient(st),
			Findings:         findingsJSON(fs),
		}
		if err := p.Store.SaveAudit(rec); err != nil {
			ok = false
			p.log().Error("saving an audit failed", "study", st.StudyInstanceUID, "series", se.SeriesInstanceUID, "err", err)
		} else if p.Observer != nil {
			p.Observer.AuditSaved(rec, st)
		}
	}
	if ok {
		p.clear(st, seen)
	}
}

// observe tells the Observer, if any, that a study audit finished.
func (p *Pipeline) observe(ok bool, started time.Time) {
	if p.Observer != nil {
		p.Observer.StudyAudited(ok, p.now().Sub(started))
	}
}

// Backlog is how many studies were received and not yet audited: those
// settling, queued for a worker or being audited.
func (p *Pipeline) Backlog() int {
	p.mu.Lock()
	defer p.mu.Unlock()
	return len(p.studies)
}

// clear takes the study's series off the pending list unless an
// instance of it was committed after those the audit listed (seen). A
// series whose instances the audit could not list stays pending.
func (p *Pipeline) clear(st store.Study, seen map[string]time.Time) {
	for _, se := range st.Series {
		upTo, ok := seen[se.SeriesInstanceUID]
		if !ok {
			continue
		}
		if err := p.Store.ClearPending(se.SeriesInstanceUID, upTo); err != nil {
			p.log().Warn("clearing a pending series failed", "series", se.SeriesInstanceUID, "err", err)
		}
	}
}

// testPatient reports whether the study is a test study.
func (p *Pipeline) testPatient(st store.Study) bool {
	return st.PatientID != "" && slices.Contains(p.TestPatientIDs, st.PatientID)
}

func scannerLabel(se store.Series) string {
	if se.ScannerLabel != "" {
		return se.ScannerLabel
	}
	return se.StationName
}

// findingsJSON encodes findings as the store keeps them. A measured or
// expected value JSON cannot hold (NaN, an infinity) is kept as text.
func findingsJSON(fs []rules.Finding) json.RawMessage {
	if fs == nil {
		fs = []rules.Finding{}
	}
	if b, err := json.Marshal(fs); err == nil {
		return b
	}
	out := make([]json.RawMessage, 0, len(fs))
	for _, f := range fs {
		b, err := json.Marshal(f)
		if err != nil {
			f.Measured, f.Expected = fmt.Sprint(f.Measured), fmt.Sprint(f.Expected)
			b, err = json.Marshal(f)
		}
		if err == nil {
			out = append(out, b)
		}
	}
	b, _ := json.Marshal(out) // RawMessages already valid
	return b
}

func measuresJSON(r *SeriesReport, derived []record.Derived) json.RawMessage {
	fin := record.Finite
	m := r.Measures
	tissue, csf, note := fin(m.ParenchymaMedianADC), fin(m.CSFADC), m.CSFNote
	if r.IsPhantom() {
		tissue, csf, note = nil, nil, "" // water, not tissue: the phantom measures stand for it
	}
	b, err := json.Marshal(record.Measures{
		SeriesNumber:           r.SeriesNumber,
		SeriesDescription:      r.SeriesDescription,
		Protocol:               r.Protocol,
		BValues:                r.BValues,
		TissueADCMedian:        tissue,
		CSFADC:                 csf,
		CSFADCNote:             note,
		B0SNR:                  fin(m.B0SNR),
		HighBTissueSNR:         fin(m.HighBTissueSNR),
		FractionAboveFreeWater: fin(m.FractionAboveFreeWater),
		FractionNegative:       fin(m.FractionNegative),
		CannotCompute:          r.CannotCompute,
		PhantomADC:             fin(r.PhantomADC),
		PhantomExpectedADC:     fin(r.PhantomExpectedADC),
		PhantomUniformity:      fin(r.PhantomUniformity),
		Volumes:                VolumeRecords(r.Volumes),
		Derived:                derived,
	})
	if err != nil {
		return nil
	}
	return b
}

// VolumeRecords is a gradient table as it is stored and printed
// (record.Volume); nil for none.
func VolumeRecords(rows []dwi.TableRow) []record.Volume {
	if len(rows) == 0 {
		return nil
	}
	out := make([]record.Volume, len(rows))
	for i, r := range rows {
		out[i] = record.Volume{BValue: r.BValue, BValueMeasured: r.BValueMeasured, Kind: r.Weighting.String(), Images: r.Images, Slices: r.Slices}
		if r.Direction != nil {
			d := [3]float64(*r.Direction)
			out[i].Direction = &d
		}
	}
	return out
}
