package phantom

import (
	"dwiaudit/internal/testtool"

	"bufio"
	"bytes"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"
)

// layoutCases are the cases every maker's layout is checked on: the
// clean study, one with the scanner's ADC map (a derived series), one
// with the b0 in a series of its own, shifted half a slice, and one whose
// high b-value is 800, not 1000.
func layoutCases() []Case {
	return []Case{CaseClean, CaseScannerADCCorrect, CaseSlicePositions, CaseBValueSetDiffers}
}

// makerLayouts is Layouts without standard and enhanced.
func makerLayouts() []Layout {
	var out []Layout
	for _, l := range Layouts() {
		if l.maker() {
			out = append(out, l)
		}
	}
	return out
}

// writeLayouts writes layoutCases in the standard layout and in every
// maker's layout under root/<layout>/<case>, the layout read_layout.py
// expects.
func writeLayouts(t *testing.T, root string) map[Layout]map[Case]*Study {
	t.Helper()
	out := map[Layout]map[Case]*Study{}
	for _, l := range append([]Layout{LayoutStandard}, makerLayouts()...) {
		out[l] = map[Case]*Study{}
		for _, c := range layoutCases() {
			st, err := Write(filepath.Join(root, string(l), string(c)), Options{Case: c, Layout: l, Matrix: testMatrix, Slices: testSlices, Seed: 7})
			if err != nil {
				t.Fatalf("%s %s: %v", l, c, err)
			}
			out[l][c] = st
		}
	}
	return out
}

func TestPhantomLayoutsAreListed(t *testing.T) {
	t.Run("standard comes first, then enhanced and the five makers", func(t *testing.T) {
		want := []Layout{LayoutStandard, LayoutEnhanced, LayoutSiemensMosaic, LayoutGE, LayoutPhilips, LayoutCanon, LayoutUIH}
		if !slices.Equal(Layouts(), want) {
			t.Fatalf("Layouts() = %v, want %v", Layouts(), want)
		}
	})
	t.Run("every layout has a description and an unknown one has none", func(t *testing.T) {
		for _, l := range Layouts() {
			if !l.Valid() || l.Description() == "" {
				t.Errorf("%s: valid %t, description %q", l, l.Valid(), l.Description())
			}
		}
		if Layout("nope").Valid() || Layout("nope").Description() != "" {
			t.Fatal("Layout(nope) is valid")
		}
	})
}

func TestPhantomLayoutOptionsAreChecked(t *testing.T) {
	t.Run("an unknown layout is refused", func(t *testing.T) {
		if _, err := Write(t.TempDir(), Options{Layout: "siemens"}); !errors.Is(err, ErrUnknownLayout) {
			t.Fatalf("Write: %v, want ErrUnknownLayout", err)
		}
	})
	for _, c := range []struct {
		name string
		opt  Options
		want string
	}{
		{"a maker's layout with MultiFrame", Options{Layout: LayoutGE, MultiFrame: true}, "MultiFrame with layout ge"},
		{"missing slices in a mosaic", Options{Layout: LayoutSiemensMosaic, Case: CaseMissingSlices}, "cannot be written as layout siemens-mosaic"},
	} {
		t.Run(c.name+" is refused", func(t *testing.T) {
			_, err := Write(t.TempDir(), c.opt)
			if !errors.Is(err, ErrInvalidOptions) || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("Write: %v, want ErrInvalidOptions mentioning %q", err, c.want)
			}
		})
	}
}

// sameBytes fails unless a and b wrote the same files with the same
// bytes.
func sameBytes(t *testing.T, a, b *Study) {
	t.Helper()
	if len(a.Files) != len(b.Files) || len(a.Files) == 0 {
		t.Fatalf("%d and %d files", len(a.Files), len(b.Files))
	}
	for i := range a.Files {
		x, err1 := os.ReadFile(a.Files[i])
		y, err2 := os.ReadFile(b.Files[i])
		if err1 != nil || err2 != nil || !bytes.Equal(x, y) {
			t.Fatalf("%s and %s differ (%v, %v)", a.Files[i], b.Files[i], err1, err2)
		}
	}
}

func TestPhantomStandardAndEnhancedLayoutsAreUnchanged(t *testing.T) {
	o := Options{Case: CaseScannerADCCorrect, Matrix: 32, Slices: 3, Seed: 11}
	t.Run("layout standard writes what the zero Layout writes", func(t *testing.T) {
		s := o
		s.Layout = LayoutStandard
		sameBytes(t, write(t, o), write(t, s))
	})
	t.Run("layout enhanced writes what MultiFrame writes", func(t *testing.T) {
		m, e := o, o
		m.MultiFrame = true
		e.Layout = LayoutEnhanced
		sameBytes(t, write(t, m), write(t, e))
	})
	t.Run("a maker's layout gets its own UIDs", func(t *testing.T) {
		g := o
		g.Layout = LayoutGE
		if write(t, g).StudyUID == write(t, o).StudyUID {
			t.Fatal("the ge layout has the standard layout's Study Instance UID")
		}
	})
	t.Run("a maker's layout writes the same bytes for the same options", func(t *testing.T) {
		p := o
		p.Layout = LayoutSiemensMosaic
		sameBytes(t, write(t, p), write(t, p))
	})
}

// layoutRecord is one line of testdata/read_layout.py: one image, or one
// slice of a mosaic.
type layoutRecord struct {
	path, b, dir, pos, sum, note string
}

// series is the series folder of the record (series02-dwi, ...).
func (r layoutRecord) series() string { return strings.Split(filepath.ToSlash(r.path), "/")[2] }

// key is what must agree between layouts: series, b-value, direction,
// position and pixels.
func (r layoutRecord) key() string {
	return strings.Join([]string{r.series(), r.b, r.dir, r.pos, r.sum}, " ")
}

// readLayouts runs testdata/read_layout.py over root and groups its
// records by layout and case.
func readLayouts(t *testing.T, root string) map[Layout]map[Case][]layoutRecord {
	t.Helper()
	py := testtool.Python(t, "pydicom", "numpy", "nibabel")
	cmd := exec.Command(py, "testdata/read_layout.py", root)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("read_layout.py: %v\n%s", err, stderr.String())
	}
	recs := map[Layout]map[Case][]layoutRecord{}
	sc := bufio.NewScanner(bytes.NewReader(out))
	first := true
	for sc.Scan() {
		if first {
			// pydicom 2.3.1 and nibabel 5.0.0 on Debian bookworm.
			t.Logf("reference readers: %s", sc.Text())
			first = false
			continue
		}
		f := strings.Split(sc.Text(), "\t")
		if len(f) != 6 {
			t.Fatalf("read_layout.py line %q", sc.Text())
		}
		r := layoutRecord{f[0], f[1], f[2], f[3], f[4], f[5]}
		parts := strings.Split(filepath.ToSlash(r.path), "/")
		l, c := Layout(parts[0]), Case(parts[1])
		if recs[l] == nil {
			recs[l] = map[Case][]layoutRecord{}
		}
		recs[l][c] = append(recs[l][c], r)
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return recs
}

// isoDirection is a direction of read_layout.py ("x,y,z") as numbers.
func isoDirection(t *testing.T, s string) [3]float64 {
	t.Helper()
	var v [3]float64
	f := strings.Split(s, ",")
	if len(f) != 3 {
		t.Fatalf("direction %q", s)
	}
	for i := range v {
		x, err := strconv.ParseFloat(f[i], 64)
		if err != nil {
			t.Fatalf("direction %q: %v", s, err)
		}
		v[i] = x
	}
	return v
}

// dciodvfyLayoutWarnings are the warnings dciodvfy (dicom3tools
// 1.00~20220618) gives on the makers' layouts beyond classicWarnings,
// each expected: its private dictionary knows the Siemens, GE and Philips
// elements written (it warns about none of them, so their VRs agree with
// it), but not the UIH MR block, whose elements it reads with the
// explicit VR we give.
func dciodvfyLayoutWarnings(path, warning string) bool {
	if strings.Contains(warning, "Unrecognized tag - assuming explicit value representation OK") {
		return strings.Contains(filepath.ToSlash(path), "/"+string(LayoutUIH)+"/") && strings.Contains(warning, `(0065,`) &&
			strings.Contains(warning, `"`+uihCreator+`"`)
	}
	return slices.ContainsFunc(classicWarnings(), func(w string) bool { return strings.Contains(warning, w) })
}

func TestPhantomLayouts(t *testing.T) {
	root := t.TempDir()
	studies := writeLayouts(t, root)

	t.Run("dciodvfy finds no error in any layout's file", func(t *testing.T) {
		var files []string
		for _, l := range makerLayouts() {
			for _, c := range layoutCases() {
				files = append(files, studies[l][c].Files...)
			}
			// And in Implicit VR Little Endian, where the private
			// elements travel without their VR (PS3.5 7.1.3).
			st, err := Write(filepath.Join(t.TempDir(), string(l)), Options{Case: CaseScannerADCCorrect, Layout: l, Matrix: 16, Slices: 3, Seed: 7, TransferSyntax: ImplicitVRLittleEndian})
			if err != nil {
				t.Fatal(err)
			}
			files = append(files, st.Files...)
		}
		dciodvfyFiles(t, files, dciodvfyLayoutWarnings)
	})

	t.Run("pydicom and nibabel read every layout as the standard layout's images", func(t *testing.T) {
		recs := readLayouts(t, root)
		for _, l := range makerLayouts() {
			for _, c := range layoutCases() {
				want := recs[LayoutStandard][c]
				got := recs[l][c]
				if len(want) == 0 {
					t.Fatalf("no standard %s images read", c)
				}
				keys := func(rs []layoutRecord, canonB0 bool) []string {
					var out []string
					for _, r := range rs {
						if canonB0 && r.b == "0" {
							// The Canon layout's b0 images carry no b-value
							// (dcm2niix's Canon notes).
							r.b = "-"
						}
						out = append(out, r.key())
					}
					slices.Sort(out)
					return out
				}
				// Same slices, positions, pixels, b-values and directions
				// in every series: the layouts differ only in encoding.
				if w, g := keys(want, l == LayoutCanon), keys(got, false); !slices.Equal(w, g) {
					t.Errorf("%s %s: %d images read, the standard layout %d; first differences:\n%s", l, c, len(g), len(w), firstDiff(w, g))
				}
			}
		}
	})

	t.Run("each layout's own conventions read back", func(t *testing.T) {
		recs := readLayouts(t, root)
		for _, c := range layoutCases() {
			for _, r := range recs[LayoutSiemensMosaic][c] {
				// nibabel's MosaicWrapper: n slices from the CSA header,
				// image_shape (rows, cols, n).
				if !strings.HasPrefix(r.note, fmt.Sprintf("n=%d;shape=%dx%dx%d;q=", testSlices, testMatrix, testMatrix, testSlices)) {
					t.Errorf("%s: nibabel saw %s", r.path, r.note)
				}
				q := r.note[strings.Index(r.note, "q=")+2:]
				if r.dir == "-" {
					if q != "-" {
						t.Errorf("%s: no gradient but a B-matrix vector %s", r.path, q)
					}
					continue
				}
				// nibabel's b_vector comes from B_matrix rotated into voxel
				// axes (rows, columns, slices): its first axis runs down
				// the columns (patient y), its second along the rows (x)
				// (nibabel's dicom_orientation note). So it is the gradient
				// with x and y swapped, up to sign, and its length is b.
				g := isoDirection(t, r.dir)
				parts := strings.SplitN(q, ";bq=", 2)
				v := isoDirection(t, parts[0])
				same := func(s float64) bool {
					for i, j := range []int{1, 0, 2} {
						if d := v[i] - s*g[j]; d > 1e-3 || d < -1e-3 {
							return false
						}
					}
					return true
				}
				if !same(1) && !same(-1) || len(parts) != 2 || parts[1] != r.b {
					t.Errorf("%s: gradient %s b %s, nibabel's B-matrix vector %s", r.path, r.dir, r.b, q)
				}
			}
			for _, r := range recs[LayoutPhilips][c] {
				want := "-"
				switch {
				case r.b == "-":
				case r.b == "0" || r.dir == "-":
					want = "I" // the b0, or the scanner's isotropic (trace) image
				default:
					// Measurement (rows, x), phase (columns, y), slice (z).
					want = map[string]string{"1.0000,0.0000,0.0000": "M", "0.0000,1.0000,0.0000": "P", "0.0000,0.0000,1.0000": "S"}[r.dir]
				}
				if r.note != want {
					t.Errorf("%s: b %s direction %s labelled %q, want %q", r.path, r.b, r.dir, r.note, want)
				}
			}
			for _, r := range recs[LayoutCanon][c] {
				want := "-"
				switch {
				case r.dir != "-":
					g := isoDirection(t, r.dir)
					want = fmt.Sprintf("b=%s(%.3f,%.3f,%.3f)", r.b, g[0], g[1], g[2])
				case r.b == "-" && strings.Contains(r.path, "-dwi/") || strings.Contains(r.path, "-b0/"):
					want = "b=0(0.000,0.000,0.000)" // a b0: no b-value, only the text
				}
				// NA-MIC wiki, private vendor Canon: "(0020,4000) LT
				// [b=1500(0.445,0.000,0.895)]".
				if r.note != want {
					t.Errorf("%s: Image Comments %q, want %q", r.path, r.note, want)
				}
			}
		}
	})
}

// firstDiff lists up to five keys found in only one of want and got.
func firstDiff(want, got []string) string {
	var b strings.Builder
	n := 0
	for _, w := range want {
		if !slices.Contains(got, w) && n < 5 {
			fmt.Fprintf(&b, "  only standard: %s\n", w)
			n++
		}
	}
	for _, g := range got {
		if !slices.Contains(want, g) && n < 10 {
			fmt.Fprintf(&b, "  only layout:   %s\n", g)
			n++
		}
	}
	return b.String()
}
