package audit_test

import (
	"strings"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus/testutil"

	"dwiaudit/audit"
	"dwiaudit/audit/metrics"
	"dwiaudit/audit/phantom"
	"dwiaudit/rules"
)

// signallingObserver is the node's metrics as the pipeline's Observer,
// telling the test when a study audit has finished.
type signallingObserver struct {
	*metrics.Metrics
	done chan bool
}

func (o signallingObserver) StudyAudited(ok bool, took time.Duration) {
	o.Metrics.StudyAudited(ok, took)
	o.done <- ok
}

// newPipelineMetrics builds metrics with the default configuration's
// protocol and phantom names, as cmd/dwiaudit does.
func newPipelineMetrics(p *audit.Pipeline) *metrics.Metrics {
	cfg := rules.DefaultConfig()
	var protocols, phantoms, ids []string
	for _, pr := range cfg.Protocols {
		protocols = append(protocols, pr.Name)
	}
	for _, ph := range cfg.Phantoms {
		phantoms = append(phantoms, ph.Name)
	}
	for _, r := range rules.All() {
		ids = append(ids, r.ID())
	}
	return metrics.New(metrics.Options{
		Labels:        metrics.NewLabels([]string{"qoh-mr1"}, protocols, phantoms, append(ids, rules.IDAuditFailed)),
		QueuedStudies: p.Backlog,
	})
}

// gathered is the value of every sample of the named family, by its
// label values joined with ",".
func gathered(t *testing.T, m *metrics.Metrics, name string) map[string]float64 {
	t.Helper()
	mfs, err := m.Registry().Gather()
	if err != nil {
		t.Fatal(err)
	}
	out := map[string]float64{}
	for _, mf := range mfs {
		if mf.GetName() != name {
			continue
		}
		for _, s := range mf.Metric {
			var ls []string
			for _, lp := range s.Label {
				ls = append(ls, lp.GetName()+"="+lp.GetValue())
			}
			v := s.GetGauge().GetValue() + s.GetCounter().GetValue()
			out[strings.Join(ls, ",")] = v
		}
	}
	return out
}

func TestThePipelineFeedsTheMetricsAndLeavesTestPatientsOutOfTheDrift(t *testing.T) {
	tests := []struct {
		name        string
		opt         phantom.Options
		testPatient bool
		gauge       string
		labels      string
		low, high   float64 // expected gauge range; 0, 0: no sample
	}{
		// docs/references.md#helenius-2002 (Helenius 2002): white matter 0.70e-3, cortex
		// 0.89e-3 mm²/s; the parenchyma median lies between.
		{"a brain series sets its scanner's parenchyma ADC", phantom.Options{Matrix: 32, Slices: 4}, false,
			"dwiaudit_series_parenchyma_adc_square_meters_per_second", "protocol=brain,scanner=qoh-mr1", 0.70e-9, 0.89e-9},
		{"a test patient's brain series sets nothing", phantom.Options{Matrix: 32, Slices: 4}, true,
			"dwiaudit_series_parenchyma_adc_square_meters_per_second", "", 0, 0},
		// The phantom truth (audit/phantom cases.go): water at 4 °C,
		// 1.26e-3 mm²/s, against the profile's 1.10e-3 at 0 °C (QIBA,
		// docs/references.md#ice-water-phantom): about 15% high, far past the 3.6% tolerance.
		{"a warm ice-water phantom shows its bias", phantom.Options{Case: phantom.CaseIceWaterWarm, Matrix: 32, Slices: 4}, false,
			"dwiaudit_phantom_adc_bias_ratio", "phantom=ice water,scanner=qoh-mr1", 0.10, 0.20},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			dir := t.TempDir()
			st := writeStudy(t, dir, tt.opt)
			m := newMemStore(dir, st.StudyUID)
			m.patientID = "QOH-SYN-0001"
			p := &audit.Pipeline{Engine: newEngine(), Store: m, Settle: 20 * time.Millisecond, Workers: 1}
			if tt.testPatient {
				p.TestPatientIDs = []string{m.patientID}
			}
			met := newPipelineMetrics(p)
			obs := signallingObserver{Metrics: met, done: make(chan bool, 1)}
			p.Observer = obs
			if err := p.Start(t.Context()); err != nil {
				t.Fatal(err)
			}
			t.Cleanup(p.Close)
			for _, s := range st.Series {
				m.receive(s.UID, s.Files)
				p.Notify(s.UID, st.StudyUID, time.Now())
			}
			select {
			case ok := <-obs.done:
				if !ok {
					t.Fatal("the audit failed")
				}
			case <-time.After(20 * time.Second):
				t.Fatal("no study audited in 20 s")
			}
			want := `
# HELP dwiaudit_audits_total Study audits finished, by result (failed: the audit stopped or its result could not be saved).
# TYPE dwiaudit_audits_total counter
dwiaudit_audits_total{result="failed"} 0
dwiaudit_audits_total{result="ok"} 1
`
			if err := testutil.GatherAndCompare(met.Registry(), strings.NewReader(want), "dwiaudit_audits_total"); err != nil {
				t.Error(err)
			}
			got := gathered(t, met, tt.gauge)
			if tt.high == 0 {
				if len(got) != 0 {
					t.Errorf("%s = %v, want no sample", tt.gauge, got)
				}
				if n := len(gathered(t, met, "dwiaudit_series_audited_timestamp_seconds")); n != 0 {
					t.Errorf("%d audited timestamps for a test patient, want none", n)
				}
				return
			}
			if v, ok := got[tt.labels]; !ok || v < tt.low || v > tt.high {
				t.Errorf("%s = %v, want {%s} in [%g, %g]", tt.gauge, got, tt.labels, tt.low, tt.high)
			}
		})
	}
}

func TestTheQueueGaugeCountsStudiesNotYetAudited(t *testing.T) {
	dir := t.TempDir()
	st := writeStudy(t, dir, phantom.Options{Matrix: 32, Slices: 4})
	m := newMemStore(dir, st.StudyUID)
	// A settle far longer than the test: the study stays queued.
	p := &audit.Pipeline{Engine: newEngine(), Store: m, Settle: time.Hour, Workers: 1}
	met := newPipelineMetrics(p)
	p.Observer = met
	if err := p.Start(t.Context()); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(p.Close)
	queue := func(n string) string {
		return `
# HELP dwiaudit_audit_queue_studies Studies received and not yet audited (settling, queued or being audited).
# TYPE dwiaudit_audit_queue_studies gauge
dwiaudit_audit_queue_studies ` + n + "\n"
	}
	if err := testutil.GatherAndCompare(met.Registry(), strings.NewReader(queue("0")), "dwiaudit_audit_queue_studies"); err != nil {
		t.Errorf("before any instance: %v", err)
	}
	for _, s := range st.Series {
		m.receive(s.UID, s.Files)
		p.Notify(s.UID, st.StudyUID, time.Now())
	}
	p.Notify(st.Series[0].UID, "1.2.826.0.1.3680043.10.543.99", time.Now()) // a second study
	if err := testutil.GatherAndCompare(met.Registry(), strings.NewReader(queue("2")), "dwiaudit_audit_queue_studies"); err != nil {
		t.Errorf("two studies settling: %v", err)
	}
}

func TestAnAuditThatPanicsCountsAsFailedWithItsAuditFailedFinding(t *testing.T) {
	dir := t.TempDir()
	st := writeStudy(t, dir, phantom.Options{Matrix: 32, Slices: 4})
	m := newMemStore(dir, st.StudyUID)
	m.failStudy = true
	p := &audit.Pipeline{Engine: newEngine(), Store: m, Settle: 10 * time.Millisecond, Workers: 1}
	met := newPipelineMetrics(p)
	obs := signallingObserver{Metrics: met, done: make(chan bool, 1)}
	p.Observer = obs
	if err := p.Start(t.Context()); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(p.Close)
	s := st.Series[0]
	m.receive(s.UID, s.Files)
	p.Notify(s.UID, st.StudyUID, time.Now())
	select {
	case ok := <-obs.done:
		if ok {
			t.Fatal("a panicking audit was reported ok")
		}
	case <-time.After(10 * time.Second):
		t.Fatal("no study audited in 10 s")
	}
	want := `
# HELP dwiaudit_audits_total Study audits finished, by result (failed: the audit stopped or its result could not be saved).
# TYPE dwiaudit_audits_total counter
dwiaudit_audits_total{result="failed"} 1
dwiaudit_audits_total{result="ok"} 0
`
	if err := testutil.GatherAndCompare(met.Registry(), strings.NewReader(want), "dwiaudit_audits_total"); err != nil {
		t.Error(err)
	}
	got := gathered(t, met, "dwiaudit_findings_total")
	sev := rules.AuditFailed(nil, "").Severity.String()
	if got["rule=audit-failed,scanner=qoh-mr1,severity="+sev] != 1 || len(got) != 1 {
		t.Errorf("findings_total = %v, want one audit-failed %s on qoh-mr1", got, sev)
	}
}
