package header

import (
	"bytes"
	"encoding/binary"
	"errors"
	"os"
	"path/filepath"
	"slices"
	"testing"
)

// csaTag is one tag for csaBytes to write.
type csaTag struct {
	name    string
	vm      int
	vr      string
	items   []string // nitems is len(items)
	checkTo int      // 0: 77
}

// csaBytes writes a CSA header in the layout nibabel's siemens_csa.rst
// describes: CSA2 with "SV10" and 4 unused bytes, CSA1 without; item
// lengths in the four int32 as [len+off, len, 77, len] where off is the
// first tag's nitems in CSA1 (the offset SPM and nibabel take off) and 0
// in CSA2.
func csaBytes(layout CSALayout, tags []csaTag) []byte {
	var b bytes.Buffer
	le := binary.LittleEndian
	u32 := func(v int) { b.Write(le.AppendUint32(nil, uint32(int32(v)))) }
	if layout == CSA2 {
		b.WriteString("SV10")
		b.Write([]byte{4, 3, 2, 1})
	}
	u32(len(tags))
	u32(77)
	off := 0
	if layout == CSA1 && len(tags) > 0 {
		off = len(tags[0].items)
	}
	for _, t := range tags {
		name := make([]byte, 64)
		copy(name, t.name)
		b.Write(name)
		u32(t.vm)
		vr := make([]byte, 4)
		copy(vr, t.vr)
		b.Write(vr)
		u32(0) // syngodt
		u32(len(t.items))
		check := t.checkTo
		if check == 0 {
			check = 77
		}
		u32(check)
		for _, it := range t.items {
			v := []byte(it)
			if it != "" {
				v = append(v, 0) // values are NUL-terminated
			}
			u32(len(v) + off)
			u32(len(v))
			u32(77)
			u32(len(v))
			b.Write(v)
			b.Write(make([]byte, (4-len(v)%4)%4))
		}
	}
	return b.Bytes()
}

// siemensTags are the CSA image header tags of a diffusion-weighted
// mosaic, with values shaped like those of nibabel's csa2_b1000.bin
// (values invented).
func siemensTags(b string) []csaTag {
	return []csaTag{
		{name: "EchoLinePosition", vm: 1, vr: "IS", items: []string{"64", "", "", "", "", ""}},
		{name: "NumberOfImagesInMosaic", vm: 1, vr: "US", items: []string{"30", "", "", "", "", ""}},
		{name: "B_value", vm: 1, vr: "IS", items: []string{b, "", "", "", "", ""}},
		{name: "DiffusionGradientDirection", vm: 3, vr: "FD", items: []string{"0.6", "-0.8", "0.00000000", "", "", ""}},
		{name: "B_matrix", vm: 6, vr: "FD", items: []string{"360", "-480", "0", "640", "0", "0"}},
		{name: "SliceNormalVector", vm: 3, vr: "FD", items: []string{"0.0", "0.0", "1.0", "", "", ""}},
		{name: "DiffusionDirectionality", vm: 1, vr: "CS", items: []string{"DIRECTIONAL", "", "", "", "", ""}},
		{name: "ImaCoilString", vm: 1, vr: "LO", items: []string{"HEA;HEP"}},
		{name: "Unset", vm: 0, vr: "UN"},
	}
}

func TestParseCSAReadsBothLayouts(t *testing.T) {
	for _, layout := range []CSALayout{CSA1, CSA2} {
		name := map[CSALayout]string{CSA1: "the layout without a signature", CSA2: "the SV10 layout"}[layout]
		t.Run(name+" gives every tag and its numbers", func(t *testing.T) {
			h, err := ParseCSA(csaBytes(layout, siemensTags("1000")))
			if err != nil {
				t.Fatal(err)
			}
			if h.Layout != layout || len(h.Elements) != 9 {
				t.Fatalf("layout %v, %d elements; want %v, 9", h.Layout, len(h.Elements), layout)
			}
			if b, ok := h.Float(CSABValue); !ok || b != 1000 {
				t.Errorf("B_value %v %v, want 1000", b, ok)
			}
			if n, ok := h.Int(CSAMosaicImages); !ok || n != 30 {
				t.Errorf("NumberOfImagesInMosaic %v %v, want 30", n, ok)
			}
			if g, ok := h.Vector(CSAGradient, 3); !ok || !slices.Equal(g, []float64{0.6, -0.8, 0}) {
				t.Errorf("gradient %v %v", g, ok)
			}
			if m, ok := h.Vector(CSABMatrix, 6); !ok || !slices.Equal(m, []float64{360, -480, 0, 640, 0, 0}) {
				t.Errorf("B_matrix %v %v", m, ok)
			}
			if s := h.Text(CSADirectionality); s != "DIRECTIONAL" {
				t.Errorf("directionality %q", s)
			}
			if s := h.Text("ImaCoilString"); s != "HEA;HEP" {
				t.Errorf("a string tag with vm 1 and one item: %q", s)
			}
			e, ok := h.Lookup("EchoLinePosition")
			if !ok || e.VM != 1 || e.VR != "IS" || len(e.Values) != 1 {
				t.Errorf("only vm values are kept: %+v", e)
			}
			if _, ok := h.Float("Unset"); ok {
				t.Error("a tag without items gives a number")
			}
			if _, ok := h.Float("Absent"); ok {
				t.Error("an absent tag gives a number")
			}
			if _, ok := h.Vector(CSAGradient, 6); ok {
				t.Error("a 3-vector read as 6")
			}
		})
	}
	t.Run("a b0 header has B_value 0 and no gradient", func(t *testing.T) {
		tags := siemensTags("0")
		tags[3].items = []string{"", "", "", "", "", ""}
		h, err := ParseCSA(csaBytes(CSA2, tags))
		if err != nil {
			t.Fatal(err)
		}
		if b, ok := h.Float(CSABValue); !ok || b != 0 {
			t.Errorf("B_value %v %v, want 0", b, ok)
		}
		if _, ok := h.Vector(CSAGradient, 3); ok {
			t.Error("empty items read as a gradient")
		}
	})
	t.Run("a tag with check word 205 is read", func(t *testing.T) {
		tags := siemensTags("500")
		tags[2].checkTo = 205
		h, err := ParseCSA(csaBytes(CSA2, tags))
		if err != nil {
			t.Fatal(err)
		}
		if b, _ := h.Float(CSABValue); b != 500 {
			t.Errorf("B_value %v, want 500", b)
		}
	})
	t.Run("a number that is not one is no number", func(t *testing.T) {
		tags := siemensTags("NaN")
		h, err := ParseCSA(csaBytes(CSA2, tags))
		if err != nil {
			t.Fatal(err)
		}
		if _, ok := h.Float(CSABValue); ok {
			t.Error("NaN read as a b-value")
		}
	})
}

func TestParseCSARefusesBrokenHeaders(t *testing.T) {
	good := csaBytes(CSA2, siemensTags("1000"))
	le := binary.LittleEndian
	patch := func(off int, v uint32) []byte {
		b := bytes.Clone(good)
		le.PutUint32(b[off:], v)
		return b
	}
	const firstTag = 16
	firstItem := firstTag + 84
	cases := []struct {
		name string
		b    []byte
	}{
		{"an empty value", nil},
		{"a signature alone", []byte("SV10\x04\x03\x02\x01")},
		{"no tags", patch(8, 0)},
		{"more tags than the cap", patch(8, maxCSATags+1)},
		{"more tags than bytes", patch(8, 500)},
		{"a wrong check word after the count", patch(12, 78)},
		{"a wrong check word after a tag", patch(firstTag+80, 12)},
		{"more items than the cap", patch(firstTag+76, maxCSAItems+1)},
		{"a negative item count", patch(firstTag+76, 0xFFFFFFFF)},
		{"an item longer than the header", patch(firstItem+4, 1<<20)},
		{"a negative item length", patch(firstItem+4, 0xFFFFFFF0)},
		{"a negative value multiplicity", patch(firstTag+64, 0xFFFFFFFF)},
	}
	for _, c := range cases {
		t.Run(c.name+" is an error", func(t *testing.T) {
			h, err := ParseCSA(c.b)
			if !errors.Is(err, ErrCSA) || h != nil {
				t.Fatalf("got %v, %v; want ErrCSA", h, err)
			}
		})
	}
	t.Run("every truncation is an error or a shorter header, never a panic", func(t *testing.T) {
		for n := range len(good) {
			h, err := ParseCSA(good[:n])
			if err == nil && h == nil {
				t.Fatalf("%d bytes: no header and no error", n)
			}
			if err != nil && !errors.Is(err, ErrCSA) {
				t.Fatalf("%d bytes: %v", n, err)
			}
		}
	})
	t.Run("a CSA1 length past the end ends the tag with an empty value, as SPM does", func(t *testing.T) {
		b := csaBytes(CSA1, []csaTag{{name: "Only", vm: 1, vr: "LO", items: []string{"x"}}})
		le.PutUint32(b[8+84:], 1<<20) // x0 of the one item
		h, err := ParseCSA(b)
		if err != nil {
			t.Fatal(err)
		}
		if e, _ := h.Lookup("Only"); !slices.Equal(e.Values, []string{""}) {
			t.Errorf("values %q, want one empty", e.Values)
		}
	})
}

// nibabelData is the folder of test files of Debian's python3-nibabel.
const nibabelData = "/usr/lib/python3/dist-packages/nibabel/nicom/tests/data"

// needNibabelFile returns the path of one of nibabel's test files: a
// missing file fails the test under CI=true and skips it elsewhere,
// naming the package (the house rule for outside tools).
func needNibabelFile(t testing.TB, name string) string {
	t.Helper()
	p := filepath.Join(nibabelData, name)
	if _, err := os.Stat(p); err != nil {
		msg := p + " is missing: install the Debian package python3-nibabel (" + err.Error() + ")"
		if os.Getenv("CI") == "true" {
			t.Fatal(msg)
		}
		t.Skip(msg)
	}
	return p
}

// TestParseCSAReadsNibabelHeaders reads the raw CSA image headers
// nibabel ships (csa2_b0.bin, csa2_b1000.bin). Expected values from
// nibabel's own nicom/tests/test_csareader.py: type 2, 83 tags,
// NumberOfImagesInMosaic 48, AcquisitionMatrixText "128p*128"
// (test_csas0, test_csa_params); B_value 0 with no B_matrix and no
// gradient, and B_value 1000 with a 6-value B_matrix and a unit gradient
// (test_csa_params); a unit SliceNormalVector (test_csa_params).
func TestParseCSAReadsNibabelHeaders(t *testing.T) {
	for _, c := range []struct {
		file string
		b    float64
	}{{"csa2_b0.bin", 0}, {"csa2_b1000.bin", 1000}} {
		t.Run(c.file+" reads as nibabel's tests say", func(t *testing.T) {
			data, err := os.ReadFile(needNibabelFile(t, c.file))
			if err != nil {
				t.Fatal(err)
			}
			h, err := ParseCSA(data)
			if err != nil {
				t.Fatal(err)
			}
			if h.Layout != CSA2 || len(h.Elements) != 83 { // test_csas0
				t.Errorf("layout %v with %d tags, want CSA2 with 83", h.Layout, len(h.Elements))
			}
			if n, _ := h.Int(CSAMosaicImages); n != 48 { // test_csas0, test_csa_params
				t.Errorf("NumberOfImagesInMosaic %d, want 48", n)
			}
			if s := h.Text(csaAcquisitionText); s != "128p*128" { // test_csa_params
				t.Errorf("AcquisitionMatrixText %q, want 128p*128", s)
			}
			if b, ok := h.Float(CSABValue); !ok || b != c.b { // test_csa_params
				t.Errorf("B_value %v %v, want %v", b, ok, c.b)
			}
			sn, ok := h.Vector(CSASliceNormal, 3)
			if !ok || !unitish(sn) { // test_csa_params: unit norm
				t.Errorf("SliceNormalVector %v %v, want a unit vector", sn, ok)
			}
			g, gok := h.Vector(CSAGradient, 3)
			_, bok := h.Vector(CSABMatrix, 6)
			if c.b == 0 && (gok || bok) { // test_csa_params: get_g_vector and get_b_matrix are None
				t.Errorf("b0 header has gradient %v or a B_matrix", g)
			}
			if c.b == 1000 && (!gok || !unitish(g) || !bok) { // test_csa_params: unit g_vector, 3x3 B from 6 values
				t.Errorf("b1000 header: gradient %v %v, B_matrix %v", g, gok, bok)
			}
		})
	}
}

// FuzzCSA feeds ParseCSA arbitrary bytes, seeded from the synthetic
// headers of both layouts: it must never panic, and a header it accepts
// must hold what it claims.
func FuzzCSA(f *testing.F) {
	for _, layout := range []CSALayout{CSA1, CSA2} {
		f.Add(csaBytes(layout, siemensTags("1000")))
		f.Add(csaBytes(layout, siemensTags("0")))
		f.Add(csaBytes(layout, []csaTag{{name: "A", vm: 0, vr: "LT", items: []string{"x", "yy", "zzz"}}}))
	}
	f.Fuzz(func(t *testing.T, b []byte) {
		h, err := ParseCSA(b)
		if err != nil {
			if !errors.Is(err, ErrCSA) || h != nil {
				t.Fatalf("error %v with header %v", err, h)
			}
			return
		}
		if len(h.Elements) == 0 || len(h.Elements) > maxCSATags {
			t.Fatalf("%d elements accepted", len(h.Elements))
		}
		for _, e := range h.Elements {
			if len(e.Values) > maxCSAItems {
				t.Fatalf("%d values accepted", len(e.Values))
			}
			h.Floats(e.Name)
			h.Int(e.Name)
		}
	})
}

// BenchmarkParseCSA parses nibabel's CSA image header of a Siemens DWI
// mosaic (csa2_b1000.bin, 83 tags) and reads the diffusion values.
func BenchmarkParseCSA(b *testing.B) {
	data, err := os.ReadFile(needNibabelFile(b, "csa2_b1000.bin"))
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	for b.Loop() {
		h, err := ParseCSA(data)
		if err != nil {
			b.Fatal(err)
		}
		if _, ok := h.Float(CSABValue); !ok {
			b.Fatal("no B_value")
		}
		h.Vector(CSAGradient, 3)
	}
}
