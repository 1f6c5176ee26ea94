package metrics_test

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"net/http"
	"net/http/httptest"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus/collectors"
	"github.com/prometheus/client_golang/prometheus/testutil"

	"dwiaudit/audit/metrics"
	stored "dwiaudit/audit/record"
	"dwiaudit/store"
)

// Configuration of the invented Quellvander Ostmire Hospital the tests
// use.
var (
	testScanners  = []string{"qoh-mr1", "qoh-mr2"}
	testProtocols = []string{"brain-dwi", "prostate-dwi"}
	testPhantoms  = []string{"ice-water"}
	testRules     = []string{"missing-b0", "bvalue-mismatch", "adc-out-of-range", "b0-only-hotspot", "low-snr", "phantom-adc-bias", "audit-failed"}
)

func newTestMetrics(free func() (uint64, error), queued func() int) *metrics.Metrics {
	return metrics.New(metrics.Options{
		Version:       "v1.2.3",
		GoVersion:     "go1.26.8",
		Labels:        metrics.NewLabels(testScanners, testProtocols, testPhantoms, testRules),
		DiskFloor:     2 << 30,
		FreeBytes:     free,
		QueuedStudies: queued,
	})
}

// finding is a stored finding as audit/pipeline.go writes it
// (rules.Finding's JSON), with identifiers in every field that has one.
type finding struct {
	Rule              string `json:"rule"`
	Severity          string `json:"severity"`
	StudyUID          string `json:"study_uid"`
	SeriesUID         string `json:"series_uid"`
	SeriesNumber      int    `json:"series_number"`
	SeriesDescription string `json:"series_description"`
	Scanner           string `json:"scanner"`
	Message           string `json:"message"`
	Measured          any    `json:"measured"`
	Expected          any    `json:"expected"`
}

// measures is a series' stored measures as audit/pipeline.go writes
// them, ADC in mm²/s.
type measures = stored.Measures

func num(v float64) *float64 { return &v }

// testStudy is the study the audits belong to, as the store knows it.
var testStudy = store.Study{StudyInstanceUID: studyUID, AccessionNumber: accession, PatientID: patientID, PatientName: patient}

// audited tells m of a saved audit of testStudy, as the pipeline does.
func audited(m *metrics.Metrics, rec store.AuditRecord) { m.AuditSaved(rec, testStudy) }

// Identifiers of the synthetic study; none may reach a label.
const (
	studyUID  = "1.2.826.0.1.3680043.10.543.1.1"
	seriesUID = "1.2.826.0.1.3680043.10.543.1.1.2"
	accession = "QOH20250314001"
	patientID = "QOH-SYN-0001"
	patient   = "TEST^SYNTHETIC"
)

func record(t testing.TB, scanner string, at time.Time, test bool, m *measures, fs ...finding) store.AuditRecord {
	t.Helper()
	for i := range fs {
		fs[i].StudyUID, fs[i].SeriesUID, fs[i].Scanner = studyUID, seriesUID, scanner
		fs[i].SeriesDescription = "DWI " + patient
		fs[i].Message = "series " + seriesUID + " of " + patientID
	}
	if fs == nil {
		fs = []finding{}
	}
	fj, err := json.Marshal(fs)
	if err != nil {
		t.Fatal(err)
	}
	rec := store.AuditRecord{AuditTime: at, StudyInstanceUID: studyUID, SeriesUID: seriesUID, Scanner: scanner,
		AccessionNumber: accession, TestPatient: test, Findings: fj}
	if m != nil {
		if rec.Measures, err = json.Marshal(m); err != nil {
			t.Fatal(err)
		}
	}
	return rec
}

// g formats a float as the exposition format does (shortest form that
// reads back to the same value).
func g(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// si is an ADC in mm²/s in the base unit m²/s, computed at run time as
// the collectors do (a constant expression would be exact and differ in
// the last bit).
func si(mm2 float64) string { return g(mm2 * 1e-6) }

// sum adds in order at run time, as a histogram's sum does.
func sum(vs ...float64) string {
	var s float64
	for _, v := range vs {
		s += v
	}
	return g(s)
}

// ratio is a/b - 1 at run time, as the collectors compute the bias.
func ratio(a, b float64) string { return g(a/b - 1) }

func TestTheCollectorsExposeExactlyTheEventsTheyWereFed(t *testing.T) {
	m := newTestMetrics(func() (uint64, error) { return 123456789, nil }, func() int { return 2 })
	t1 := time.Date(2025, 3, 14, 9, 45, 0, 0, time.UTC)

	m.Association("released", map[string]int{"success": 3, "warning": 1})
	m.Association("aborted-by-peer", map[string]int{"failure": 2})
	m.Association("rejected", nil)
	m.InstanceStored("qoh-mr1", 1000, 2*time.Millisecond)
	m.InstanceStored("qoh-mr1", 500, 20*time.Millisecond)
	m.InstanceStored("", 10, 700*time.Microsecond)
	m.StudyAudited(true, 300*time.Millisecond)
	m.StudyAudited(false, 3*time.Second)
	audited(m, record(t, "qoh-mr1", t1, false,
		&measures{Protocol: "brain-dwi", TissueADCMedian: num(0.00079), CSFADC: num(0.003), B0SNR: num(41.5)},
		finding{Rule: "b0-only-hotspot", Severity: "error"}, finding{Rule: "low-snr", Severity: "warning"}))
	audited(m, record(t, "qoh-mr2", t1, false,
		&measures{Protocol: "ice-water", B0SNR: num(80), PhantomADC: num(0.00121), PhantomExpectedADC: num(0.0011)},
		finding{Rule: "phantom-adc-bias", Severity: "error"}))
	// A test patient's audit: its finding counts, its measures do not.
	audited(m, record(t, "qoh-mr2", t1, true,
		&measures{Protocol: "brain-dwi", TissueADCMedian: num(0.002), CSFADC: num(0.001), B0SNR: num(3)},
		finding{Rule: "adc-out-of-range", Severity: "warning"}))

	unix := g(float64(t1.Unix()))
	want := `
# HELP dwiaudit_associations_total DICOM associations finished, by how they ended.
# TYPE dwiaudit_associations_total counter
dwiaudit_associations_total{result="aborted"} 0
dwiaudit_associations_total{result="aborted_by_peer"} 1
dwiaudit_associations_total{result="closed"} 0
dwiaudit_associations_total{result="rejected"} 1
dwiaudit_associations_total{result="released"} 1
dwiaudit_associations_total{result="shutdown"} 0
dwiaudit_associations_total{result="timeout"} 0
# HELP dwiaudit_audit_duration_seconds Time to audit one study, from reading its files to saving its findings.
# TYPE dwiaudit_audit_duration_seconds histogram
dwiaudit_audit_duration_seconds_bucket{le="0.05"} 0
dwiaudit_audit_duration_seconds_bucket{le="0.1"} 0
dwiaudit_audit_duration_seconds_bucket{le="0.25"} 0
dwiaudit_audit_duration_seconds_bucket{le="0.5"} 1
dwiaudit_audit_duration_seconds_bucket{le="1"} 1
dwiaudit_audit_duration_seconds_bucket{le="2.5"} 1
dwiaudit_audit_duration_seconds_bucket{le="5"} 2
dwiaudit_audit_duration_seconds_bucket{le="10"} 2
dwiaudit_audit_duration_seconds_bucket{le="30"} 2
dwiaudit_audit_duration_seconds_bucket{le="60"} 2
dwiaudit_audit_duration_seconds_bucket{le="120"} 2
dwiaudit_audit_duration_seconds_bucket{le="+Inf"} 2
dwiaudit_audit_duration_seconds_sum 3.3
dwiaudit_audit_duration_seconds_count 2
# HELP dwiaudit_audit_queue_studies Studies received and not yet audited (settling, queued or being audited).
# TYPE dwiaudit_audit_queue_studies gauge
dwiaudit_audit_queue_studies 2
# HELP dwiaudit_audits_total Study audits finished, by result (failed: the audit stopped or its result could not be saved).
# TYPE dwiaudit_audits_total counter
dwiaudit_audits_total{result="failed"} 1
dwiaudit_audits_total{result="ok"} 1
# HELP dwiaudit_build_info Always 1; the labels say which dwiaudit build runs and with which Go.
# TYPE dwiaudit_build_info gauge
dwiaudit_build_info{goversion="go1.26.8",version="v1.2.3"} 1
# HELP dwiaudit_cstore_responses_total C-STORE responses sent, by status class (PS3.7 Annex C), counted as each association ends.
# TYPE dwiaudit_cstore_responses_total counter
dwiaudit_cstore_responses_total{status_class="failure"} 2
dwiaudit_cstore_responses_total{status_class="success"} 3
dwiaudit_cstore_responses_total{status_class="warning"} 1
# HELP dwiaudit_data_floor_bytes Configured free-space floor of the data folder (limits.disk_floor); stores are refused below it.
# TYPE dwiaudit_data_floor_bytes gauge
dwiaudit_data_floor_bytes 2.147483648e+09
# HELP dwiaudit_data_free_bytes Free bytes in the data folder's file system, read at scrape.
# TYPE dwiaudit_data_free_bytes gauge
dwiaudit_data_free_bytes 1.23456789e+08
# HELP dwiaudit_findings_total Findings saved, by scanner, rule and severity (test patients included).
# TYPE dwiaudit_findings_total counter
dwiaudit_findings_total{rule="adc-out-of-range",scanner="qoh-mr2",severity="warning"} 1
dwiaudit_findings_total{rule="b0-only-hotspot",scanner="qoh-mr1",severity="error"} 1
dwiaudit_findings_total{rule="low-snr",scanner="qoh-mr1",severity="warning"} 1
dwiaudit_findings_total{rule="phantom-adc-bias",scanner="qoh-mr2",severity="error"} 1
# HELP dwiaudit_phantom_adc_bias_ratio Latest phantom central ADC over the profile's expected ADC, minus 1 (0.05 is 5% high).
# TYPE dwiaudit_phantom_adc_bias_ratio gauge
dwiaudit_phantom_adc_bias_ratio{phantom="ice-water",scanner="qoh-mr2"} ` + ratio(0.00121, 0.0011) + `
# HELP dwiaudit_phantom_adc_square_meters_per_second Central-region ADC of the latest audited phantom series of this scanner and phantom profile.
# TYPE dwiaudit_phantom_adc_square_meters_per_second gauge
dwiaudit_phantom_adc_square_meters_per_second{phantom="ice-water",scanner="qoh-mr2"} ` + si(0.00121) + `
# HELP dwiaudit_phantom_audited_timestamp_seconds Unix time of the latest audit of a phantom series of this scanner and phantom profile.
# TYPE dwiaudit_phantom_audited_timestamp_seconds gauge
dwiaudit_phantom_audited_timestamp_seconds{phantom="ice-water",scanner="qoh-mr2"} ` + unix + `
# HELP dwiaudit_received_bytes_total Data-set bytes of the instances received and stored, by scanner.
# TYPE dwiaudit_received_bytes_total counter
dwiaudit_received_bytes_total{scanner="qoh-mr1"} 1500
dwiaudit_received_bytes_total{scanner="unknown"} 10
# HELP dwiaudit_received_instances_total Instances received and stored durably (identical duplicates included), by scanner.
# TYPE dwiaudit_received_instances_total counter
dwiaudit_received_instances_total{scanner="qoh-mr1"} 2
dwiaudit_received_instances_total{scanner="unknown"} 1
# HELP dwiaudit_series_b0_snr b0 signal-to-noise ratio of the latest audited series of this scanner and protocol (test patients left out).
# TYPE dwiaudit_series_b0_snr gauge
dwiaudit_series_b0_snr{protocol="brain-dwi",scanner="qoh-mr1"} 41.5
# HELP dwiaudit_series_csf_adc_square_meters_per_second CSF ADC (high percentile inside the head) in the latest audited series of this scanner and protocol (test patients left out).
# TYPE dwiaudit_series_csf_adc_square_meters_per_second gauge
dwiaudit_series_csf_adc_square_meters_per_second{protocol="brain-dwi",scanner="qoh-mr1"} ` + si(0.003) + `
# HELP dwiaudit_series_parenchyma_adc_square_meters_per_second Median ADC of brain parenchyma in the latest audited series of this scanner and protocol (test patients left out).
# TYPE dwiaudit_series_parenchyma_adc_square_meters_per_second gauge
dwiaudit_series_parenchyma_adc_square_meters_per_second{protocol="brain-dwi",scanner="qoh-mr1"} ` + si(0.00079) + `
# HELP dwiaudit_series_audited_timestamp_seconds Unix time of the latest audit of a series of this scanner and protocol (test patients left out).
# TYPE dwiaudit_series_audited_timestamp_seconds gauge
dwiaudit_series_audited_timestamp_seconds{protocol="brain-dwi",scanner="qoh-mr1"} ` + unix + `
# HELP dwiaudit_store_put_duration_seconds Time from the first byte of a C-STORE data set to its durable commit in the store.
# TYPE dwiaudit_store_put_duration_seconds histogram
dwiaudit_store_put_duration_seconds_bucket{le="0.0005"} 0
dwiaudit_store_put_duration_seconds_bucket{le="0.001"} 1
dwiaudit_store_put_duration_seconds_bucket{le="0.0025"} 2
dwiaudit_store_put_duration_seconds_bucket{le="0.005"} 2
dwiaudit_store_put_duration_seconds_bucket{le="0.01"} 2
dwiaudit_store_put_duration_seconds_bucket{le="0.025"} 3
dwiaudit_store_put_duration_seconds_bucket{le="0.05"} 3
dwiaudit_store_put_duration_seconds_bucket{le="0.1"} 3
dwiaudit_store_put_duration_seconds_bucket{le="0.25"} 3
dwiaudit_store_put_duration_seconds_bucket{le="0.5"} 3
dwiaudit_store_put_duration_seconds_bucket{le="1"} 3
dwiaudit_store_put_duration_seconds_bucket{le="2.5"} 3
dwiaudit_store_put_duration_seconds_bucket{le="5"} 3
dwiaudit_store_put_duration_seconds_bucket{le="10"} 3
dwiaudit_store_put_duration_seconds_bucket{le="30"} 3
dwiaudit_store_put_duration_seconds_bucket{le="+Inf"} 3
dwiaudit_store_put_duration_seconds_sum ` + sum(0.002, 0.02, 0.0007) + `
dwiaudit_store_put_duration_seconds_count 3
`
	if err := testutil.GatherAndCompare(m.Registry(), strings.NewReader(want)); err != nil {
		t.Error(err)
	}
	// The bias is the ratio the help text promises: 1.21/1.10 - 1 = 10%
	// high (arithmetic).
	if bias := gaugeValue(t, m, "dwiaudit_phantom_adc_bias_ratio"); math.Abs(bias-0.1) > 1e-9 {
		t.Errorf("bias ratio %v, want 0.1", bias)
	}
	problems, err := testutil.GatherAndLint(m.Registry())
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range problems {
		t.Errorf("promlint: %s: %s", p.Metric, p.Text)
	}
}

// gaugeValue gathers the single sample of the named gauge.
func gaugeValue(t *testing.T, m *metrics.Metrics, name string) float64 {
	t.Helper()
	mfs, err := m.Registry().Gather()
	if err != nil {
		t.Fatal(err)
	}
	for _, mf := range mfs {
		if mf.GetName() == name && len(mf.Metric) == 1 {
			return mf.Metric[0].GetGauge().GetValue()
		}
	}
	t.Fatalf("no single sample of %s", name)
	return 0
}

func TestTheGoAndProcessCollectorsPassLintBesideOurs(t *testing.T) {
	// The node registers them too (cmd/dwiaudit metrics.go); lint the
	// whole exposition a scrape returns, ours fed with one of each event.
	m := newTestMetrics(func() (uint64, error) { return 1, nil }, func() int { return 0 })
	m.Registry().MustRegister(collectors.NewGoCollector(), collectors.NewProcessCollector(collectors.ProcessCollectorOpts{}))
	m.InstanceStored("QOH MR 3 (Station)", 1, time.Millisecond)
	audited(m, record(t, "qoh-mr1", time.Unix(1, 0), false, &measures{Protocol: "brain-dwi", TissueADCMedian: num(0.0008)},
		finding{Rule: "missing-b0", Severity: "error"}))
	problems, err := testutil.GatherAndLint(m.Registry())
	if err != nil {
		t.Fatal(err)
	}
	if len(problems) != 0 {
		t.Errorf("promlint problems: %+v", problems)
	}
	n, err := testutil.GatherAndCount(m.Registry())
	if err != nil || n == 0 {
		t.Errorf("gathered %d samples, err %v", n, err)
	}
}

func TestDriftGaugesKeepTheNewestDefinedValue(t *testing.T) {
	t0 := time.Date(2025, 3, 14, 9, 0, 0, 0, time.UTC)
	brain := func(adc *float64) *measures {
		return &measures{Protocol: "brain-dwi", TissueADCMedian: adc, CSFADC: num(0.003), B0SNR: num(40)}
	}
	tests := []struct {
		name string
		feed func(m *metrics.Metrics)
		want float64 // parenchyma ADC, mm²/s; NaN: no sample
	}{
		{"a newer audit replaces the value", func(m *metrics.Metrics) {
			audited(m, record(t, "qoh-mr1", t0, false, brain(num(0.0008))))
			audited(m, record(t, "qoh-mr1", t0.Add(time.Hour), false, brain(num(0.0009))))
		}, 0.0009},
		{"an older audit arriving late leaves the newer value", func(m *metrics.Metrics) {
			audited(m, record(t, "qoh-mr1", t0.Add(time.Hour), false, brain(num(0.0009))))
			m.Seed([]store.AuditRecord{record(t, "qoh-mr1", t0, false, brain(num(0.0008)))}, nil)
		}, 0.0009},
		{"an undefined measure leaves the last real one", func(m *metrics.Metrics) {
			audited(m, record(t, "qoh-mr1", t0, false, brain(num(0.0008))))
			audited(m, record(t, "qoh-mr1", t0.Add(time.Hour), false, brain(nil)))
		}, 0.0008},
		{"a test patient's audit moves nothing", func(m *metrics.Metrics) {
			audited(m, record(t, "qoh-mr1", t0, false, brain(num(0.0008))))
			audited(m, record(t, "qoh-mr1", t0.Add(time.Hour), true, brain(num(0.0015))))
		}, 0.0008},
		{"a test patient's stored audit seeds nothing", func(m *metrics.Metrics) {
			m.Seed([]store.AuditRecord{record(t, "qoh-mr1", t0, true, brain(num(0.0015)))}, nil)
		}, math.NaN()},
		{"seeding sets the gauges from stored audits", func(m *metrics.Metrics) {
			m.Seed([]store.AuditRecord{record(t, "qoh-mr1", t0, false, brain(num(0.0008)))}, nil)
		}, 0.0008},
		{"an audit without measures (audit-failed) moves nothing", func(m *metrics.Metrics) {
			audited(m, record(t, "qoh-mr1", t0, false, nil, finding{Rule: "audit-failed", Severity: "error"}))
		}, math.NaN()},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			m := newTestMetrics(nil, nil)
			tt.feed(m)
			want := ""
			if !math.IsNaN(tt.want) {
				want = `
# HELP dwiaudit_series_parenchyma_adc_square_meters_per_second Median ADC of brain parenchyma in the latest audited series of this scanner and protocol (test patients left out).
# TYPE dwiaudit_series_parenchyma_adc_square_meters_per_second gauge
dwiaudit_series_parenchyma_adc_square_meters_per_second{protocol="brain-dwi",scanner="qoh-mr1"} ` + si(tt.want) + "\n"
			}
			if err := testutil.GatherAndCompare(m.Registry(), strings.NewReader(want), "dwiaudit_series_parenchyma_adc_square_meters_per_second"); err != nil {
				t.Error(err)
			}
		})
	}
}

func TestSeedingCountsNoFindingsAndNoAudits(t *testing.T) {
	m := newTestMetrics(nil, nil)
	m.Seed([]store.AuditRecord{record(t, "qoh-mr1", time.Unix(1e9, 0), false,
		&measures{Protocol: "brain-dwi", TissueADCMedian: num(0.0008)}, finding{Rule: "missing-b0", Severity: "error"})}, nil)
	n, err := testutil.GatherAndCount(m.Registry(), "dwiaudit_findings_total")
	if err != nil || n != 0 {
		t.Errorf("findings_total has %d samples after seeding (err %v), want none", n, err)
	}
	want := `
# HELP dwiaudit_audits_total Study audits finished, by result (failed: the audit stopped or its result could not be saved).
# TYPE dwiaudit_audits_total counter
dwiaudit_audits_total{result="failed"} 0
dwiaudit_audits_total{result="ok"} 0
`
	if err := testutil.GatherAndCompare(m.Registry(), strings.NewReader(want), "dwiaudit_audits_total"); err != nil {
		t.Error(err)
	}
}

func TestLabelValuesAreBounded(t *testing.T) {
	l := metrics.NewLabels(testScanners, testProtocols, testPhantoms, testRules)
	tests := []struct {
		name, got, want string
	}{
		{"a configured scanner label is kept", l.Scanner("qoh-mr1"), "qoh-mr1"},
		{"a station name is lower-cased and its other characters become one underscore", l.Scanner("QOH MR (3T) #4"), "qoh_mr_3t_4"},
		{"a station name is cut to 32 characters", l.Scanner(strings.Repeat("ab", 40)), strings.Repeat("ab", 16)},
		{"an empty station name is unknown", l.Scanner("  "), metrics.LabelUnknown},
		{"a station name of symbols only is unknown", l.Scanner("^^^"), metrics.LabelUnknown},
		{"a UID-shaped station name is other", l.Scanner(studyUID), metrics.LabelOther},
		{"a station name holding a UID is other", l.Scanner("MR 1.2.840.113619 room 2"), metrics.LabelOther},
		{"a field strength is no UID", l.Scanner("QOH MR 1.5T"), "qoh_mr_1.5t"},
		{"a station name holding the study's patient ID is other", l.Scanner("MR-"+patientID, patientID), metrics.LabelOther},
		{"a station name holding part of the patient's name is other", l.Scanner("SYNTHETIC ROOM", patient), metrics.LabelOther},
		{"a station name holding the accession is other", l.Scanner(accession, accession), metrics.LabelOther},
		{"short name parts do not match device names by chance", l.Scanner("QOH MR 2", "MR^X"), "qoh_mr_2"},
		{"no protocol is none", l.Protocol(""), metrics.LabelNone},
		{"a configured protocol is kept", l.Protocol("prostate-dwi"), "prostate-dwi"},
		{"an unconfigured protocol is other", l.Protocol("DWI " + patient), metrics.LabelOther},
		{"a configured phantom is kept", l.Phantom("ice-water"), "ice-water"},
		{"an unconfigured phantom is other", l.Phantom("warm-water"), metrics.LabelOther},
		{"a known rule is kept", l.Rule("b0-only-hotspot"), "b0-only-hotspot"},
		{"an unknown rule is other", l.Rule(seriesUID), metrics.LabelOther},
		{"a known severity is kept", l.Severity("warning"), "warning"},
		{"an unknown severity is other", l.Severity("Severity(9)"), metrics.LabelOther},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if tt.got != tt.want {
				t.Errorf("got %q, want %q", tt.got, tt.want)
			}
		})
	}
	t.Run("fallback scanners beyond the cap are other", func(t *testing.T) {
		l := metrics.NewLabels(testScanners, nil, nil, nil)
		seen := map[string]bool{}
		for i := range 40 {
			seen[l.Scanner(fmt.Sprintf("STATION%02d", i))] = true
		}
		if len(seen) != metrics.MaxFallbackScanners+1 || !seen[metrics.LabelOther] {
			t.Errorf("%d distinct labels %v, want %d stations and other", len(seen), seen, metrics.MaxFallbackScanners)
		}
		if got := l.Scanner("STATION03"); got != "station03" {
			t.Errorf("a station seen before the cap became %q", got)
		}
		if got := l.Scanner("qoh-mr2"); got != "qoh-mr2" {
			t.Errorf("a configured label past the cap became %q", got)
		}
	})
}

func TestNoIdentifierEverReachesALabel(t *testing.T) {
	m := newTestMetrics(func() (uint64, error) { return 1, nil }, func() int { return 1 })
	at := time.Unix(1.7e9, 0)
	identifiers := []string{studyUID, seriesUID, accession, patientID, patient, "TEST", "SYNTHETIC", "3680043"}
	// Scanners as a misconfigured router might send them: UIDs, the
	// patient, nothing; plus protocol names that are not configured.
	for _, scanner := range []string{"", studyUID, seriesUID, patientID, patient, accession, "qoh-mr1"} {
		for _, protocol := range []string{"", "brain-dwi", "ice-water", patient, seriesUID} {
			audited(m, record(t, scanner, at, false,
				&measures{SeriesDescription: "DWI " + patient, Protocol: protocol, TissueADCMedian: num(0.0008), PhantomADC: num(0.0011), PhantomExpectedADC: num(0.0011)},
				finding{Rule: "missing-b0", Severity: "error"}, finding{Rule: seriesUID, Severity: patientID}))
		}
		// The ingest adapter passes the study's identifiers (ingest.go).
		m.InstanceStored(scanner, 10, time.Millisecond, studyUID, seriesUID, patientID, patient, accession)
	}
	mfs, err := m.Registry().Gather()
	if err != nil {
		t.Fatal(err)
	}
	values := 0
	for _, mf := range mfs {
		for _, s := range mf.Metric {
			for _, lp := range s.Label {
				values++
				v := strings.ToUpper(lp.GetValue())
				for _, id := range identifiers {
					if strings.Contains(v, strings.ToUpper(id)) {
						t.Errorf("%s{%s=%q} carries the identifier %q", mf.GetName(), lp.GetName(), lp.GetValue(), id)
					}
				}
			}
		}
	}
	if values < 20 {
		t.Errorf("only %d label values gathered; the events did not register", values)
	}
}

func TestAFailingFreeSpaceReadLeavesOnlyThatGaugeOut(t *testing.T) {
	m := newTestMetrics(func() (uint64, error) { return 0, errors.New("statfs: input/output error") }, func() int { return 0 })
	srv := httptest.NewServer(m.Handler())
	defer srv.Close()
	var text string
	// The handler counts a gathering error after the scrape that met
	// it, so the second scrape shows the first one's error.
	for range 2 {
		res, err := http.Get(srv.URL)
		if err != nil {
			t.Fatal(err)
		}
		body, _ := io.ReadAll(res.Body)
		res.Body.Close()
		if res.StatusCode != http.StatusOK {
			t.Fatalf("status %d, want 200 with the rest of the metrics", res.StatusCode)
		}
		text = string(body)
	}
	if strings.Contains(text, "dwiaudit_data_free_bytes") || !strings.Contains(text, "dwiaudit_data_floor_bytes 2.147483648e+09") {
		t.Errorf("free bytes served or floor missing:\n%s", text)
	}
	if !strings.Contains(text, `promhttp_metric_handler_errors_total{cause="gathering"} 1`) {
		t.Errorf("the gathering error is not counted:\n%s", text)
	}
}

func TestEventsFromManyGoroutinesWhileScrapedAreAllCounted(t *testing.T) {
	m := newTestMetrics(func() (uint64, error) { return 1, nil }, func() int { return 0 })
	const workers, each = 8, 50
	var wg sync.WaitGroup
	for w := range workers {
		wg.Go(func() {
			for i := range each {
				station := fmt.Sprintf("STATION%02d", (w*each+i)%24) // past the fallback cap
				m.InstanceStored(station, 100, time.Millisecond)
				audited(m, record(t, station, time.Unix(int64(1e9+i), 0), false,
					&measures{Protocol: "brain-dwi", TissueADCMedian: num(0.0008)}, finding{Rule: "low-snr", Severity: "warning"}))
			}
		})
	}
	wg.Go(func() {
		for range 20 {
			if _, err := m.Registry().Gather(); err != nil {
				t.Error(err)
			}
		}
	})
	wg.Wait()
	var instances, findings float64
	for _, v := range gatheredValues(t, m, "dwiaudit_received_instances_total") {
		instances += v
	}
	for _, v := range gatheredValues(t, m, "dwiaudit_findings_total") {
		findings += v
	}
	if instances != workers*each || findings != workers*each {
		t.Errorf("%v instances and %v findings counted, want %d each", instances, findings, workers*each)
	}
	if n := len(gatheredValues(t, m, "dwiaudit_received_instances_total")); n != metrics.MaxFallbackScanners+1 {
		t.Errorf("%d scanner labels, want %d stations and other", n, metrics.MaxFallbackScanners)
	}
}

// gatheredValues lists the counter values of the named family.
func gatheredValues(t *testing.T, m *metrics.Metrics, name string) []float64 {
	t.Helper()
	mfs, err := m.Registry().Gather()
	if err != nil {
		t.Fatal(err)
	}
	var out []float64
	for _, mf := range mfs {
		if mf.GetName() == name {
			for _, s := range mf.Metric {
				out = append(out, s.GetCounter().GetValue())
			}
		}
	}
	return out
}
