package phantom

import (
	"bufio"
	"bytes"
	"crypto/sha256"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"sync"
	"testing"

	"dwiaudit/internal/testtool"
)

// Small studies keep the tests fast: 64x64 pixels, 6 slices.
const (
	testMatrix = 64
	testSlices = 6
)

func ftoa(f float64) string { return strconv.FormatFloat(f, 'g', -1, 64) }

func newTestRand(seed uint64) *rand.Rand { return rand.New(rand.NewPCG(seed, 0)) }

func mode(multiFrame bool) string {
	if multiFrame {
		return "multi-frame"
	}
	return "classic"
}

func write(t testing.TB, o Options) *Study {
	t.Helper()
	if o.Matrix == 0 {
		o.Matrix = testMatrix
	}
	if o.Slices == 0 {
		o.Slices = testSlices
	}
	st, err := Write(filepath.Join(t.TempDir(), "study"), o)
	if err != nil {
		t.Fatal(err)
	}
	return st
}

func TestPhantomCases(t *testing.T) {
	cases := Cases()
	t.Run("there are fifteen cases, clean first", func(t *testing.T) {
		if len(cases) != 15 || cases[0] != CaseClean {
			t.Fatalf("Cases() = %v", cases)
		}
	})
	t.Run("every case has a kebab-case name and a description", func(t *testing.T) {
		seen := map[Case]bool{}
		for _, c := range cases {
			if seen[c] || strings.Trim(string(c), "abcdefghijklmnopqrstuvwxyz0123456789-") != "" || !c.Valid() || c.Description() == "" {
				t.Errorf("case %q: duplicate, not kebab-case, or without description", c)
			}
			seen[c] = true
		}
	})
	t.Run("an unknown case is refused", func(t *testing.T) {
		if Case("nope").Valid() {
			t.Fatal("Case(nope) is valid")
		}
		if _, err := Write(t.TempDir(), Options{Case: "nope"}); !errors.Is(err, ErrUnknownCase) {
			t.Fatalf("Write: %v, want ErrUnknownCase", err)
		}
	})
}

func TestPhantomOptionsAreChecked(t *testing.T) {
	cases := []struct {
		name string
		opt  Options
		want []string // substrings of the error, one per field at fault
	}{
		{"a tiny matrix and too many slices are both reported", Options{Matrix: 8, Slices: 1000}, []string{"Matrix 8", "Slices 1000"}},
		{"a negative SNR", Options{SNR: -1}, []string{"SNR -1"}},
		{"b-values out of order", Options{BValues: []float64{1000, 0}}, []string{"ascend"}},
		{"a negative b-value", Options{BValues: []float64{-5, 1000}}, []string{"BValues[0]"}},
		{"four directions", Options{Directions: 4}, []string{"Directions 4"}},
		{"a transfer syntax we do not write", Options{TransferSyntax: "1.2.840.10008.1.2.4.50"}, []string{"TransferSyntax"}},
		{"a station name longer than SH allows", Options{Scanner: ScannerProfile{Station: "A-VERY-LONG-STATION-NAME", Manufacturer: "m", Model: "m", DeviceSerial: "s", SoftwareVersions: "v", FieldStrength: 3}}, []string{"Scanner.Station"}},
		{"no-b0 with a single b-value", Options{Case: CaseNoB0, BValues: []float64{1000}}, []string{"at least two"}},
		{"a b0 artifact without a b0", Options{Case: CaseB0ArtifactDropout, BValues: []float64{50, 1000}}, []string{"b = 0"}},
		{"an artifact strength on a case without a b0 artifact", Options{Case: CaseClean, B0ArtifactK: 1.2}, []string{"B0ArtifactK 1.2 applies only"}},
		{"aliasing that would remove signal", Options{Case: CaseB0ArtifactAliasing, B0ArtifactK: 0.9}, []string{"B0ArtifactK 0.9"}},
		{"aliasing strong enough to clip the stored bits", Options{Case: CaseB0ArtifactAliasing, B0ArtifactK: 7}, []string{"B0ArtifactK 7"}},
		{"a b-value scale outside 0.5..1.5", Options{AppliedBScale: 2}, []string{"AppliedBScale 2"}},
		{"dropout that would add signal", Options{Case: CaseB0ArtifactDropout, B0ArtifactK: 1.1}, []string{"B0ArtifactK 1.1"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := Write(t.TempDir(), c.opt)
			if !errors.Is(err, ErrInvalidOptions) {
				t.Fatalf("Write: %v, want ErrInvalidOptions", err)
			}
			for _, w := range c.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q does not mention %q", err, w)
				}
			}
		})
	}
	t.Run("a folder that already holds files is refused", func(t *testing.T) {
		dir := t.TempDir()
		if err := os.WriteFile(filepath.Join(dir, "x"), nil, 0o644); err != nil {
			t.Fatal(err)
		}
		if _, err := Write(dir, Options{Matrix: 16, Slices: 1}); !errors.Is(err, ErrOutputNotEmpty) {
			t.Fatalf("Write: %v, want ErrOutputNotEmpty", err)
		}
	})
}

// writtenStudy is one case written in one mode, for the validation tests.
type writtenStudy struct {
	c     Case
	multi bool
	st    *Study
}

// writeEveryCase writes every case, classic and multi-frame, under root.
func writeEveryCase(t *testing.T, root string) []writtenStudy {
	t.Helper()
	var out []writtenStudy
	for _, c := range Cases() {
		for _, multi := range []bool{false, true} {
			st, err := Write(filepath.Join(root, fmt.Sprintf("%s-%s", c, mode(multi))),
				Options{Case: c, Matrix: testMatrix, Slices: testSlices, MultiFrame: multi, Seed: 7})
			if err != nil {
				t.Fatalf("%s %s: %v", c, mode(multi), err)
			}
			out = append(out, writtenStudy{c, multi, st})
		}
	}
	return out
}

// Warnings dciodvfy (dicom3tools 1.00~20220618) gives on our classic MR
// images, all expected: the MR Image IOD (PS3.3 A.4) has no diffusion
// attributes, so carrying the MR Diffusion Macro's at top level (as
// scanners do, docs/references.md#diffusion-attributes) makes the instance a Standard Extended SOP
// Class (PS3.4 B.1.3), and DIFFUSION is not among the classic Image Type
// value 3 defined terms. Enhanced MR files get none.
func classicWarnings() []string {
	return []string{
		"</DiffusionBValue(0018,9087)> - Attribute is not present in standard DICOM IOD",
		"</DiffusionDirectionality(0018,9075)> - Attribute is not present in standard DICOM IOD",
		"</DiffusionGradientDirectionSequence(0018,9076)> - Attribute is not present in standard DICOM IOD",
		"</DiffusionGradientDirectionSequence(0018,9076)[1]/DiffusionGradientOrientation(0018,9089)> - Attribute is not present in standard DICOM IOD",
		"</ImageType(0008,0008)[3]> - Unrecognized defined term = <DIFFUSION>",
	}
}

// dciodvfyFiles runs dicom3tools' dciodvfy on every file, in parallel:
// any error fails the test, and so does any warning allowed does not
// accept.
func dciodvfyFiles(t *testing.T, files []string, allowed func(path, warning string) bool) {
	t.Helper()
	tool := testtool.Path(t, "dciodvfy", "dicom3tools")
	jobs := make(chan string)
	var mu sync.Mutex
	var wg sync.WaitGroup
	checked := 0
	for range runtime.NumCPU() {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for path := range jobs {
				// dciodvfy -new: one message per line, errors start
				// with "Error" (dicom3tools' dciodvfy output).
				out, err := exec.Command(tool, "-new", path).CombinedOutput()
				mu.Lock()
				checked++
				if err != nil && !bytes.Contains(out, []byte("Error")) {
					t.Errorf("dciodvfy %s: %v\n%s", path, err, out)
				}
				for _, line := range strings.Split(string(out), "\n") {
					switch {
					case strings.HasPrefix(line, "Error"):
						t.Errorf("dciodvfy %s: %s", path, line)
					case strings.HasPrefix(line, "Warning"):
						if !allowed(path, line) {
							t.Errorf("dciodvfy %s: unexpected %s", path, line)
						}
					}
				}
				mu.Unlock()
			}
		}()
	}
	for _, f := range files {
		jobs <- f
	}
	close(jobs)
	wg.Wait()
	if checked != len(files) || len(files) == 0 {
		t.Fatalf("dciodvfy checked %d files of %d", checked, len(files))
	}
}

func TestPhantomFilesAreValidDICOM(t *testing.T) {
	root := t.TempDir()
	studies := writeEveryCase(t, root)

	t.Run("dciodvfy finds no error in any file", func(t *testing.T) {
		allowed := classicWarnings()
		multi := map[string]bool{}
		var files []string
		for _, ws := range studies {
			for _, f := range ws.st.Files {
				files = append(files, f)
				multi[f] = ws.multi
			}
		}
		dciodvfyFiles(t, files, func(path, warning string) bool {
			return !multi[path] && slices.ContainsFunc(allowed, func(w string) bool { return strings.Contains(warning, w) })
		})
	})

	t.Run("pydicom reads every file with the frames, pixels and b-values written", func(t *testing.T) {
		py := testtool.Python(t, "pydicom", "numpy")
		out, err := exec.Command(py, "testdata/read_all.py", root).Output()
		if err != nil {
			t.Fatalf("read_all.py: %v", err)
		}
		lines := map[string][]string{}
		sc := bufio.NewScanner(bytes.NewReader(out))
		sc.Buffer(nil, 1<<20)
		first := true
		for sc.Scan() {
			if first {
				// The reference reader is pydicom 2.3.1 (Debian bookworm's
				// python3-pydicom); other versions read these files too.
				t.Logf("reference reader: %s", sc.Text())
				first = false
				continue
			}
			f := strings.Split(sc.Text(), "\t")
			lines[f[0]] = f
		}
		n := 0
		for _, ws := range studies {
			for _, path := range ws.st.Files {
				n++
				rel, _ := filepath.Rel(root, path)
				f, ok := lines[rel]
				if !ok || len(f) != 8 {
					t.Errorf("pydicom did not report %s (got %q)", rel, f)
					continue
				}
				imgs := readFile(t, path)
				var sum int64
				var bs []string
				for _, im := range imgs {
					for _, p := range im.pixels {
						sum += int64(p)
					}
					if im.hasB {
						bs = append(bs, ftoa(im.b))
					}
				}
				wantB := strings.Join(bs, ",")
				if wantB == "" {
					wantB = "-"
				}
				shape := fmt.Sprintf("%dx%d", testMatrix, testMatrix)
				if ws.multi {
					shape = fmt.Sprintf("%dx%s", len(imgs), shape)
				}
				// Columns of testdata/read_all.py: path, SOP class, frames,
				// rows, columns, pixel array shape, pixel sum, b-values.
				want := []string{rel, imgs[0].sopClass, strconv.Itoa(len(imgs)), strconv.Itoa(testMatrix), strconv.Itoa(testMatrix), shape, strconv.FormatInt(sum, 10), wantB}
				// pydicom 2.3.1 (testdata/read_all.py) and suyashkumar/dicom
				// v1.1.0 must read the same frames, pixels and b-values.
				if !slices.Equal(f, want) {
					t.Errorf("pydicom read %q, suyashkumar/dicom read %q", f, want)
				}
			}
		}
		if n == 0 || len(lines) != n {
			t.Fatalf("pydicom reported %d files, %d written", len(lines), n)
		}
	})
}

func TestPhantomIsDeterministic(t *testing.T) {
	o := Options{Case: CaseB0ArtifactAliasing, Matrix: 32, Slices: 3, Seed: 42}
	a, b := write(t, o), write(t, o)
	t.Run("the same options give the same bytes", func(t *testing.T) {
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
	})
	t.Run("another seed gives other UIDs and other noise", func(t *testing.T) {
		o2 := o
		o2.Seed = 43
		c := write(t, o2)
		if c.StudyUID == a.StudyUID {
			t.Fatal("same Study Instance UID for another seed")
		}
		if slices.Equal(readFile(t, c.Files[0])[0].pixels, readFile(t, a.Files[0])[0].pixels) {
			t.Fatal("same pixels for another seed")
		}
	})
	t.Run("another case gets other UIDs but the same noise where images agree", func(t *testing.T) {
		o2 := o
		o2.Case = CaseClean
		c := write(t, o2)
		if c.StudyUID == a.StudyUID {
			t.Fatal("same Study Instance UID for another case")
		}
		// The first directional image (b = 1000 along x, first slice) is
		// the same in both: the artifact is on the b0 only.
		pick := func(st *Study) []uint16 {
			for _, im := range readStudy(t, st) {
				if im.kind() == volDirectional && im.b == 1000 && im.dir == [3]float64{1, 0, 0} && sliceOf(st.Truth, im.z) == 0 {
					return im.pixels
				}
			}
			t.Fatal("no directional image")
			return nil
		}
		if !slices.Equal(pick(a), pick(c)) {
			t.Fatal("a DWI image differs between the clean and the b0-artifact study")
		}
	})
	t.Run("classic and multi-frame hold the same images", func(t *testing.T) {
		for _, c := range []Case{CaseClean, CaseMissingSlices, CaseScannerADCCorrect, CaseSlicePositions} {
			key := func(st *Study) []string {
				var keys []string
				for _, im := range readStudy(t, st) {
					h := sha256.New()
					for _, p := range im.pixels {
						h.Write([]byte{byte(p), byte(p >> 8)})
					}
					keys = append(keys, fmt.Sprintf("series %d kind %d b %g dir %v z %g pixels %x", im.series, im.kind(), im.b, im.dir, im.z, h.Sum(nil)))
				}
				slices.Sort(keys)
				return keys
			}
			o := Options{Case: c, Matrix: 32, Slices: 4, Seed: 5}
			classic := key(write(t, o))
			o.MultiFrame = true
			multi := key(write(t, o))
			if !slices.Equal(classic, multi) {
				t.Errorf("%s: classic and multi-frame images differ:\n%v\n%v", c, classic, multi)
			}
		}
	})
}

// within reports |got - want| <= tol*|want|.
func within(got, want, tol float64) bool { return math.Abs(got-want) <= tol*math.Abs(want) }

// volumeOf gathers, per DWI slice index, the images of one kind, b-value
// and direction.
func volumeOf(t testing.TB, tr *Truth, imgs []image, k volKind, b float64, dir [3]float64) map[int]image {
	t.Helper()
	out := map[int]image{}
	for _, im := range imgs {
		if im.kind() != k || (k != volADC && im.b != b) || im.dir != dir {
			continue
		}
		s := sliceOf(tr, im.z)
		if s < 0 {
			t.Fatalf("image at z %g is off the DWI slice grid", im.z)
		}
		out[s] = im
	}
	return out
}

func TestPhantomNoiselessPixelsReproduceTheTruth(t *testing.T) {
	for _, c := range []struct {
		name string
		opt  Options
	}{
		{"isotropic brain, three directions", Options{}},
		{"anisotropic white matter, three directions", Options{Anisotropic: true}},
		{"anisotropic white matter, six directions and three b-values", Options{Anisotropic: true, Directions: 6, BValues: []float64{0, 500, 1000}}},
	} {
		for _, multi := range []bool{false, true} {
			t.Run(c.name+", "+mode(multi), func(t *testing.T) {
				o := c.opt
				o.SNR, o.MultiFrame = math.Inf(1), multi
				st := write(t, o)
				tr := st.Truth
				imgs := readStudy(t, st)
				checked := 0
				for _, im := range imgs {
					s := sliceOf(tr, im.z)
					for p, v := range im.pixels {
						i := s*tr.Rows*tr.Cols + p
						var want float64
						switch im.kind() {
						case volB0:
							want = float64(tr.B0[i])
						case volDirectional:
							want = tr.Signal(i, im.b, im.dir)
						case volTrace:
							want = tr.Signal(i, im.b, [3]float64{})
						}
						// Stored values are the noiseless signal rounded to an
						// integer (and clamped to 12 bits).
						want = min(maxPixel, want)
						if math.Abs(float64(v)-want) > 0.5+1e-6 {
							t.Fatalf("%s frame %d pixel %d: stored %d, truth %v", im.path, im.frame, p, v, want)
						}
						checked++
					}
				}
				if checked != checkedWant(tr, o) {
					t.Fatalf("checked %d pixels, want %d", checked, checkedWant(tr, o))
				}
				// Two-point ADC of white matter from the stored b0 and trace
				// at the highest b reproduces the truth within the rounding.
				b := tr.HeaderB[len(tr.HeaderB)-1]
				b0 := volumeOf(t, tr, imgs, volB0, 0, [3]float64{})
				trace := volumeOf(t, tr, imgs, volTrace, b, [3]float64{})
				if got := medianADC(tr, b0, trace, b, LabelWM); !within(got, ADCWhiteMatter, 0.005) {
					t.Fatalf("white matter ADC from the pixels %v, truth %v", got, ADCWhiteMatter)
				}
			})
		}
	}
}

// checkedWant is the number of pixels of every image of a clean study.
func checkedWant(tr *Truth, o Options) int {
	dirs := o.Directions
	if dirs == 0 {
		dirs = 3
	}
	n := 0
	for _, b := range tr.HeaderB {
		if b == 0 {
			n++
		} else {
			n += dirs + 1
		}
	}
	return n * tr.Rows * tr.Cols * tr.Slices
}

// medianADC is the median two-point ADC ln(S0/Sb)/b over the voxels
// labelled l (docs/references.md#mono-exponential).
func medianADC(tr *Truth, low, high map[int]image, b float64, l uint8) float64 {
	var v []float64
	n := tr.Rows * tr.Cols
	for s, lo := range low {
		hi, ok := high[s]
		if !ok {
			continue
		}
		for p := range lo.pixels {
			if tr.Labels[s*n+p] == l && lo.pixels[p] > 0 && hi.pixels[p] > 0 {
				v = append(v, math.Log(float64(lo.pixels[p])/float64(hi.pixels[p]))/b)
			}
		}
	}
	if len(v) == 0 {
		return math.NaN()
	}
	return median(v)
}

func TestPhantomTissueADCIsRecoveredAtSNR50(t *testing.T) {
	// The acceptance of issue 4: each tissue's ADC within 2% of the truth
	// at SNR 50 or more. Here with the simplest estimator, the median
	// two-point ADC of b0 and trace over the tissue's voxels.
	st := write(t, Options{SNR: 50, Matrix: 128, Slices: 4, Seed: 3})
	tr := st.Truth
	imgs := readStudy(t, st)
	b0 := volumeOf(t, tr, imgs, volB0, 0, [3]float64{})
	trace := volumeOf(t, tr, imgs, volTrace, 1000, [3]float64{})
	for _, c := range []struct {
		name  string
		label uint8
		want  float64
	}{
		{"white matter", LabelWM, ADCWhiteMatter},
		{"grey matter", LabelGM, ADCGreyMatter},
		{"CSF", LabelCSF, ADCCSF},
	} {
		t.Run(c.name, func(t *testing.T) {
			if got := medianADC(tr, b0, trace, 1000, c.label); !within(got, c.want, 0.02) {
				t.Fatalf("median ADC %v, truth %v", got, c.want)
			}
		})
	}
}

// TestManyDirections checks the 30-direction scheme: unit vectors, no two
// alike or opposite (within 1 degree), and a series with one image per
// direction and slice plus b0 and trace.
func TestManyDirections(t *testing.T) {
	dirs := directionSet(ManyDirs)
	if len(dirs) != ManyDirs {
		t.Fatalf("%d directions, want %d", len(dirs), ManyDirs)
	}
	for i, a := range dirs {
		if n := math.Sqrt(a[0]*a[0] + a[1]*a[1] + a[2]*a[2]); math.Abs(n-1) > 1e-12 {
			t.Errorf("direction %d %v has norm %v", i, a, n)
		}
		for j := i + 1; j < len(dirs); j++ {
			b := dirs[j]
			if c := math.Abs(a[0]*b[0] + a[1]*b[1] + a[2]*b[2]); c > math.Cos(math.Pi/180) {
				t.Errorf("directions %d and %d within 1 degree: %v %v", i, j, a, b)
			}
		}
	}
	dir := t.TempDir()
	st, err := Write(dir, Options{Matrix: 16, Slices: 2, Directions: ManyDirs, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	if want := 2 * (1 + ManyDirs + 1); len(st.Files) != want {
		t.Fatalf("%d files, want %d (2 slices x (b0 + %d directions + trace))", len(st.Files), want, ManyDirs)
	}
}
