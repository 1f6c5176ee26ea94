package metrics

import (
	"log/slog"
	"net/http"
	"slices"
	"strings"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/promhttp"
)

const namespace = "dwiaudit"

// Buckets of the histograms.
var (
	// putBuckets spans one store.Put from the first byte received to the
	// durable commit: about 1 ms for a small image on a fast disk
	// (DEVELOPERS.md, 0.44-0.94 ms for the durable sequence alone) to
	// tens of seconds for a 1 GiB multi-frame object on a slow link.
	putBuckets = []float64{0.0005, 0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 5, 10, 30}
	// auditBuckets spans one study's audit: under a second for a
	// 300-image series (DEVELOPERS.md) up to the pipeline's two-minute
	// timeout (audit.DefaultAuditTimeout).
	auditBuckets = []float64{0.05, 0.1, 0.25, 0.5, 1, 2.5, 5, 10, 30, 60, 120}
)

// Association results (scp.AssociationSummary.Result with '-' as '_')
// and C-STORE-RSP status classes (PS3.7 Annex C); the counters start at
// zero for each, so that rate() and alerts see them before the first
// event.
var (
	associationResults = []string{"released", "aborted_by_peer", "aborted", "rejected", "timeout", "closed", "shutdown"}
	statusClasses      = []string{"success", "warning", "failure"}
	auditResults       = []string{"ok", "failed"}
)

// Options configure New.
type Options struct {
	// Version and GoVersion are dwiaudit_build_info's labels.
	Version, GoVersion string
	// Labels bounds the label values; NewLabels(nil, nil, nil, nil)
	// when nil.
	Labels *Labels
	// DiskFloor is the configured limits.disk_floor, bytes.
	DiskFloor uint64
	// FreeBytes, when set, reports the free bytes in the data folder's
	// file system; it is read at each scrape.
	FreeBytes func() (uint64, error)
	// QueuedStudies, when set, reports the studies received and not yet
	// audited (audit.Pipeline.Backlog); read at each scrape.
	QueuedStudies func() int
	// Logger gets scrape errors. Nil discards.
	Logger *slog.Logger
}

// Metrics is the node's collectors in their own registry. Its methods
// are safe for concurrent use and never block on I/O.
type Metrics struct {
	reg    *prometheus.Registry
	labels *Labels
	log    *slog.Logger

	associations *prometheus.CounterVec
	responses    *prometheus.CounterVec
	instances    *prometheus.CounterVec
	bytes        *prometheus.CounterVec
	putDuration  prometheus.Histogram
	audits       *prometheus.CounterVec
	auditTime    prometheus.Histogram
	findings     *prometheus.CounterVec

	drift drift
}

// New builds the collectors and registers them in a fresh registry.
func New(o Options) *Metrics {
	l := o.Labels
	if l == nil {
		l = NewLabels(nil, nil, nil, nil)
	}
	log := o.Logger
	if log == nil {
		log = slog.New(slog.DiscardHandler)
	}
	m := &Metrics{reg: prometheus.NewRegistry(), labels: l, log: log}
	name := func(s string) string { return prometheus.BuildFQName(namespace, "", s) }

	build := prometheus.NewGauge(prometheus.GaugeOpts{
		Name:        name("build_info"),
		Help:        "Always 1; the labels say which dwiaudit build runs and with which Go.",
		ConstLabels: prometheus.Labels{"version": o.Version, "goversion": o.GoVersion},
	})
	build.Set(1)
	m.associations = prometheus.NewCounterVec(prometheus.CounterOpts{
		Name: name("associations_total"),
		Help: "DICOM associations finished, by how they ended.",
	}, []string{"result"})
	m.responses = prometheus.NewCounterVec(prometheus.CounterOpts{
		Name: name("cstore_responses_total"),
		Help: "C-STORE responses sent, by status class (PS3.7 Annex C), counted as each association ends.",
	}, []string{"status_class"})
	m.instances = prometheus.NewCounterVec(prometheus.CounterOpts{
		Name: name("received_instances_total"),
		Help: "Instances received and stored durably (identical duplicates included), by scanner.",
	}, []string{"scanner"})
	m.bytes = prometheus.NewCounterVec(prometheus.CounterOpts{
		Name: name("received_bytes_total"),
		Help: "Data-set bytes of the instances received and stored, by scanner.",
	}, []string{"scanner"})
	m.putDuration = prometheus.NewHistogram(prometheus.HistogramOpts{
		Name:    name("store_put_duration_seconds"),
		Help:    "Time from the first byte of a C-STORE data set to its durable commit in the store.",
		Buckets: putBuckets,
	})
	floor := prometheus.NewGauge(prometheus.GaugeOpts{
		Name: name("data_floor_bytes"),
		Help: "Configured free-space floor of the data folder (limits.disk_floor); stores are refused below it.",
	})
	floor.Set(float64(o.DiskFloor))
	m.audits = prometheus.NewCounterVec(prometheus.CounterOpts{
		Name: name("audits_total"),
		Help: "Study audits finished, by result (failed: the audit stopped or its result could not be saved).",
	}, []string{"result"})
	m.auditTime = prometheus.NewHistogram(prometheus.HistogramOpts{
		Name:    name("audit_duration_seconds"),
		Help:    "Time to audit one study, from reading its files to saving its findings.",
		Buckets: auditBuckets,
	})
	m.findings = prometheus.NewCounterVec(prometheus.CounterOpts{
		Name: name("findings_total"),
		Help: "Findings saved, by scanner, rule and severity (test patients included).",
	}, []string{"scanner", "rule", "severity"})

	for _, r := range associationResults {
		m.associations.WithLabelValues(r)
	}
	for _, c := range statusClasses {
		m.responses.WithLabelValues(c)
	}
	for _, r := range auditResults {
		m.audits.WithLabelValues(r)
	}
	m.drift = newDrift(name)

	m.reg.MustRegister(build, m.associations, m.responses, m.instances, m.bytes, m.putDuration,
		floor, m.audits, m.auditTime, m.findings)
	m.drift.register(m.reg)
	if o.FreeBytes != nil {
		m.reg.MustRegister(&freeBytes{
			desc: prometheus.NewDesc(name("data_free_bytes"), "Free bytes in the data folder's file system, read at scrape.", nil, nil),
			read: o.FreeBytes,
		})
	}
	if o.QueuedStudies != nil {
		q := o.QueuedStudies
		m.reg.MustRegister(prometheus.NewGaugeFunc(prometheus.GaugeOpts{
			Name: name("audit_queue_studies"),
			Help: "Studies received and not yet audited (settling, queued or being audited).",
		}, func() float64 { return float64(q()) }))
	}
	return m
}

// Registry is the registry the collectors are in; the caller may add
// its own (Go runtime, process).
func (m *Metrics) Registry() *prometheus.Registry { return m.reg }

// Handler serves the registry in the Prometheus exposition formats. A
// collector that fails (the free-space read) is left out of that scrape
// and logged; the rest is served.
func (m *Metrics) Handler() http.Handler {
	return promhttp.HandlerFor(m.reg, promhttp.HandlerOpts{
		ErrorLog:      slog.NewLogLogger(m.log.Handler(), slog.LevelWarn),
		ErrorHandling: promhttp.ContinueOnError,
		Registry:      m.reg,
	})
}

// Association counts one finished association: result is
// scp.AssociationSummary.Result, storeResponses its C-STORE responses
// by status class name ("success", "warning", "failure"; PS3.7 Annex C).
func (m *Metrics) Association(result string, storeResponses map[string]int) {
	r := strings.ReplaceAll(result, "-", "_")
	if !slices.Contains(associationResults, r) {
		r = LabelOther
	}
	m.associations.WithLabelValues(r).Inc()
	for class, n := range storeResponses {
		if n <= 0 {
			continue
		}
		if !slices.Contains(statusClasses, class) {
			// A C-STORE-RSP is never pending or cancel; anything else
			// told the peer the store did not work.
			class = "failure"
		}
		m.responses.WithLabelValues(class).Add(float64(n))
	}
}

// InstanceStored counts one instance stored durably: its scanner (a
// configured label or a Station Name), its data-set bytes, and the time
// from its first byte to the commit. never are the identifiers of its
// study, kept out of the scanner label (Labels.Scanner).
func (m *Metrics) InstanceStored(scanner string, bytes int64, took time.Duration, never ...string) {
	s := m.labels.Scanner(scanner, never...)
	m.instances.WithLabelValues(s).Inc()
	if bytes > 0 {
		m.bytes.WithLabelValues(s).Add(float64(bytes))
	}
	m.putDuration.Observe(took.Seconds())
}

// StudyAudited counts one finished study audit (audit.Observer).
func (m *Metrics) StudyAudited(ok bool, took time.Duration) {
	r := "ok"
	if !ok {
		r = "failed"
	}
	m.audits.WithLabelValues(r).Inc()
	m.auditTime.Observe(took.Seconds())
}

// freeBytes reads the data folder's free space at each scrape; a failed
// read becomes an invalid metric, which promhttp logs and leaves out.
type freeBytes struct {
	desc *prometheus.Desc
	read func() (uint64, error)
}

func (f *freeBytes) Describe(ch chan<- *prometheus.Desc) { ch <- f.desc }

func (f *freeBytes) Collect(ch chan<- prometheus.Metric) {
	n, err := f.read()
	if err != nil {
		ch <- prometheus.NewInvalidMetric(f.desc, err)
		return
	}
	ch <- prometheus.MustNewConstMetric(f.desc, prometheus.GaugeValue, float64(n))
}
