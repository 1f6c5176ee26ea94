package header

import (
	"fmt"
	"os"
	"path/filepath"
	"testing"

	"dwiaudit/audit/dwi"
)

// benchSeries is a clinical-size brain DWI: 256 x 256, 60 slices, a b0,
// three orthogonal directions and the scanner trace at b = 1000 (300
// images; common practice for a brain protocol).
func benchSeries() testSeries {
	var images []img
	for s := range 60 {
		images = append(images, img{b: 0, slice: float64(s)})
		for _, d := range [][3]float64{{1, 0, 0}, {0, 1, 0}, {0, 0, 1}} {
			images = append(images, img{b: 1000, dir: d, slice: float64(s)})
		}
		images = append(images, img{b: 1000, iso: true, slice: float64(s)})
	}
	s := newSeries("bench", images...)
	s.rows, s.cols, s.spacing = 256, 256, 0.9
	return s
}

// writeBenchFiles writes the classic files of s into a temporary folder.
func writeBenchFiles(b *testing.B, s testSeries) []string {
	b.Helper()
	dir := b.TempDir()
	var paths []string
	for i, data := range s.classic(b, tsExplicitLE) {
		p := filepath.Join(dir, fmt.Sprintf("MR%04d.dcm", i+1))
		if err := os.WriteFile(p, data, 0o644); err != nil {
			b.Fatal(err)
		}
		paths = append(paths, p)
	}
	return paths
}

// BenchmarkExtractFile reads one 256 x 256 classic image, pixels
// included.
func BenchmarkExtractFile(b *testing.B) {
	s := benchSeries()
	s.images = s.images[1:2]
	path := writeBenchFiles(b, s)[0]
	opt := ExtractOptions{LoadPixels: true}
	b.ReportAllocs()
	for b.Loop() {
		if _, err := ExtractFile(path, opt); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkAssemble groups the 300 extracted frames of benchSeries into
// volumes (assembly alone, frames in memory).
func BenchmarkAssemble(b *testing.B) {
	s := benchSeries()
	var frames []dwi.Frame
	for _, p := range writeBenchFiles(b, s) {
		fs, err := ExtractFile(p, ExtractOptions{LoadPixels: true})
		if err != nil {
			b.Fatal(err)
		}
		frames = append(frames, fs...)
	}
	tol := dwi.DefaultTolerances()
	b.ReportAllocs()
	for b.Loop() {
		series, err := dwi.AssembleSeries(frames, tol)
		if err != nil {
			b.Fatal(err)
		}
		if len(series.Volumes) != 5 {
			b.Fatalf("%d volumes", len(series.Volumes))
		}
	}
}

// BenchmarkExtractAndAssembleSeries is the whole of this package's share
// of auditing benchSeries: read its 300 files from disk, pixels included,
// and assemble them. The ADC step (audit/adc) comes on top.
func BenchmarkExtractAndAssembleSeries(b *testing.B) {
	paths := writeBenchFiles(b, benchSeries())
	opt, tol := ExtractOptions{LoadPixels: true}, dwi.DefaultTolerances()
	b.ReportAllocs()
	for b.Loop() {
		frames := make([]dwi.Frame, 0, len(paths))
		for _, p := range paths {
			fs, err := ExtractFile(p, opt)
			if err != nil {
				b.Fatal(err)
			}
			frames = append(frames, fs...)
		}
		if _, err := dwi.AssembleSeries(frames, tol); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkExtractEnhancedSeries reads benchSeries as one Enhanced MR
// file of 300 frames and assembles it.
func BenchmarkExtractEnhancedSeries(b *testing.B) {
	data := benchSeries().enhanced(b, tsExplicitLE)
	path := filepath.Join(b.TempDir(), "enhanced.dcm")
	if err := os.WriteFile(path, data, 0o644); err != nil {
		b.Fatal(err)
	}
	opt, tol := ExtractOptions{LoadPixels: true}, dwi.DefaultTolerances()
	b.ReportAllocs()
	for b.Loop() {
		frames, err := ExtractFile(path, opt)
		if err != nil {
			b.Fatal(err)
		}
		if _, err := dwi.AssembleSeries(frames, tol); err != nil {
			b.Fatal(err)
		}
	}
}
