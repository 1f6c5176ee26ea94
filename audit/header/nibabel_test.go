package header

import (
	"bytes"
	"compress/gzip"
	"encoding/binary"
	"encoding/json"
	"io"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"testing"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"
	"github.com/suyashkumar/dicom/pkg/uid"

	"dwiaudit/audit/dwi"
	"dwiaudit/scp/part10"
)

// The Siemens DWI mosaics Debian's python3-nibabel ships with its tests
// (nibabel/nicom/tests/data), read from the installed package, never
// copied into this repository.
const (
	nibabelB0    = "siemens_dwi_0.dcm.gz"
	nibabelB1000 = "siemens_dwi_1000.dcm.gz"
)

// gunzipFile returns the inflated content of a gzipped file.
func gunzipFile(t testing.TB, path string) []byte {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	z, err := gzip.NewReader(f)
	if err != nil {
		t.Fatal(err)
	}
	b, err := io.ReadAll(z)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// testDataSet parses the Part 10 bytes up to the top-level pixel data
// the way the readers do (FindPixelData checks every length, then the
// library parses the region before the pixel data).
func testDataSet(t testing.TB, data []byte) ([]*dicom.Element, binary.ByteOrder, PixelDataLayout) {
	t.Helper()
	meta, off, err := part10.ReadMeta(bytes.NewReader(data))
	if err != nil {
		t.Fatal(err)
	}
	bo, implicit, err := uid.ParseTransferSyntaxUID(meta.TransferSyntaxUID)
	if err != nil {
		t.Fatal(err)
	}
	size := int64(len(data))
	layout, err := FindPixelData(bytes.NewReader(data[off:]), bo, implicit, off, size)
	if err != nil || layout.Tag == 0 {
		t.Fatalf("pixel data: %v %+v", err, layout)
	}
	ds, err := parse(bytes.NewReader(data[:layout.Offset]), layout.Offset)
	if err != nil {
		t.Fatal(err)
	}
	return ds.Elements, bo, layout
}

// floatsOf reads a numeric attribute of the test file.
func floatsOf(t testing.TB, elems []*dicom.Element, tg tag.Tag, n int) []float64 {
	t.Helper()
	e := level(elems).find(tg)
	if e == nil {
		t.Fatalf("%v absent", tg)
	}
	v, err := numbers(e, ValueDS, binary.LittleEndian)
	if err != nil || len(v) != n {
		t.Fatalf("%v: %v %v, want %d values", tg, v, err, n)
	}
	return v
}

// extractSlices runs the extraction (with the built-in maker readers)
// over a mosaic file and checks that it became the given number of
// slices of one mosaic.
func extractSlices(t testing.TB, data []byte, pixels bool, slices int) []dwi.Frame {
	t.Helper()
	frames, err := Extract(data, ExtractOptions{LoadPixels: pixels})
	if err != nil {
		t.Fatal(err)
	}
	if len(frames) != slices {
		t.Fatalf("%d frames, want %d slices", len(frames), slices)
	}
	ids := map[string]bool{}
	for k, f := range frames {
		if f.Tile != k+1 || ids[f.ID()] {
			t.Fatalf("frame %d: tile %d, ID %q (seen before: %v)", k, f.Tile, f.ID(), ids[f.ID()])
		}
		ids[f.ID()] = true
	}
	return frames
}

func near(a, b []float64, tol float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if math.Abs(a[i]-b[i]) > tol {
			return false
		}
	}
	return true
}

// TestReadSiemensNibabelMosaics reads nibabel's two Siemens DWI mosaics
// and checks them against what nibabel's own tests state.
func TestReadSiemensNibabelMosaics(t *testing.T) {
	for _, c := range []struct {
		file string
		b    float64
	}{{nibabelB0, 0}, {nibabelB1000, 1000}} {
		t.Run(c.file+" gives its b-value, mosaic and geometry", func(t *testing.T) {
			data := gunzipFile(t, needNibabelFile(t, c.file))
			elems, bo, _ := testDataSet(t, data)
			d, found, err := ReadSiemens(elems, bo)
			if err != nil || !found {
				t.Fatalf("found %v, %v", found, err)
			}
			// The b-values the files are named for; the same values
			// nibabel's test_csareader.py test_csa_params reads from
			// these acquisitions' CSA headers (csa2_b0.bin: 0,
			// csa2_b1000.bin: 1000).
			if !d.HasBValue || d.BValue != c.b || d.BValueSource != "csa" {
				t.Errorf("b-value %v %v from %q, want %v from the CSA header", d.BValue, d.HasBValue, d.BValueSource, c.b)
			}
			// test_csareader.py test_csa_header_read: 83 image tags
			// (and 65 in the series header) in siemens_dwi_1000;
			// test_csas0: NumberOfImagesInMosaic 48.
			if d.CSA == nil || len(d.CSA.Elements) != 83 || d.CSA.Layout != CSA2 {
				t.Errorf("CSA image header %+v, want 83 tags in the SV10 layout", d.CSA)
			}
			if s, _, err := ReadCSA(elems, true); err != nil || s == nil || len(s.Elements) != 65 {
				t.Errorf("CSA series header: %v, %v; want 65 tags", s, err)
			}
			if d.MosaicImages != 48 {
				t.Errorf("NumberOfImagesInMosaic %d, want 48", d.MosaicImages)
			}
			// test_csa_params: no gradient and no B_matrix for b0; a
			// unit gradient and a 6-value B_matrix for b1000.
			if c.b == 0 && (d.HasGradient || d.HasBMatrix) {
				t.Errorf("b0: gradient %v, b-matrix %v", d.Gradient, d.BMatrix)
			}
			if c.b == 1000 {
				if !d.HasGradient || !d.HasBMatrix {
					t.Fatalf("b1000: gradient %v, b-matrix %v", d.HasGradient, d.HasBMatrix)
				}
				// test_dicomwrappers.py EXPECTED_PARAMS: the gradient
				// direction (0.00507649, 0.99997450, -0.005023611) in
				// nibabel's voxel axes (columns of its rotation matrix:
				// column cosine, row cosine, slice normal; rotation_matrix
				// and SiemensWrapper.slice_normal). The CSA direction is
				// in patient axes; turned into those voxel axes it must
				// agree to the 6 decimals test_q_vector_etc compares
				// with (measured: 1e-8). Read as image axes instead, it
				// would miss by 2.6e-5.
				ori := floatsOf(t, elems, tag.ImageOrientationPatient, 6)
				n := SliceNormal([6]float64(ori), d.SliceNormal, d.HasSliceNormal)
				axes := [3][3]float64{{ori[3], ori[4], ori[5]}, {ori[0], ori[1], ori[2]}, n}
				voxel := func(p [3]float64) []float64 {
					var g []float64
					for _, a := range axes {
						g = append(g, a[0]*p[0]+a[1]*p[1]+a[2]*p[2])
					}
					return g
				}
				if g := voxel(d.Gradient); !near(g, []float64{0.00507649, 0.99997450, -0.005023611}, 1e-6) {
					t.Errorf("gradient %v in voxel axes %v, want nibabel's (0.00507649, 0.99997450, -0.005023611)", d.Gradient, g)
				}
				// The same for every slice extraction makes of the mosaic.
				for k, f := range extractSlices(t, data, false, 48) {
					if g := voxel(f.Gradient); !near(g, []float64{0.00507649, 0.99997450, -0.005023611}, 1e-6) {
						t.Fatalf("slice %d: gradient %v in voxel axes %v, want nibabel's EXPECTED_PARAMS", k, f.Gradient, g)
					}
				}
			}
			// test_dicomwrappers.py EXPECTED_AFFINE (for
			// siemens_dwi_1000; both files are one acquisition):
			// translation (115, 135.028779, -78.710481) and slice
			// column (0, -0.01570896, 2.99995887) in nibabel's DPCS_TO_TAL
			// axes, diag(-1, -1, 1) of the patient axes
			// (dicomreaders.py), with its columns 0 and 1 swapped.
			//
			// Extraction splits the mosaic into its 48 slices of
			// 128x128 (a 7x7 grid of the 896x896 image), each with the
			// b-value, the direction and its own position.
			frames := extractSlices(t, data, false, 48)
			for k, f := range frames {
				if f.Geometry.Rows != 128 || f.Geometry.Columns != 128 || !f.HasBValue || f.BValue != c.b || f.BValueSource != "maker:siemens" {
					t.Fatalf("slice %d: %dx%d, b %v %v from %q", k, f.Geometry.Rows, f.Geometry.Columns, f.BValue, f.HasBValue, f.BValueSource)
				}
				if f.HasGradient != (c.b > 0) || f.HasGradient && !near(f.Gradient[:], d.Gradient[:], 1e-6) {
					t.Fatalf("slice %d: gradient %v %v, want the CSA's %v", k, f.Gradient, f.HasGradient, d.Gradient)
				}
				wantDir := dwi.DirectionalityDirectional
				if c.b == 0 {
					wantDir = dwi.DirectionalityNone // PS3.3 C.8.13.5.9: NONE for b = 0
				}
				if f.Directionality != wantDir {
					t.Fatalf("slice %d: directionality %v, want %v", k, f.Directionality, wantDir)
				}
			}
			pos := func(k int) []float64 { return frames[k].Geometry.Position[:] }
			if !near(pos(0), []float64{-115, -135.028779, -78.710481}, 1e-5) {
				t.Errorf("slice 0 at %v, want (-115, -135.028779, -78.710481)", pos(0))
			}
			for k := 1; k < 48; k++ {
				step := []float64{pos(k)[0] - pos(k - 1)[0], pos(k)[1] - pos(k - 1)[1], pos(k)[2] - pos(k - 1)[2]}
				if !near(step, []float64{0, 0.01570896, 2.99995887}, 1e-5) {
					t.Errorf("slice %d: step %v, want (0, 0.01570896, 2.99995887)", k, step)
				}
			}
		})
	}
}

// nibabelPython is the interpreter with Debian's python3-nibabel.
const nibabelPython = "/usr/bin/python3"

// needNibabelPython fails the test under CI=true and skips it elsewhere
// when the interpreter or nibabel and pydicom are missing, naming the
// Debian packages.
func needNibabelPython(t testing.TB) {
	t.Helper()
	out, err := exec.Command(nibabelPython, "-c", "import nibabel.nicom.dicomwrappers, pydicom, numpy").CombinedOutput()
	if err == nil {
		return
	}
	msg := "the nibabel reference needs " + nibabelPython + " with nibabel, pydicom and numpy: install the Debian packages python3-nibabel, python3-pydicom and python3-numpy (" + err.Error() + ": " + string(out) + ")"
	if os.Getenv("CI") == "true" {
		t.Fatal(msg)
	}
	t.Skip(msg)
}

// nibabelView is what testdata/nibabel_mosaic.py prints per file.
type nibabelView struct {
	CSAType     int          `json:"csa_type"`
	ImageTags   int          `json:"image_tags"`
	SeriesTags  int          `json:"series_tags"`
	BValue      *float64     `json:"b_value"`
	Gradient    []float64    `json:"gradient"`
	BMatrix     []float64    `json:"b_matrix"`
	SliceNormal []float64    `json:"slice_normal"`
	NMosaic     int          `json:"n_mosaic"`
	TileRows    int          `json:"tile_rows"`
	TileCols    int          `json:"tile_cols"`
	Positions   [][3]float64 `json:"positions"`
	SliceSums   []float64    `json:"slice_sums"`
	SliceProbe  []float64    `json:"slice_probe"`
}

func runNibabel(t testing.TB, files ...string) map[string]nibabelView {
	t.Helper()
	cmd := exec.Command(nibabelPython, "-W", "ignore", filepath.Join("testdata", "nibabel_mosaic.py"))
	cmd.Args = append(cmd.Args, files...)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("nibabel_mosaic.py: %v: %s", err, stderr.String())
	}
	var v map[string]nibabelView
	if err := json.Unmarshal(out, &v); err != nil {
		t.Fatalf("nibabel_mosaic.py output: %v", err)
	}
	return v
}

// patterned returns a copy of a 16-bit mosaic file whose pixel values
// are a pattern that differs in every tile (nibabel's test mosaics carry
// zero pixels).
func patterned(t testing.TB, data []byte, layout PixelDataLayout, rows, cols int) []byte {
	t.Helper()
	if layout.Length != int64(rows*cols*2) {
		t.Fatalf("pixel data length %d for %dx%d 16-bit", layout.Length, rows, cols)
	}
	out := bytes.Clone(data)
	for r := range rows {
		for c := range cols {
			v := uint16((r*31 + c*7 + (r/17)*(c/13)) % 4001)
			binary.LittleEndian.PutUint16(out[layout.ValueOffset+int64(2*(r*cols+c)):], v)
		}
	}
	return out
}

// TestMosaicMatchesNibabelWrapper compares the CSA values, the mosaic
// split and the slice positions with nibabel's own reading of the same
// files (csareader and MosaicWrapper, run by testdata/nibabel_mosaic.py):
// the Siemens b0 and b1000 mosaics as shipped, and the b1000 mosaic
// with patterned pixels, tile by tile.
func TestMosaicMatchesNibabelWrapper(t *testing.T) {
	paths := []string{needNibabelFile(t, nibabelB0), needNibabelFile(t, nibabelB1000)}
	needNibabelPython(t)

	raw := gunzipFile(t, paths[1])
	elems, _, layout := testDataSet(t, raw)
	rows := int(floatsOf(t, elems, tag.Rows, 1)[0])
	cols := int(floatsOf(t, elems, tag.Columns, 1)[0])
	pat := patterned(t, raw, layout, rows, cols)
	patPath := filepath.Join(t.TempDir(), "patterned.dcm")
	if err := os.WriteFile(patPath, pat, 0o644); err != nil {
		t.Fatal(err)
	}
	views := runNibabel(t, append(paths, patPath)...)

	for _, p := range append(paths, patPath) {
		t.Run(filepath.Base(p)+" reads as nibabel reads it", func(t *testing.T) {
			want, ok := views[p]
			if !ok {
				t.Fatalf("no nibabel output for %s", p)
			}
			data := pat
			if p != patPath {
				data = gunzipFile(t, p)
			}
			elems, bo, _ := testDataSet(t, data)
			d, _, err := ReadSiemens(elems, bo)
			if err != nil {
				t.Fatal(err)
			}
			series, _, err := ReadCSA(elems, true)
			if err != nil {
				t.Fatal(err)
			}
			if int(d.CSA.Layout) != want.CSAType || len(d.CSA.Elements) != want.ImageTags || len(series.Elements) != want.SeriesTags {
				t.Errorf("CSA type %d with %d/%d tags; nibabel: %d with %d/%d", d.CSA.Layout, len(d.CSA.Elements), len(series.Elements), want.CSAType, want.ImageTags, want.SeriesTags)
			}
			if want.BValue == nil || !d.HasBValue || d.BValue != *want.BValue {
				t.Errorf("b-value %v %v; nibabel get_b_value %v", d.BValue, d.HasBValue, want.BValue)
			}
			if (want.Gradient != nil) != d.HasGradient || d.HasGradient && !near(d.Gradient[:], want.Gradient, 1e-12) {
				t.Errorf("gradient %v %v; nibabel get_g_vector %v", d.Gradient, d.HasGradient, want.Gradient)
			}
			if (want.BMatrix != nil) != d.HasBMatrix || d.HasBMatrix && !near(d.BMatrix[:], want.BMatrix, 1e-12) {
				t.Errorf("b-matrix %v; nibabel %v", d.BMatrix, want.BMatrix)
			}
			if !near(d.SliceNormal[:], want.SliceNormal, 1e-12) {
				t.Errorf("slice normal %v; nibabel %v", d.SliceNormal, want.SliceNormal)
			}
			frames := extractSlices(t, data, true, want.NMosaic)
			for k, f := range frames {
				if f.Geometry.Rows != want.TileRows || f.Geometry.Columns != want.TileCols {
					t.Fatalf("slice %d: %dx%d; nibabel %dx%d", k, f.Geometry.Rows, f.Geometry.Columns, want.TileRows, want.TileCols)
				}
				if !near(f.Geometry.Position[:], want.Positions[k][:], 1e-6) {
					t.Errorf("slice %d at %v; nibabel's affine puts it at %v", k, f.Geometry.Position, want.Positions[k])
				}
				// nibabel's get_data: slice k is data[:, :, k] (rows,
				// columns); its sum and the value at (rows/2,
				// columns/3).
				var sum float64
				for _, v := range f.Pixels {
					sum += float64(v)
				}
				probe := float64(f.Pixels[(want.TileRows/2)*want.TileCols+want.TileCols/3])
				if sum != want.SliceSums[k] || probe != want.SliceProbe[k] {
					t.Errorf("slice %d: sum %v, probe %v; nibabel %v, %v", k, sum, probe, want.SliceSums[k], want.SliceProbe[k])
				}
			}
			if p == patPath && want.SliceSums[0] == 0 {
				t.Error("the patterned mosaic reads as zeros")
			}
		})
	}
}
