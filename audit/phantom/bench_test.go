package phantom

import (
	"fmt"
	"path/filepath"
	"testing"
)

// BenchmarkWriteClean writes the default clean study (128x128x20: b0,
// three directions and trace, 100 images), classic and multi-frame.
func BenchmarkWriteClean(b *testing.B) {
	for _, multi := range []bool{false, true} {
		b.Run(mode(multi), func(b *testing.B) {
			root := b.TempDir()
			images := 0
			for i := 0; b.Loop(); i++ {
				st, err := Write(filepath.Join(root, fmt.Sprint(i)), Options{MultiFrame: multi, Seed: int64(i)})
				if err != nil {
					b.Fatal(err)
				}
				images = 0
				for _, s := range st.Series {
					images += s.Images
				}
			}
			b.ReportMetric(float64(images)*float64(b.N)/b.Elapsed().Seconds(), "images/s")
		})
	}
}
