package header

import (
	"bytes"
	"errors"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"testing"

	"dwiaudit/audit/dwi"
)

// writeTestdataEnv, set to 1, makes TestTestdataMatchesItsGenerator
// rewrite testdata/ from the generators below instead of comparing.
const writeTestdataEnv = "DWIAUDIT_WRITE_TESTDATA"

// testdataOptions load pixels and name the private source the testdata
// file with a private b-value needs (an invented creator, PS3.5 7.8.1).
func testdataOptions() ExtractOptions {
	return ExtractOptions{
		LoadPixels:     true,
		PrivateSources: []PrivateSource{{Name: "acme", Creator: "ACME DIFFUSION 1", Group: 0x0019, Element: 0x0C, Read: ValueIS, Scale: 1}},
	}
}

// testdataFile is one committed fixture: how it is made, and what
// extracting it gives.
type testdataFile struct {
	name    string
	make    func(t testing.TB) []byte
	frames  int
	bvalues []float64
	kind    dwi.MapKind
	encaps  bool
}

func testdataFiles() []testdataFile {
	x, y, z := [3]float64{1, 0, 0}, [3]float64{0, 1, 0}, [3]float64{0, 0, 1}
	diffusionSeries := newSeries("td", img{b: 0}, img{b: 1000, dir: x}, img{b: 1000, dir: y},
		img{b: 1000, directionality: "BMATRIX", bmatrix: &[6]float64{0, 0, 0, 0, 0, 1000}, dir: z})
	private := newSeries("tdpriv", img{noB: true, directionality: "DIRECTIONAL", dir: x, extra: []el{
		txt(0x00190010, "LO", "ACME DIFFUSION 1"), txt(0x0019100C, "IS", "1000")}})
	adc := newSeries("tdadc", img{b: 1000, iso: true, imageType: []string{"DERIVED", "PRIMARY", "DIFFUSION", "ADC"}, rwvUnits: "10-6.mm2/s"})
	ge := geSeries("tdge", geImage([]string{"0", "8", "0", "0"}, [3]float64{}, 0, nil))
	philips := philipsSeries("tdphilips", philipsImage(1000, "O", [3]float32{0, 0.6, 0.8}, 0))
	classic := func(s testSeries, ts string, k int) func(testing.TB) []byte {
		return func(t testing.TB) []byte { return s.classic(t, ts)[k] }
	}
	enhanced := func(s testSeries, ts string) func(testing.TB) []byte {
		return func(t testing.TB) []byte { return s.enhanced(t, ts) }
	}
	return []testdataFile{
		{"classic-explicit-le.dcm", classic(diffusionSeries, tsExplicitLE, 1), 1, []float64{1000}, dwi.KindAcquired, false},
		{"classic-implicit-le.dcm", classic(diffusionSeries, tsImplicitLE, 0), 1, []float64{0}, dwi.KindAcquired, false},
		{"classic-explicit-be.dcm", classic(diffusionSeries, tsExplicitBE, 3), 1, []float64{1000}, dwi.KindAcquired, false},
		{"classic-private-b-implicit.dcm", classic(private, tsImplicitLE, 0), 1, []float64{1000}, dwi.KindAcquired, false},
		{"classic-adc-map.dcm", classic(adc, tsExplicitLE, 0), 1, []float64{1000}, dwi.KindADC, false},
		{"classic-ge-private-b0-implicit.dcm", classic(ge, tsImplicitLE, 0), 1, []float64{0}, dwi.KindAcquired, false},
		{"classic-philips-private-implicit.dcm", classic(philips, tsImplicitLE, 0), 1, []float64{1000}, dwi.KindAcquired, false},
		{"enhanced-explicit-le.dcm", enhanced(diffusionSeries, tsExplicitLE), 4, []float64{0, 1000, 1000, 1000}, dwi.KindAcquired, false},
		{"enhanced-deflated.dcm", enhanced(diffusionSeries, tsDeflated), 4, []float64{0, 1000, 1000, 1000}, dwi.KindAcquired, false},
		{"enhanced-jpeg-encapsulated.dcm", func(t testing.TB) []byte {
			return part10File(t, tsJPEGBase, enhancedMR, "2.25.6", encapsulatedElements())
		}, 2, []float64{0, 1000}, dwi.KindAcquired, true},
	}
}

func TestTestdataMatchesItsGenerator(t *testing.T) {
	write := os.Getenv(writeTestdataEnv) == "1"
	for _, td := range testdataFiles() {
		t.Run(td.name+" is what its generator writes", func(t *testing.T) {
			want := td.make(t)
			path := filepath.Join("testdata", td.name)
			if write {
				if err := os.WriteFile(path, want, 0o644); err != nil {
					t.Fatal(err)
				}
			}
			got, err := os.ReadFile(path)
			if err != nil {
				t.Fatalf("%v (run with %s=1 to write testdata/)", err, writeTestdataEnv)
			}
			if !bytes.Equal(got, want) {
				t.Errorf("testdata/%s differs from its generator; run with %s=1 to rewrite it", td.name, writeTestdataEnv)
			}
		})
	}
}

func TestTestdataExtracts(t *testing.T) {
	for _, td := range testdataFiles() {
		t.Run(td.name+" gives its frames and b-values", func(t *testing.T) {
			frames, err := ExtractFile(filepath.Join("testdata", td.name), testdataOptions())
			if err != nil {
				t.Fatal(err)
			}
			var bs []float64
			for _, f := range frames {
				bs = append(bs, f.BValue)
				if f.Kind != td.kind || f.Encapsulated != td.encaps || (!td.encaps && len(f.Pixels) != 64) {
					t.Errorf("frame %s: kind %v encapsulated %v, %d pixels", f.ID(), f.Kind, f.Encapsulated, len(f.Pixels))
				}
			}
			if len(frames) != td.frames || !slices.Equal(bs, td.bvalues) {
				t.Errorf("%d frames with b-values %v, want %d with %v", len(frames), bs, td.frames, td.bvalues)
			}
		})
	}
}

// FuzzExtract checks that no input makes Extract or assembly panic, and
// that what Extract accepts is self-consistent. Seeds: testdata/*.dcm.
func FuzzExtract(f *testing.F) {
	paths, err := filepath.Glob(filepath.Join("testdata", "*.dcm"))
	if err != nil || len(paths) == 0 {
		f.Fatalf("no seeds in testdata/: %v", err)
	}
	for _, p := range paths {
		b, err := os.ReadFile(p)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(b)
	}
	// Synthetic Siemens mosaics (siemens_extract_test.go), so that the
	// CSA reader and the mosaic split are fuzzed through extraction too.
	for i, ts := range []string{tsExplicitLE, tsImplicitLE} {
		m := siemensMosaic(siemensCSA("1000", "4", []string{"0.6", "-0.8", "0"}, []string{"0", "0", "1"}))
		f.Add(newSeries("fuzz-siemens", m).classic(f, ts)[0])
		b0 := siemensMosaic(siemensCSA("0", strconv.Itoa(3+i), nil, []string{"0", "0", "-1"}))
		f.Add(newSeries("fuzz-siemens-b0", b0).classic(f, ts)[0])
	}
	opt := testdataOptions()
	f.Fuzz(func(t *testing.T, data []byte) {
		frames, err := Extract(data, opt)
		if err != nil {
			if frames != nil {
				t.Errorf("frames with error %v", err)
			}
			for _, sentinel := range []error{ErrNotPart10, ErrUnknownTransferSyntax, ErrMalformed, ErrPixelData, ErrPrivateSource} {
				if errors.Is(err, sentinel) {
					return
				}
			}
			t.Errorf("error wraps no sentinel: %v", err)
			return
		}
		for i := range frames {
			fr := &frames[i]
			if !fr.Encapsulated && len(fr.Pixels) != fr.Geometry.Rows*fr.Geometry.Columns {
				t.Errorf("frame %d: %d pixels for %dx%d", i, len(fr.Pixels), fr.Geometry.Rows, fr.Geometry.Columns)
			}
		}
		if len(frames) > 0 {
			dwi.AssembleSeries(frames, dwi.DefaultTolerances()) // must return, whatever it returns
			dwi.AssembleStudy(frames, dwi.DefaultTolerances())
		}
	})
}
