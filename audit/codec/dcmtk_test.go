package codec

import (
	"fmt"
	"os"
	"path/filepath"
	"testing"

	"dwiaudit/internal/testtool"
)

// The tests in this file check the decoders against DCMTK: native
// images (the phantom's MR images and invented pictures) are compressed
// by DCMTK's encoders with each option, then decoded both by this package
// and by DCMTK's own decoder, and compared sample for sample. Lossless
// syntaxes must also give back the original samples exactly; near-lossless
// JPEG-LS within NEAR of them (ITU T.87 A.4.4: |x - Rx| <= NEAR).

// inputs are the native images the encoders are given.
type input struct {
	name string
	path func(t *testing.T, dir string) string
}

func testInputs() []input {
	picture := func(name string, img Image, frames int) input {
		return input{name, func(t *testing.T, dir string) string {
			p := filepath.Join(dir, name+".dcm")
			writePicture(t, p, img, frames, uint64(len(name)))
			return p
		}}
	}
	return []input{
		{"phantom MR image (16 bits allocated, 12 stored)", func(t *testing.T, dir string) string {
			c, _ := phantomFiles(t, dir)
			return c
		}},
		{"phantom enhanced MR multi-frame instance", func(t *testing.T, dir string) string {
			_, m := phantomFiles(t, dir)
			return m
		}},
		picture("gray8", Image{Rows: 47, Columns: 61, SamplesPerPixel: 1, BitsAllocated: 8}, 1),
		picture("gray16", Image{Rows: 33, Columns: 45, SamplesPerPixel: 1, BitsAllocated: 16}, 2),
		picture("rgb8", Image{Rows: 47, Columns: 61, SamplesPerPixel: 3, BitsAllocated: 8}, 1),
	}
}

// codecCase is one DCMTK encoding and how its decoded samples must
// relate to the input.
type codecCase struct {
	encoder string
	args    []string
	decoder string
	inputs  []string // input names; all when empty
	// lossless: our output equals the input; near > 0: within near of it.
	lossless bool
	near     int
}

func runCases(t *testing.T, cases []codecCase) {
	dir := t.TempDir()
	paths := map[string]string{}
	for _, in := range testInputs() {
		paths[in.name] = in.path(t, t.TempDir())
	}
	for ci, c := range cases {
		for ii, in := range testInputs() {
			if len(c.inputs) > 0 && !contains(c.inputs, in.name) {
				continue
			}
			name := fmt.Sprintf("%s %v on the %s decodes as %s does", c.encoder, c.args, in.name, c.decoder)
			t.Run(name, func(t *testing.T) {
				src := paths[in.name]
				enc := filepath.Join(dir, fmt.Sprintf("c%d-%d.dcm", ci, ii))
				dec := filepath.Join(dir, fmt.Sprintf("d%d-%d.dcm", ci, ii))
				runTool(t, c.encoder, append(append([]string{}, c.args...), src, enc)...)
				runTool(t, c.decoder, enc, dec)
				cf := readDICOM(t, enc)
				if !cf.encapsed {
					t.Fatalf("%s wrote native pixel data (%s)", c.encoder, cf.ts)
				}
				ours := decodeFile(t, cf)
				ref := readDICOM(t, dec)
				orig := readDICOM(t, src)
				for i, fr := range ours {
					got := toSamples(fr, cf.img.BitsAllocated)
					// DCMTK output (dcmdrle/dcmdjpeg/dcmdjpls): identical samples.
					compare(t, fmt.Sprintf("frame %d against %s", i+1, c.decoder), got, ref.samples(t, i), 0)
					switch {
					case c.lossless:
						// PS3.5 8.2 and the syntax's standard: lossless.
						compare(t, fmt.Sprintf("frame %d against the original", i+1), got, orig.samples(t, i), 0)
					case c.near > 0:
						// ITU T.87 A.4.4: near-lossless error at most NEAR.
						compare(t, fmt.Sprintf("frame %d against the original", i+1), got, orig.samples(t, i), c.near)
					}
				}
			})
		}
	}
}

func contains(list []string, s string) bool {
	for _, v := range list {
		if v == s {
			return true
		}
	}
	return false
}

func TestRLEMatchesDCMTK(t *testing.T) {
	runCases(t, []codecCase{
		{encoder: "dcmcrle", decoder: "dcmdrle", lossless: true},
		// PS3.5 A.4: frames split over fragments, with and without a
		// Basic Offset Table.
		{encoder: "dcmcrle", args: []string{"+fs", "1", "-ot"}, decoder: "dcmdrle", lossless: true,
			inputs: []string{"phantom MR image (16 bits allocated, 12 stored)", "rgb8"}},
		{encoder: "dcmcrle", args: []string{"+fs", "1"}, decoder: "dcmdrle", lossless: true,
			inputs: []string{"phantom enhanced MR multi-frame instance", "gray16"}},
	})
}

func TestJPEGLosslessMatchesDCMTK(t *testing.T) {
	cases := []codecCase{
		// ITU T.81 Annex H, selection value 1 (1.2.840.10008.1.2.4.70).
		{encoder: "dcmcjpeg", args: []string{"+e1"}, decoder: "dcmdjpeg", lossless: true},
		{encoder: "dcmcjpeg", args: []string{"+e1", "-ot"}, decoder: "dcmdjpeg", lossless: true,
			inputs: []string{"phantom enhanced MR multi-frame instance"}},
		{encoder: "dcmcjpeg", args: []string{"+e1", "+fs", "1"}, decoder: "dcmdjpeg", lossless: true,
			inputs: []string{"phantom enhanced MR multi-frame instance", "gray16"}},
		// Point transform: not lossless, but identical to DCMTK's decode.
		{encoder: "dcmcjpeg", args: []string{"+el", "+sv", "4", "+pt", "2"}, decoder: "dcmdjpeg"},
	}
	for sv := 1; sv <= 7; sv++ { // every predictor of T.81 Table H.1
		cases = append(cases, codecCase{encoder: "dcmcjpeg", args: []string{"+el", "+sv", fmt.Sprint(sv)}, decoder: "dcmdjpeg", lossless: true})
	}
	runCases(t, cases)
}

func TestJPEGLossyMatchesDCMTK(t *testing.T) {
	gray := []string{"phantom MR image (16 bits allocated, 12 stored)", "phantom enhanced MR multi-frame instance", "gray8"}
	runCases(t, []codecCase{
		// ITU T.81 baseline (8-bit) and extended (12-bit) sequential DCT;
		// DCMTK's decoder is the reference for the lossy samples.
		{encoder: "dcmcjpeg", args: []string{"+eb"}, decoder: "dcmdjpeg", inputs: append(gray, "rgb8")},
		{encoder: "dcmcjpeg", args: []string{"+eb", "+q", "50"}, decoder: "dcmdjpeg", inputs: append(gray, "rgb8")},
		{encoder: "dcmcjpeg", args: []string{"+eb", "-ho"}, decoder: "dcmdjpeg", inputs: []string{"gray8", "rgb8"}},
		{encoder: "dcmcjpeg", args: []string{"+ee"}, decoder: "dcmdjpeg", inputs: gray},
		{encoder: "dcmcjpeg", args: []string{"+ee", "+q", "75"}, decoder: "dcmdjpeg", inputs: []string{"phantom MR image (16 bits allocated, 12 stored)", "gray16"}},
		// Colour: 4:4:4, 4:2:2 YCbCr, 4:1:1 and RGB (no transform).
		{encoder: "dcmcjpeg", args: []string{"+eb", "+s4"}, decoder: "dcmdjpeg", inputs: []string{"rgb8"}},
		{encoder: "dcmcjpeg", args: []string{"+eb", "+n1"}, decoder: "dcmdjpeg", inputs: []string{"rgb8"}},
		{encoder: "dcmcjpeg", args: []string{"+eb", "+np"}, decoder: "dcmdjpeg", inputs: []string{"rgb8"}},
		{encoder: "dcmcjpeg", args: []string{"+eb", "+cr"}, decoder: "dcmdjpeg", inputs: []string{"rgb8"}},
		{encoder: "dcmcjpeg", args: []string{"+ee", "+cr"}, decoder: "dcmdjpeg", inputs: []string{"rgb8"}},
	})
}

func TestJPEGLSMatchesDCMTK(t *testing.T) {
	cases := []codecCase{
		// ITU T.87 lossless (1.2.840.10008.1.2.4.80).
		{encoder: "dcmcjpls", args: []string{"+el"}, decoder: "dcmdjpls", lossless: true},
		{encoder: "dcmcjpls", args: []string{"+el", "+pc"}, decoder: "dcmdjpls", lossless: true},
		{encoder: "dcmcjpls", args: []string{"+el", "+is"}, decoder: "dcmdjpls", lossless: true, inputs: []string{"rgb8"}},
		{encoder: "dcmcjpls", args: []string{"+el", "+in"}, decoder: "dcmdjpls", lossless: true, inputs: []string{"rgb8"}},
		{encoder: "dcmcjpls", args: []string{"+el", "+t1", "5", "+t2", "9", "+t3", "30", "+rs", "32"}, decoder: "dcmdjpls", lossless: true},
		{encoder: "dcmcjpls", args: []string{"+el", "+fs", "1", "-ot"}, decoder: "dcmdjpls", lossless: true,
			inputs: []string{"phantom enhanced MR multi-frame instance", "gray16"}},
	}
	for _, near := range []int{1, 2, 5} { // T.87 near-lossless (1.2.840.10008.1.2.4.81)
		cases = append(cases,
			codecCase{encoder: "dcmcjpls", args: []string{"+en", "+md", fmt.Sprint(near)}, decoder: "dcmdjpls", near: near},
			codecCase{encoder: "dcmcjpls", args: []string{"+en", "+md", fmt.Sprint(near), "+is"}, decoder: "dcmdjpls", near: near, inputs: []string{"rgb8"}},
			codecCase{encoder: "dcmcjpls", args: []string{"+en", "+md", fmt.Sprint(near), "+in"}, decoder: "dcmdjpls", near: near, inputs: []string{"rgb8"}},
		)
	}
	runCases(t, cases)
}

// TestWriteSeeds writes the fuzz seeds of FuzzJPEG and FuzzJPEGLS: small
// invented pictures encoded by DCMTK with each process. It runs only with
// -update (`go test ./audit/codec -run TestWriteSeeds -update`).
func TestWriteSeeds(t *testing.T) {
	if !testtool.Update() {
		t.Skip("run with -update to rewrite testdata/seeds with DCMTK")
	}
	dir := t.TempDir()
	pics := map[string]Image{
		"gray8":  {Rows: 11, Columns: 13, SamplesPerPixel: 1, BitsAllocated: 8},
		"gray12": {Rows: 11, Columns: 13, SamplesPerPixel: 1, BitsAllocated: 16, BitsStored: 12},
		"rgb8":   {Rows: 11, Columns: 13, SamplesPerPixel: 3, BitsAllocated: 8},
	}
	type seed struct {
		name, pic, tool string
		args            []string
		ext             string
	}
	seeds := []seed{
		{"lossless-sv1-gray12", "gray12", "dcmcjpeg", []string{"+e1"}, ".jpg"},
		{"lossless-sv7-gray8", "gray8", "dcmcjpeg", []string{"+el", "+sv", "7"}, ".jpg"},
		{"lossless-sv4-rgb8", "rgb8", "dcmcjpeg", []string{"+el", "+sv", "4"}, ".jpg"},
		{"baseline-gray8", "gray8", "dcmcjpeg", []string{"+eb"}, ".jpg"},
		{"baseline-rgb8-422", "rgb8", "dcmcjpeg", []string{"+eb"}, ".jpg"},
		{"extended-gray12", "gray12", "dcmcjpeg", []string{"+ee"}, ".jpg"},
		{"ls-lossless-gray12", "gray12", "dcmcjpls", []string{"+el"}, ".jls"},
		{"ls-lossless-rgb8-line", "rgb8", "dcmcjpls", []string{"+el"}, ".jls"},
		{"ls-lossless-rgb8-sample", "rgb8", "dcmcjpls", []string{"+el", "+is"}, ".jls"},
		{"ls-near2-gray8", "gray8", "dcmcjpls", []string{"+en", "+md", "2"}, ".jls"},
	}
	if err := os.MkdirAll(seedDir, 0o755); err != nil {
		t.Fatal(err)
	}
	for _, s := range seeds {
		src := filepath.Join(dir, s.pic+".dcm")
		writePicture(t, src, pics[s.pic], 1, 11)
		enc := filepath.Join(dir, s.name+".dcm")
		runTool(t, s.tool, append(append([]string{}, s.args...), src, enc)...)
		f := readDICOM(t, enc)
		frames, err := Frames(f.pixel, 1, f.ts)
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(seedDir, s.name+s.ext), frames[0], 0o644); err != nil {
			t.Fatal(err)
		}
	}
}
