package header

import (
	"fmt"
	"math"
	"os/exec"
	"path/filepath"
	"testing"

	"dwiaudit/audit/phantom"
	"dwiaudit/scp/scptest"
)

// TestCompressedPhantomLoadsTheNativePixels re-encodes phantom files
// (classic and multi-frame) with each DCMTK encoder and checks that
// ExtractFile gives the same pixels as from the native file: exactly for
// the lossless syntaxes (PS3.5 8.2), within NEAR for JPEG-LS
// near-lossless (ITU T.87 A.4.4), and for lossy JPEG exactly what it gives
// from DCMTK dcmdjpeg's decode of the same file.
func TestCompressedPhantomLoadsTheNativePixels(t *testing.T) {
	dir := t.TempDir()
	var files []string
	for _, multi := range []bool{false, true} {
		st, err := phantom.Write(filepath.Join(dir, fmt.Sprint(multi)), phantom.Options{Matrix: 48, Slices: 3, Seed: 4, MultiFrame: multi})
		if err != nil {
			t.Fatal(err)
		}
		files = append(files, st.Files[0], st.Files[len(st.Files)-1])
	}
	tests := []struct {
		tool    string
		args    []string
		near    float32 // 0: identical
		decoder string  // lossy: compare with this DCMTK decoder's output instead of the native file
	}{
		{tool: "dcmcrle"},
		{tool: "dcmcjpeg", args: []string{"+e1"}},
		{tool: "dcmcjpeg", args: []string{"+el", "+sv", "6"}},
		{tool: "dcmcjpls", args: []string{"+el"}},
		{tool: "dcmcjpls", args: []string{"+en", "+md", "3"}, near: 3},
		{tool: "dcmcjpeg", args: []string{"+ee"}, decoder: "dcmdjpeg"},
	}
	opt := ExtractOptions{LoadPixels: true}
	for i, tc := range tests {
		for j, src := range files {
			rel, _ := filepath.Rel(dir, src)
			t.Run(fmt.Sprintf("%s %v of %s", tc.tool, tc.args, rel), func(t *testing.T) {
				enc := filepath.Join(dir, fmt.Sprintf("enc-%d-%d.dcm", i, j))
				run(t, tc.tool, append(append([]string{}, tc.args...), src, enc)...)
				ref := src
				if tc.decoder != "" {
					ref = filepath.Join(dir, fmt.Sprintf("dec-%d-%d.dcm", i, j))
					run(t, tc.decoder, enc, ref)
				}
				want, err := ExtractFile(ref, opt)
				if err != nil {
					t.Fatal(err)
				}
				got, err := ExtractFile(enc, opt)
				if err != nil {
					t.Fatal(err)
				}
				if len(got) != len(want) {
					t.Fatalf("%d frames, want %d", len(got), len(want))
				}
				for k := range got {
					g, w := got[k], want[k]
					if g.Encapsulated || g.Pixels == nil || len(g.Pixels) != len(w.Pixels) {
						t.Fatalf("frame %d: encapsulated %v, %d pixels, want %d", k+1, g.Encapsulated, len(g.Pixels), len(w.Pixels))
					}
					worst := float32(0)
					for p := range g.Pixels {
						worst = max(worst, float32(math.Abs(float64(g.Pixels[p]-w.Pixels[p]))))
					}
					// Rescale slope 1 in the phantom: pixel units are stored units.
					if worst > tc.near {
						t.Errorf("frame %d: pixels differ by up to %g, allowed %g", k+1, worst, tc.near)
					}
				}
			})
		}
	}
}

func run(t *testing.T, tool string, args ...string) {
	t.Helper()
	path := scptest.NeedDCMTK(t, tool)
	if out, err := exec.Command(path, args...).CombinedOutput(); err != nil {
		t.Fatalf("%s %v: %v\n%s", tool, args, err, out)
	}
}
