package synth

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"math/big"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"

	"dwiaudit/scp/part10"
	"dwiaudit/scp/scptest"
)

// parse reads a file with suyashkumar's parser, which panics on input it
// does not expect; a panic fails the test instead of the run.
func parse(t *testing.T, path string) (ds dicom.Dataset) {
	t.Helper()
	defer func() {
		if r := recover(); r != nil {
			t.Fatalf("suyashkumar/dicom panicked on %s: %v", path, r)
		}
	}()
	ds, err := dicom.ParseFile(path, nil)
	if err != nil {
		t.Fatalf("suyashkumar/dicom: %s: %v", path, err)
	}
	return ds
}

func strs(t *testing.T, ds dicom.Dataset, tg tag.Tag) []string {
	t.Helper()
	e, err := ds.FindElementByTag(tg)
	if err != nil {
		t.Fatalf("%v: %v", tg, err)
	}
	return dicom.MustGetStrings(e.Value)
}

func ints(t *testing.T, ds dicom.Dataset, tg tag.Tag) []int {
	t.Helper()
	e, err := ds.FindElementByTag(tg)
	if err != nil {
		t.Fatalf("%v: %v", tg, err)
	}
	return dicom.MustGetInts(e.Value)
}

func pixels(t *testing.T, ds dicom.Dataset) []uint16 {
	t.Helper()
	e, err := ds.FindElementByTag(tag.PixelData)
	if err != nil {
		t.Fatal(err)
	}
	info := dicom.MustGetPixelDataInfo(e.Value)
	if len(info.Frames) != 1 {
		t.Fatalf("%d frames, want 1", len(info.Frames))
	}
	raw, ok := info.Frames[0].NativeData.RawDataSlice().([]uint16)
	if !ok {
		t.Fatalf("pixel data is %T, want []uint16", info.Frames[0].NativeData.RawDataSlice())
	}
	return raw
}

func write(t *testing.T, s Series) []string {
	t.Helper()
	paths, err := WriteSeries(t.TempDir(), s)
	if err != nil {
		t.Fatal(err)
	}
	return paths
}

var seriesCases = []struct {
	name   string
	series Series
	rows   int
	cols   int
	xfer   string
	dcmtk  string // how dcmdump names the data set's transfer syntax
}{
	{"the default series", Series{Slices: 2, Seed: 1}, 256, 256,
		ExplicitVRLittleEndian, "Little Endian Explicit"},
	{"an implicit VR series", Series{Slices: 2, TransferSyntaxUID: ImplicitVRLittleEndian, Seed: 2}, 256, 256,
		ImplicitVRLittleEndian, "Little Endian Implicit"},
	{"a non-square diffusion series", Series{Rows: 96, Columns: 128, Slices: 3, BValues: []float64{0, 1000}, Seed: 3}, 96, 128,
		ExplicitVRLittleEndian, "Little Endian Explicit"},
}

func TestDCMDumpReadsWrittenFiles(t *testing.T) {
	for _, c := range seriesCases {
		t.Run("dcmdump reads "+c.name+" without complaint", func(t *testing.T) {
			for i, path := range write(t, c.series) {
				d := scptest.DCMDump(t, path)
				if d.Stderr != "" { // DCMTK dcmdump prints warnings and errors on stderr
					t.Fatalf("%s: dcmdump complained:\n%s", path, d.Stderr)
				}
				checks := []struct{ tag, want string }{
					{"0002,0002", MRImageStorage},                // DCMTK dcmdump output
					{"0002,0010", c.xfer},                        // DCMTK dcmdump output
					{"0008,0016", MRImageStorage},                // DCMTK dcmdump output
					{"0008,0060", "MR"},                          // DCMTK dcmdump output
					{"0028,0010", strconv.Itoa(c.rows)},          // DCMTK dcmdump output
					{"0028,0011", strconv.Itoa(c.cols)},          // DCMTK dcmdump output
					{"0028,0100", "16"},                          // DCMTK dcmdump output
					{"0028,0101", "12"},                          // DCMTK dcmdump output
					{"0028,0004", "MONOCHROME2"},                 // DCMTK dcmdump output
					{"0020,0013", strconv.Itoa(i + 1)},           // DCMTK dcmdump output
					{"0008,103E", SeriesDescription},             // DCMTK dcmdump output
					{"0002,0012", part10.ImplementationClassUID}, // DCMTK dcmdump output
				}
				for _, ck := range checks {
					if got := d.Values[ck.tag]; got != ck.want {
						t.Errorf("%s: (%s) = %q, want %q", filepath.Base(path), ck.tag, got, ck.want)
					}
				}
				// DCMTK dcmdump output: the data set section names the
				// transfer syntax it was decoded in.
				if !strings.Contains(d.Text, "# Dicom-Data-Set\n# Used TransferSyntax: "+c.dcmtk) {
					t.Errorf("%s: data set not decoded as %s:\n%.600s", path, c.dcmtk, d.Text)
				}
				if len(c.series.BValues) > 0 {
					want := strconv.FormatFloat(c.series.BValues[i%len(c.series.BValues)], 'g', -1, 64)
					if got := d.Values["0018,9087"]; got != want { // DCMTK dcmdump output
						t.Errorf("%s: b-value %q, want %q", path, got, want)
					}
				} else if _, ok := d.Values["0018,9087"]; ok {
					t.Errorf("%s: b-value written for a series without b-values", path)
				}
			}
		})
	}
}

func TestSuyashkumarParsesWrittenFiles(t *testing.T) {
	for _, c := range seriesCases {
		t.Run("suyashkumar/dicom reads back "+c.name, func(t *testing.T) {
			paths := write(t, c.series)
			var study, series string
			seen := map[string]bool{}
			for i, path := range paths {
				ds := parse(t, path)
				if got := strs(t, ds, tag.SOPClassUID)[0]; got != MRImageStorage {
					t.Errorf("SOP class %q", got)
				}
				if got := strs(t, ds, tag.TransferSyntaxUID)[0]; got != c.xfer {
					t.Errorf("transfer syntax %q, want %q", got, c.xfer)
				}
				if r, cl := ints(t, ds, tag.Rows)[0], ints(t, ds, tag.Columns)[0]; r != c.rows || cl != c.cols {
					t.Errorf("matrix %d×%d, want %d×%d", r, cl, c.rows, c.cols)
				}
				sop := strs(t, ds, tag.SOPInstanceUID)[0]
				if seen[sop] {
					t.Errorf("SOP instance UID %s repeated", sop)
				}
				seen[sop] = true
				if i == 0 {
					study, series = strs(t, ds, tag.StudyInstanceUID)[0], strs(t, ds, tag.SeriesInstanceUID)[0]
				} else if strs(t, ds, tag.StudyInstanceUID)[0] != study || strs(t, ds, tag.SeriesInstanceUID)[0] != series {
					t.Errorf("image %d is in another study or series", i+1)
				}
				px := pixels(t, ds)
				if len(px) != c.rows*c.cols {
					t.Fatalf("%d pixels, want %d", len(px), c.rows*c.cols)
				}
				for _, p := range px {
					if p > 1<<12-1 { // Bits Stored 12 (PS3.3 C.7.6.3.1.1, from memory)
						t.Fatalf("pixel %d above 12 bits", p)
					}
				}
				if len(c.series.BValues) > 0 {
					e, err := ds.FindElementByTag(tag.DiffusionBValue)
					if err != nil {
						t.Fatal(err)
					}
					if got, want := dicom.MustGetFloats(e.Value)[0], c.series.BValues[i%len(c.series.BValues)]; got != want {
						t.Errorf("b-value %v, want %v", got, want)
					}
				}
			}
		})
	}
}

func TestPart10ReadsWrittenFiles(t *testing.T) {
	for _, c := range seriesCases {
		t.Run("part10 finds the meta information and the data set of "+c.name, func(t *testing.T) {
			for _, path := range write(t, c.series) {
				m, off, err := part10.ReadMetaFile(path)
				if err != nil {
					t.Fatal(err)
				}
				ds := parse(t, path)
				if m.MediaStorageSOPClassUID != MRImageStorage || m.TransferSyntaxUID != c.xfer ||
					m.MediaStorageSOPInstanceUID != strs(t, ds, tag.SOPInstanceUID)[0] ||
					m.ImplementationClassUID != part10.ImplementationClassUID ||
					m.ImplementationVersionName != part10.ImplementationVersionName {
					t.Errorf("meta %+v", m)
				}
				b, err := os.ReadFile(path)
				if err != nil {
					t.Fatal(err)
				}
				// The data set opens with Image Type (0008,0008), the lowest
				// tag we write; in explicit VR its VR, CS, follows the tag
				// (PS3.5 7.1.2), in implicit VR a 4-byte length (PS3.5 7.1.3).
				if g, e := binary.LittleEndian.Uint16(b[off:]), binary.LittleEndian.Uint16(b[off+2:]); g != 0x0008 || e != 0x0008 {
					t.Fatalf("data set at %d starts with (%04X,%04X), want (0008,0008)", off, g, e)
				}
				if explicit := string(b[off+4:off+6]) == "CS"; explicit != (c.xfer == ExplicitVRLittleEndian) {
					t.Errorf("data set at %d: VR field %q in %s", off, b[off+4:off+6], c.xfer)
				}
			}
		})
	}
}

func TestWriteSeriesIsDeterministic(t *testing.T) {
	read := func(paths []string) [][]byte {
		var out [][]byte
		for _, p := range paths {
			b, err := os.ReadFile(p)
			if err != nil {
				t.Fatal(err)
			}
			out = append(out, b)
		}
		return out
	}
	base := Series{Rows: 64, Columns: 64, Slices: 3, BValues: []float64{0, 800}, Seed: 42}
	a := read(write(t, base))
	t.Run("the same seed gives the same bytes", func(t *testing.T) {
		b := read(write(t, base))
		for i := range a {
			if !bytes.Equal(a[i], b[i]) {
				t.Fatalf("file %d differs", i+1)
			}
		}
	})
	t.Run("another seed gives other UIDs and pixels", func(t *testing.T) {
		other := base
		other.Seed = 43
		b := read(write(t, other))
		if bytes.Equal(a[0], b[0]) || bytes.Equal(a[0][len(a[0])-64*64*2:], b[0][len(b[0])-64*64*2:]) {
			t.Fatal("seed 43 wrote the same as seed 42")
		}
	})
	t.Run("given UIDs are used and leave the pixels alone", func(t *testing.T) {
		given := base
		given.StudyInstanceUID, given.SeriesInstanceUID = "2.25.100", "2.25.101"
		paths := write(t, given)
		ds := parse(t, paths[0])
		if strs(t, ds, tag.StudyInstanceUID)[0] != "2.25.100" || strs(t, ds, tag.SeriesInstanceUID)[0] != "2.25.101" {
			t.Fatal("given UIDs not written")
		}
		b := read(paths)
		n := 64 * 64 * 2 // the pixel data ends the file
		if !bytes.Equal(a[0][len(a[0])-n:], b[0][len(b[0])-n:]) {
			t.Fatal("pixels changed with the UIDs")
		}
	})
}

func TestWrittenImagesLookLikeAHead(t *testing.T) {
	paths := write(t, Series{Rows: 128, Columns: 128, Slices: 3, BValues: []float64{0, 1000}, Seed: 7})
	// Image 2 is the middle slice at b=1000; image 1 is next to it at b=0.
	mean := func(px []uint16, r0, r1, c0, c1 int) float64 {
		sum := 0.0
		for r := r0; r < r1; r++ {
			for c := c0; c < c1; c++ {
				sum += float64(px[r*128+c])
			}
		}
		return sum / float64((r1-r0)*(c1-c0))
	}
	b0 := pixels(t, parse(t, paths[0]))
	b1000 := pixels(t, parse(t, paths[1]))
	tissue0 := mean(b0, 90, 100, 60, 68) // below the ventricles, inside the head
	corner := mean(b0, 0, 8, 0, 8)
	tissue1000 := mean(b1000, 90, 100, 60, 68)
	t.Run("the head is far brighter than the background", func(t *testing.T) {
		if tissue0 < 20*corner {
			t.Fatalf("tissue %.0f, background %.0f", tissue0, corner)
		}
	})
	t.Run("the background is noise of the set level", func(t *testing.T) {
		// Magnitude of complex Gaussian noise: Rayleigh, mean σ·√(π/2)
		// (common practice).
		if want := noiseSigma * math.Sqrt(math.Pi/2); math.Abs(corner-want) > 0.3*want {
			t.Fatalf("background %.1f, want about %.1f", corner, want)
		}
	})
	t.Run("diffusion weighting attenuates tissue as exp(-b·ADC)", func(t *testing.T) {
		want := math.Exp(-1000 * tissueADC) // Stejskal–Tanner (common practice)
		if got := tissue1000 / tissue0; math.Abs(got-want) > 0.05 {
			t.Fatalf("b=1000/b=0 = %.3f, want %.3f", got, want)
		}
	})
}

func TestWriteSeriesGeometry(t *testing.T) {
	paths := write(t, Series{Slices: 3, Seed: 5})
	ds := parse(t, paths[1]) // the middle of three slices
	cases := []struct {
		name string
		tag  tag.Tag
		want []string
	}{
		// 230 mm over 256 pixels; first pixel centre at -(255/2)·spacing.
		{"pixels are 230/256 mm square", tag.PixelSpacing, []string{"0.8984375", "0.8984375"}},
		{"the middle slice is centred on the origin", tag.ImagePositionPatient, []string{"-114.55078125", "-114.55078125", "0"}},
		{"slices are axial", tag.ImageOrientationPatient, []string{"1", "0", "0", "0", "1", "0"}},
		{"slices are 4 mm thick", tag.SliceThickness, []string{"4"}},
		{"slice location follows z", tag.SliceLocation, []string{"0"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			got := strs(t, ds, c.tag)
			if fmt.Sprint(got) != fmt.Sprint(c.want) {
				t.Fatalf("%v = %q, want %q", c.tag, got, c.want)
			}
		})
	}
}

func TestWriteSeriesFileSize(t *testing.T) {
	paths := write(t, Series{Slices: 1, Seed: 9})
	fi, err := os.Stat(paths[0])
	if err != nil {
		t.Fatal(err)
	}
	// 256·256 pixels of 2 bytes plus a header of under 2 KiB.
	if px := int64(256 * 256 * 2); fi.Size() < px || fi.Size() > px+2048 {
		t.Fatalf("file of %d bytes, pixel data alone is %d", fi.Size(), px)
	}
}

func TestWriteSeriesRejectsInvalidSeries(t *testing.T) {
	cases := []struct {
		name   string
		series Series
		want   error
	}{
		{"negative rows", Series{Rows: -1}, errInvalidSeries},
		{"a matrix above MaxMatrix", Series{Columns: maxMatrix + 1}, errInvalidSeries},
		{"negative slices", Series{Slices: -2}, errInvalidSeries},
		{"more slices than MaxSlices", Series{Slices: maxSlices + 1}, errInvalidSeries},
		{"a negative b-value", Series{BValues: []float64{0, -5}}, errInvalidSeries},
		{"a NaN b-value", Series{BValues: []float64{math.NaN()}}, errInvalidSeries},
		{"a study UID with letters", Series{StudyInstanceUID: "2.25.abc"}, errInvalidSeries},
		{"a series UID of 65 characters", Series{SeriesInstanceUID: "2.25." + strings.Repeat("9", 60)}, errInvalidSeries},
		{"a compressed transfer syntax", Series{TransferSyntaxUID: "1.2.840.10008.1.2.4.50"}, errUnsupportedTransferSyntax},
		{"explicit VR big endian", Series{TransferSyntaxUID: "1.2.840.10008.1.2.2"}, errUnsupportedTransferSyntax},
	}
	for _, c := range cases {
		t.Run("it rejects "+c.name, func(t *testing.T) {
			dir := filepath.Join(t.TempDir(), "out")
			paths, err := WriteSeries(dir, c.series)
			if !errors.Is(err, c.want) {
				t.Fatalf("err = %v, want %v", err, c.want)
			}
			if len(paths) != 0 {
				t.Fatalf("wrote %d files", len(paths))
			}
			if _, err := os.Stat(dir); !errors.Is(err, os.ErrNotExist) {
				t.Fatalf("created %s: %v", dir, err)
			}
		})
	}
}

func TestNewUID(t *testing.T) {
	rnd := rand.New(rand.NewPCG(1, 2))
	limit := new(big.Int).Lsh(big.NewInt(1), 128)
	seen := map[string]bool{}
	for i := 0; i < 2000; i++ {
		u := NewUID(rnd)
		if !strings.HasPrefix(u, "2.25.") { // PS3.5 B.2
			t.Fatalf("%s lacks the 2.25 root", u)
		}
		if len(u) > 64 || !validUID(u) { // PS3.5 9.1
			t.Fatalf("%s is not a valid UID", u)
		}
		n, ok := new(big.Int).SetString(u[len("2.25."):], 10)
		if !ok || n.Cmp(limit) >= 0 {
			t.Fatalf("%s is not a 128-bit decimal", u)
		}
		b := n.FillBytes(make([]byte, 16))
		if b[6]>>4 != 4 || b[8]>>6 != 2 { // RFC 9562 5.4, from memory
			t.Fatalf("%s is not a version 4 UUID (% x)", u, b)
		}
		if seen[u] {
			t.Fatalf("%s repeated after %d", u, i)
		}
		seen[u] = true
	}
	t.Run("the same generator state gives the same UID", func(t *testing.T) {
		a, b := rand.New(rand.NewPCG(9, 9)), rand.New(rand.NewPCG(9, 9))
		if NewUID(a) != NewUID(b) {
			t.Fatal("differs")
		}
	})
}

func TestFormatDS(t *testing.T) {
	cases := []struct {
		v    float64
		want string
	}{
		{0, "0"},
		{math.Copysign(0, -1), "0"},
		{4, "4"},
		{0.8984375, "0.8984375"},
		{230.0 / 3, "76.6666666666667"},
		{-230.0 / 3, "-76.666666666667"},
		{1e-7 / 3, "3.3333333333e-08"},
	}
	for _, c := range cases {
		t.Run("it formats "+c.want, func(t *testing.T) {
			got := FormatDS(c.v)
			if got != c.want || len(got) > 16 { // PS3.5 6.2: DS at most 16 bytes
				t.Fatalf("FormatDS(%v) = %q, want %q", c.v, got, c.want)
			}
		})
	}
}

func BenchmarkWriteSeries(b *testing.B) {
	dir := b.TempDir()
	s := Series{Slices: 16, BValues: []float64{0, 1000}, Seed: 1}
	b.SetBytes(16 * 256 * 256 * 2)
	for b.Loop() {
		if _, err := WriteSeries(dir, s); err != nil {
			b.Fatal(err)
		}
	}
}
