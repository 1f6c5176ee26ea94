package audit_test

import (
	"runtime"
	"runtime/metrics"
	"testing"
	"time"

	"dwiaudit/audit"
	"dwiaudit/audit/phantom"
	"dwiaudit/rules"
)

// BenchmarkAuditSeries300 times the audit of one settled series of the
// acceptance target (issue 5: under 1 s): 256x256 images, 60 slices, a
// b0, three directions and the trace at b = 1000, 300 classic files on
// disk, audited with AuditFiles and every shipped rule: header pass,
// pixel read, assembly, analysis, rules. Metrics besides ns/op and the
// allocations: peak-heap-MiB, the largest heap (live objects and
// garbage not yet collected, sampled every millisecond, from a collected
// heap) during one audit (target under 300 MiB), and series/s.
func BenchmarkAuditSeries300(b *testing.B) {
	const rows, slices = 256, 60
	dir := b.TempDir()
	st, err := phantom.Write(dir, phantom.Options{Matrix: rows, Slices: slices, Seed: 1})
	if err != nil {
		b.Fatal(err)
	}
	if n := len(st.Files); n != 300 {
		b.Fatalf("phantom wrote %d files, want 300 (b0, 3 directions and trace x 60 slices)", n)
	}
	st = nil // the phantom's Truth is no part of what is measured

	e := audit.NewEngine(rules.All(), rules.DefaultConfig())
	audit1 := func() *audit.Report {
		rep, err := e.AuditFiles(b.Context(), []string{dir})
		if err != nil {
			b.Fatal(err)
		}
		if len(rep.Series) != 1 || rep.Series[0].CannotCompute != "" {
			b.Fatalf("series %+v, want one computed series", rep.Series)
		}
		return rep
	}
	audit1() // warm the page cache: a settled series was just written

	runtime.GC()
	stop := samplePeakHeap()
	rep := audit1()
	peak := stop()
	runtime.KeepAlive(rep)

	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		audit1()
	}
	b.ReportMetric(float64(b.N)/b.Elapsed().Seconds(), "series/s")
	b.ReportMetric(float64(peak)/(1<<20), "peak-heap-MiB")
	b.ReportMetric(float64(e.Workers), "workers")
}

// samplePeakHeap samples the heap (runtime/metrics
// "/memory/classes/heap/objects:bytes": live objects and garbage not yet
// swept) every millisecond until stop is called, which returns the
// largest value seen.
func samplePeakHeap() (stop func() uint64) {
	const name = "/memory/classes/heap/objects:bytes"
	var peak uint64
	done := make(chan struct{})
	finished := make(chan struct{})
	go func() {
		defer close(finished)
		sample := []metrics.Sample{{Name: name}}
		tick := time.NewTicker(time.Millisecond)
		defer tick.Stop()
		for {
			metrics.Read(sample)
			peak = max(peak, sample[0].Value.Uint64())
			select {
			case <-done:
				return
			case <-tick.C:
			}
		}
	}()
	return func() uint64 {
		close(done)
		<-finished
		return peak
	}
}
