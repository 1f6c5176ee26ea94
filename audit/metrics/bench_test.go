package metrics_test

import (
	"fmt"
	"io"
	"net/http"
	"net/http/httptest"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus/collectors"

	"dwiaudit/audit/metrics"
)

// BenchmarkScrape50Scanners scrapes /metrics over a real HTTP server
// with 50 configured scanners, each with 4 protocols and 2 phantoms of
// drift gauges, findings of every rule at every severity, and the Go and
// process collectors the node adds. Target: under 50 ms per scrape.
func BenchmarkScrape50Scanners(b *testing.B) {
	const nScanners = 50
	protocols := []string{"brain-dwi", "brain-dwi-3t", "prostate-dwi", "spine-dwi"}
	phantoms := []string{"ice-water", "ice-water-large"}
	severities := []string{"info", "warning", "error"}
	var scanners []string
	for i := range nScanners {
		scanners = append(scanners, fmt.Sprintf("qoh-mr%02d", i))
	}
	m := metrics.New(metrics.Options{
		Version: "v1.2.3", GoVersion: "go1.26.8",
		Labels:    metrics.NewLabels(scanners, protocols, phantoms, testRules),
		DiskFloor: 2 << 30, FreeBytes: func() (uint64, error) { return 1 << 40, nil }, QueuedStudies: func() int { return 3 },
	})
	m.Registry().MustRegister(collectors.NewGoCollector(), collectors.NewProcessCollector(collectors.ProcessCollectorOpts{}))
	at := time.Date(2025, 3, 14, 9, 0, 0, 0, time.UTC)
	for _, sc := range scanners {
		m.InstanceStored(sc, 1<<17, 2*time.Millisecond)
		var fs []finding
		for _, r := range testRules {
			for _, sev := range severities {
				fs = append(fs, finding{Rule: r, Severity: sev})
			}
		}
		for _, p := range protocols {
			audited(m, record(b, sc, at, false, &measures{Protocol: p, TissueADCMedian: num(0.0008), CSFADC: num(0.003), B0SNR: num(40)}, fs...))
		}
		for _, p := range phantoms {
			audited(m, record(b, sc, at, false, &measures{Protocol: p, PhantomADC: num(0.00111), PhantomExpectedADC: num(0.0011)}))
		}
	}
	samples, err := m.Registry().Gather()
	if err != nil {
		b.Fatal(err)
	}
	n := 0
	for _, mf := range samples {
		n += len(mf.Metric)
	}
	srv := httptest.NewServer(m.Handler())
	defer srv.Close()
	var size int64
	b.ResetTimer()
	for b.Loop() {
		res, err := http.Get(srv.URL)
		if err != nil {
			b.Fatal(err)
		}
		size, err = io.Copy(io.Discard, res.Body)
		res.Body.Close()
		if err != nil || res.StatusCode != http.StatusOK {
			b.Fatalf("scrape: %d %v", res.StatusCode, err)
		}
	}
	b.ReportMetric(float64(n), "series")
	b.ReportMetric(float64(size), "bytes/scrape")
}
