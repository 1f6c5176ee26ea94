package metrics

import (
	"encoding/json"
	"sync"
	"time"

	"github.com/prometheus/client_golang/prometheus"

	"dwiaudit/audit/record"
	"dwiaudit/store"
)

// mm2PerSecond converts the stored ADC unit, mm²/s, to the Prometheus
// base unit m²/s (1 mm² = 1e-6 m²).
const mm2PerSecond = 1e-6

// storedFinding is the part of a stored finding (rules.Finding as
// audit/pipeline.go findingsJSON writes it) the counters read.
type storedFinding struct {
	Rule     string `json:"rule"`
	Severity string `json:"severity"`
}

// drift holds the per-scanner gauges of the latest audited series. Each
// gauge keeps the value of the newest audit that defined it: a later
// series whose measure is undefined (it could not be computed) leaves
// the last real value, and an older audit arriving late (seeding at
// start, a re-audit) never overwrites a newer one.
type drift struct {
	parenchyma, csf, snr, seriesAt *prometheus.GaugeVec // scanner, protocol
	phantomADC, phantomBias        *prometheus.GaugeVec // scanner, phantom
	phantomAt                      *prometheus.GaugeVec // scanner, phantom

	mu sync.Mutex
	at map[driftKey]time.Time // guarded by mu: audit time behind each value
}

type driftKey struct {
	gauge         *prometheus.GaugeVec
	scanner, name string
}

func newDrift(name func(string) string) drift {
	gauge := func(n, help, second string) *prometheus.GaugeVec {
		return prometheus.NewGaugeVec(prometheus.GaugeOpts{Name: name(n), Help: help}, []string{"scanner", second})
	}
	return drift{
		parenchyma: gauge("series_parenchyma_adc_square_meters_per_second",
			"Median ADC of brain parenchyma in the latest audited series of this scanner and protocol (test patients left out).", "protocol"),
		csf: gauge("series_csf_adc_square_meters_per_second",
			"CSF ADC (high percentile inside the head) in the latest audited series of this scanner and protocol (test patients left out).", "protocol"),
		snr: gauge("series_b0_snr",
			"b0 signal-to-noise ratio of the latest audited series of this scanner and protocol (test patients left out).", "protocol"),
		seriesAt: gauge("series_audited_timestamp_seconds",
			"Unix time of the latest audit of a series of this scanner and protocol (test patients left out).", "protocol"),
		phantomADC: gauge("phantom_adc_square_meters_per_second",
			"Central-region ADC of the latest audited phantom series of this scanner and phantom profile.", "phantom"),
		phantomBias: gauge("phantom_adc_bias_ratio",
			"Latest phantom central ADC over the profile's expected ADC, minus 1 (0.05 is 5% high).", "phantom"),
		phantomAt: gauge("phantom_audited_timestamp_seconds",
			"Unix time of the latest audit of a phantom series of this scanner and phantom profile.", "phantom"),
		at: map[driftKey]time.Time{},
	}
}

func (d *drift) register(reg *prometheus.Registry) {
	reg.MustRegister(d.parenchyma, d.csf, d.snr, d.seriesAt, d.phantomADC, d.phantomBias, d.phantomAt)
}

// set gives g{scanner, name} the value v (nil: undefined, nothing
// changes) unless a newer audit already set it.
func (d *drift) set(g *prometheus.GaugeVec, scanner, name string, at time.Time, v *float64, scale float64) {
	if v == nil {
		return
	}
	k := driftKey{g, scanner, name}
	d.mu.Lock()
	defer d.mu.Unlock()
	if prev, ok := d.at[k]; ok && at.Before(prev) {
		return
	}
	d.at[k] = at
	g.WithLabelValues(scanner, name).Set(*v * scale)
}

// AuditSaved takes one saved series audit of study (audit.Observer): its
// findings are counted, and unless it is of a test patient its measures
// move the drift gauges. The study's identifiers are only used to keep
// them out of the scanner label (Labels.Scanner).
func (m *Metrics) AuditSaved(rec store.AuditRecord, study store.Study) {
	scanner := m.labels.Scanner(rec.Scanner, identifiers(rec, study)...)
	var fs []storedFinding
	if len(rec.Findings) > 0 {
		if err := json.Unmarshal(rec.Findings, &fs); err != nil {
			m.log.Warn("metrics: the findings of an audit are not readable; not counted", "err", err)
		}
	}
	for _, f := range fs {
		m.findings.WithLabelValues(scanner, m.labels.Rule(f.Rule), m.labels.Severity(f.Severity)).Inc()
	}
	m.observeDrift(scanner, rec)
}

// Seed sets the drift gauges from stored audits (the newest of each
// series), so that a restart does not blank a dashboard. Counters are
// not touched; test patients are left out; the order of recs does not
// matter. study, when set, gives each audit's study, whose identifiers
// are kept out of the scanner label as in AuditSaved.
func (m *Metrics) Seed(recs []store.AuditRecord, study func(uid string) (store.Study, error)) {
	studies := map[string]store.Study{}
	for _, rec := range recs {
		st, ok := studies[rec.StudyInstanceUID]
		if !ok && study != nil {
			st, _ = study(rec.StudyInstanceUID) // a study gone since: its UIDs still excluded
			studies[rec.StudyInstanceUID] = st
		}
		m.observeDrift(m.labels.Scanner(rec.Scanner, identifiers(rec, st)...), rec)
	}
}

// seedDays is how many days of stored audits the drift gauges are seeded
// from at start: a scanner audited in the last month shows its latest
// values after a restart; one silent for longer is stale on any
// dashboard anyway.
const seedDays = 31

// auditsByDay lists the current audits of a day (store.Store.Findings)
// and reads their studies.
type auditsByDay interface {
	Findings(day string) ([]store.AuditRecord, error)
	Study(uid string) (store.Study, error)
}

// SeedFrom sets the drift gauges from the audits of the last seedDays
// days up to now (in now's time zone, the node's), so that a restart
// does not blank a dashboard.
func (m *Metrics) SeedFrom(st auditsByDay, now time.Time) {
	n := 0
	for i := seedDays - 1; i >= 0; i-- {
		day := now.AddDate(0, 0, -i).Format(time.DateOnly)
		recs, err := st.Findings(day)
		if err != nil {
			m.log.Warn("seeding the drift metrics: reading stored audits failed", "day", day, "err", err)
			return
		}
		m.Seed(recs, st.Study)
		n += len(recs)
	}
	if n > 0 {
		m.log.Info("drift metrics seeded from stored audits", "audits", n, "days", seedDays)
	}
}

// identifiers are what must never be part of a label: the audit's and
// its study's UIDs, accession and patient.
func identifiers(rec store.AuditRecord, st store.Study) []string {
	return []string{rec.StudyInstanceUID, rec.SeriesUID, rec.AccessionNumber,
		st.StudyInstanceUID, st.AccessionNumber, st.PatientID, st.PatientName}
}

func (m *Metrics) observeDrift(scanner string, rec store.AuditRecord) {
	if rec.TestPatient || len(rec.Measures) == 0 {
		return
	}
	ms, _, err := record.DecodeMeasures(rec.Measures)
	if err != nil {
		m.log.Warn("metrics: the measures of an audit are not readable; gauges unchanged", "err", err)
		return
	}
	d := &m.drift
	at := rec.AuditTime
	unix := float64(at.UnixNano()) / 1e9
	if m.labels.isPhantom(ms.Protocol) {
		ph := m.labels.Phantom(ms.Protocol)
		d.set(d.phantomAt, scanner, ph, at, &unix, 1)
		d.set(d.phantomADC, scanner, ph, at, ms.PhantomADC, mm2PerSecond)
		if ms.PhantomADC != nil && ms.PhantomExpectedADC != nil && *ms.PhantomExpectedADC > 0 {
			bias := *ms.PhantomADC / *ms.PhantomExpectedADC - 1
			d.set(d.phantomBias, scanner, ph, at, &bias, 1)
		}
		return
	}
	p := m.labels.Protocol(ms.Protocol)
	d.set(d.seriesAt, scanner, p, at, &unix, 1)
	d.set(d.parenchyma, scanner, p, at, ms.TissueADCMedian, mm2PerSecond)
	d.set(d.csf, scanner, p, at, ms.CSFADC, mm2PerSecond)
	d.set(d.snr, scanner, p, at, ms.B0SNR, 1)
}
