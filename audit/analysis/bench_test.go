package analysis

import (
	"runtime"
	"runtime/metrics"
	"testing"
	"time"

	"dwiaudit/audit/dwi"
	"dwiaudit/audit/phantom"
)

// BenchmarkAnalyze256x256x60 times the computation on the series of the
// acceptance target: 256×256 images, 60 slices, a b0 plus three
// directions and the trace at b = 1000, 300 images (issue 4: under 1 s
// and under 300 MiB). Three scopes:
//
//   - analyze: Analyze alone, on a series built in memory as assembly
//     leaves it;
//   - assemble+analyze: dwi.AssembleSeries of the 300 frames already read
//     from a phantom study, then Analyze;
//   - read+assemble+analyze: header.ExtractFile of the 300 files, assembly
//     and Analyze.
//
// Metrics: ADC-voxels/s (voxels of the ADC map per second of the scope),
// alloc-MiB/op (everything allocated in one run, garbage included),
// peak-heap-MiB (the largest heap, live objects and uncollected garbage,
// sampled every millisecond during one run started from a collected
// heap, input included: what the 300 MiB target is about), live-MiB
// (the heap still held after that run and a GC while its result is in
// use: the frames' pixels and the maps) and input-MiB (the float32
// pixels of the 300 images).
func BenchmarkAnalyze256x256x60(b *testing.B) {
	const rows, cols, slices = 256, 256, 60
	voxels := rows * cols * slices
	cfg := DefaultAnalyzeConfig()

	b.Run("analyze", func(b *testing.B) {
		h := headSpec{rows: rows, cols: cols, slices: slices, sigma: 10, seed: 1}
		s := memSeries(h.rows, h.cols, h.slices, h.volumes()...)
		benchScope(b, voxels, func() any {
			res, err := Analyze(s, cfg)
			if err != nil || res.CannotCompute != "" {
				b.Fatalf("Analyze: %v, cannot compute %q", err, res.CannotCompute)
			}
			return res
		})
	})

	st, err := phantom.Write(b.TempDir(), phantom.Options{Matrix: rows, Slices: slices, Seed: 1})
	if err != nil {
		b.Fatal(err)
	}
	// Keep the paths only: the phantom's Truth (about 95 MiB) is no part
	// of what is measured.
	files := st.Files
	st = nil
	if len(files) != 300 {
		b.Fatalf("phantom wrote %d files, want 300 (b0, 3 directions and trace × 60 slices)", len(files))
	}

	b.Run("assemble+analyze", func(b *testing.B) {
		frames := readFrames(b, files)
		benchScope(b, voxels, func() any {
			s, err := dwi.AssembleSeries(frames, dwi.DefaultTolerances())
			if err != nil {
				b.Fatalf("AssembleSeries: %v", err)
			}
			res, err := Analyze(s, cfg)
			if err != nil || res.CannotCompute != "" {
				b.Fatalf("Analyze: %v, cannot compute %q", err, res.CannotCompute)
			}
			return res
		})
	})

	b.Run("read+assemble+analyze", func(b *testing.B) {
		benchScope(b, voxels, func() any {
			s, err := dwi.AssembleSeries(readFrames(b, files), dwi.DefaultTolerances())
			if err != nil {
				b.Fatalf("AssembleSeries: %v", err)
			}
			res, err := Analyze(s, cfg)
			if err != nil || res.CannotCompute != "" {
				b.Fatalf("Analyze: %v, cannot compute %q", err, res.CannotCompute)
			}
			return res
		})
	})
}

// benchScope runs op b.N times and reports the metrics of
// BenchmarkAnalyze256x256x60.
func benchScope(b *testing.B, voxels int, op func() any) {
	b.Helper()
	runtime.GC()
	var before, after runtime.MemStats
	runtime.ReadMemStats(&before)
	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		op()
	}
	b.StopTimer()
	runtime.ReadMemStats(&after)

	// One more run from a collected heap, for the peak and what stays.
	runtime.GC()
	stop := samplePeakHeap()
	kept := op()
	peak := stop()
	runtime.GC()
	var live runtime.MemStats
	runtime.ReadMemStats(&live)
	runtime.KeepAlive(kept)

	b.ReportMetric(float64(voxels)*float64(b.N)/b.Elapsed().Seconds(), "ADC-voxels/s")
	b.ReportMetric(float64(after.TotalAlloc-before.TotalAlloc)/float64(b.N)/(1<<20), "alloc-MiB/op")
	b.ReportMetric(float64(peak)/(1<<20), "peak-heap-MiB")
	b.ReportMetric(float64(live.HeapAlloc)/(1<<20), "live-MiB")
	b.ReportMetric(float64(5*voxels*4)/(1<<20), "input-MiB")
}

// samplePeakHeap samples the heap (live objects and not yet collected
// garbage, runtime/metrics "/memory/classes/heap/objects:bytes") every
// millisecond until stop is called, which returns the largest value.
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
