package header

import (
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"testing"

	"dwiaudit/audit/dwi"
)

func TestLocalAssemble(t *testing.T) {
	dir := os.Getenv("REALDIR")
	if dir == "" {
		t.Skip("REALDIR")
	}
	files, _ := filepath.Glob(filepath.Join(dir, "*.dcm"))
	sort.Strings(files)
	var frames []dwi.Frame
	for _, f := range files {
		fr, err := ExtractFile(f, ExtractOptions{})
		if err != nil {
			t.Fatal(f, err)
		}
		frames = append(frames, fr...)
	}
	s, err := dwi.AssembleSeries(frames, dwi.DefaultTolerances())
	if err != nil {
		t.Fatal(err)
	}
	fmt.Printf("frames %d; b-values %v; volumes %d\n", len(frames), s.Facts.BValues, len(s.Volumes))
	for b, d := range s.Facts.Directions {
		fmt.Printf("  b=%v: %d directions\n", b, len(d))
	}
	fmt.Printf("  slices/volume %v\n  duplicates %d, grid %d, nobvalue %d\n", s.Facts.SlicesPerVolume, len(s.Facts.Duplicates), len(s.Grid), len(s.Facts.NoBValue))
}
