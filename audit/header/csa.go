package header

// This file parses a Siemens CSA header: the byte string held by the
// private elements "CSA Image Header Info" (0029,xx10) and "CSA Series
// Header Info" (0029,xx20) of the block reserved by private creator
// "SIEMENS CSA HEADER" (siemens.go finds them). The layout is not in
// any standard; it is described publicly by nibabel's documentation
// (doc/source/dicom/siemens_csa.rst, after SPM's spm_dicom_headers.m)
// and read the same way by nibabel's nicom/csareader.py:
//
//	CSA2: "SV10", 4 unused bytes, then the CSA1 layout below
//	CSA1: n_tags uint32, a check word (77) uint32, then per tag
//	      name [64]byte NUL-terminated, vm int32, vr [4]byte,
//	      syngodt int32, nitems int32, a check word (77 or 205) int32,
//	      then nitems items, each 4 int32 (lengths) followed by the
//	      value, padded to a multiple of 4 bytes
//
// Everything is little-endian whatever the transfer syntax. Values are
// text; numbers are read from the text where asked.

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"math"
	"strconv"
	"strings"
)

// CSALayout is which of the two CSA header layouts a header has.
type CSALayout int

const (
	// CSA1 is the older layout, without a signature.
	CSA1 CSALayout = 1
	// CSA2 starts with the signature "SV10".
	CSA2 CSALayout = 2
)

// Limits of the CSA parser.
const (
	// maxCSATags caps the tags of one header and maxCSAItems the items of
	// one tag: nibabel's reader refuses more than 1000 of either
	// (csareader.py MAX_CSA_ITEMS). Real image headers hold about 80-100
	// tags and series headers about 65-120 (nibabel's test files have 83
	// and 65, test_csareader.py), each with a handful of items.
	maxCSATags  = 1000
	maxCSAItems = 1000

	csaNameLen  = 64 // the NUL-terminated tag name
	csaTagLen   = csaNameLen + 4*5
	csaItemHead = 16 // four int32 before each item's value

	// csaCheck is the check word after n_tags and (or 205) after each
	// tag's nitems (nibabel's siemens_csa.rst: "apparently has value 77",
	// "apparently either 77 or 205").
	csaCheck    = 77
	csaCheckAlt = 205
)

// CSAElement is one tag of a CSA header.
type CSAElement struct {
	Name    string
	VM      int    // value multiplicity as declared; 0 means "as many as there are items"
	VR      string // a DICOM VR code such as "DS", "IS", "FD", "LT", "CS"
	SyngoDT int
	// Values are the item values, up to VM of them (all items when VM
	// is 0), as text with the NUL terminator and surrounding spaces
	// removed. Numeric tags often carry empty items after their values.
	Values []string
}

// CSAHeader is a parsed CSA header.
type CSAHeader struct {
	Layout   CSALayout
	Elements []CSAElement
}

// ParseCSA parses a CSA header of either layout. It never panics and
// reads nothing outside b; a length that runs past the end, a count
// past its cap or a wrong check word is an error wrapping ErrCSA.
func ParseCSA(b []byte) (*CSAHeader, error) {
	p := csaParser{b: b}
	h := &CSAHeader{Layout: CSA1}
	if len(b) >= 4 && string(b[:4]) == "SV10" {
		h.Layout = CSA2
		p.pos = 8 // signature and 4 unused bytes
	}
	n, err := p.u32("number of tags")
	if err != nil {
		return nil, err
	}
	if n == 0 || n > maxCSATags {
		return nil, csaErrorf("%d tags (want 1..%d)", n, maxCSATags)
	}
	check, err := p.u32("check word")
	if err != nil {
		return nil, err
	}
	if check != csaCheck {
		return nil, csaErrorf("check word %d after the tag count (want %d)", check, csaCheck)
	}
	h.Elements = make([]CSAElement, 0, n)
	firstItems := -1 // nitems of the first tag: CSA1 lengths are offset by it
	for i := 0; i < int(n); i++ {
		e, nitems, err := p.tag(i)
		if err != nil {
			return nil, err
		}
		if firstItems < 0 {
			firstItems = nitems
		}
		if err := p.items(&e, nitems, h.Layout, firstItems); err != nil {
			return nil, err
		}
		h.Elements = append(h.Elements, e)
	}
	return h, nil
}

// csaParser reads a CSA header with bounds checks.
type csaParser struct {
	b   []byte
	pos int
}

func csaErrorf(format string, args ...any) error {
	return fmt.Errorf("%w: %s", ErrCSA, fmt.Sprintf(format, args...))
}

func (p *csaParser) u32(what string) (uint32, error) {
	if len(p.b)-p.pos < 4 {
		return 0, csaErrorf("%s at byte %d runs past the end (%d bytes)", what, p.pos, len(p.b))
	}
	v := binary.LittleEndian.Uint32(p.b[p.pos:])
	p.pos += 4
	return v, nil
}

func (p *csaParser) i32(what string) (int, error) {
	v, err := p.u32(what)
	return int(int32(v)), err
}

// tag reads one tag's fixed part and returns its nitems.
func (p *csaParser) tag(i int) (CSAElement, int, error) {
	if len(p.b)-p.pos < csaTagLen {
		return CSAElement{}, 0, csaErrorf("tag %d at byte %d runs past the end (%d bytes)", i, p.pos, len(p.b))
	}
	var e CSAElement
	e.Name = csaText(p.b[p.pos : p.pos+csaNameLen])
	p.pos += csaNameLen
	e.VM, _ = p.i32("vm")
	e.VR = csaText(p.b[p.pos : p.pos+4])
	p.pos += 4
	e.SyngoDT, _ = p.i32("syngodt")
	nitems, _ := p.i32("nitems")
	check, _ := p.i32("check word")
	switch {
	case check != csaCheck && check != csaCheckAlt:
		return e, 0, csaErrorf("tag %d (%q): check word %d (want %d or %d)", i, e.Name, check, csaCheck, csaCheckAlt)
	case nitems < 0 || nitems > maxCSAItems:
		return e, 0, csaErrorf("tag %d (%q): %d items (want 0..%d)", i, e.Name, nitems, maxCSAItems)
	case e.VM < 0 || e.VM > maxCSAItems:
		return e, 0, csaErrorf("tag %d (%q): value multiplicity %d (want 0..%d)", i, e.Name, e.VM, maxCSAItems)
	}
	return e, nitems, nil
}

// items reads the nitems items of e. The item length is the second of
// the four int32 in CSA2, and the first minus the first tag's nitems in
// CSA1 (nibabel's siemens_csa.rst, after SPM). A CSA1 length that is
// negative or runs past the end ends the tag's items with an empty value,
// as both of those readers do; in CSA2 it is an error (nibabel raises
// CSAReadError there too).
func (p *csaParser) items(e *CSAElement, nitems int, layout CSALayout, firstItems int) error {
	want := e.VM
	if want == 0 {
		want = nitems
	}
	for j := 0; j < nitems; j++ {
		if len(p.b)-p.pos < csaItemHead {
			return csaErrorf("tag %q item %d at byte %d runs past the end (%d bytes)", e.Name, j, p.pos, len(p.b))
		}
		var x [4]int
		for k := range x {
			x[k], _ = p.i32("item length")
		}
		n := x[1]
		if layout == CSA1 {
			n = x[0] - firstItems
		}
		if n < 0 || n > len(p.b)-p.pos {
			if layout == CSA1 {
				if j < want {
					e.Values = append(e.Values, "")
				}
				return nil
			}
			return csaErrorf("tag %q item %d: length %d at byte %d runs past the end (%d bytes)", e.Name, j, n, p.pos, len(p.b))
		}
		if j < want {
			e.Values = append(e.Values, csaText(p.b[p.pos:p.pos+n]))
		}
		// The value is padded to a multiple of 4 bytes; the last item's
		// padding may be cut off at the end of the element.
		p.pos += min(n+(4-n%4)%4, len(p.b)-p.pos)
	}
	return nil
}

// csaText is the text of a NUL-terminated value (nibabel's nt_str),
// read as ISO 8859-1 like nibabel does, spaces around it removed.
func csaText(b []byte) string {
	for i, c := range b {
		if c == 0 {
			b = b[:i]
			break
		}
	}
	b = bytes.TrimSpace(b)
	ascii := true
	for _, c := range b {
		if c >= 0x80 {
			ascii = false
			break
		}
	}
	if ascii {
		return string(b)
	}
	var s strings.Builder
	for _, c := range b {
		s.WriteRune(rune(c)) // ISO 8859-1 is the first 256 code points
	}
	return strings.TrimSpace(s.String())
}

// Lookup returns the element named name.
func (h *CSAHeader) Lookup(name string) (CSAElement, bool) {
	if h == nil {
		return CSAElement{}, false
	}
	for _, e := range h.Elements {
		if e.Name == name {
			return e, true
		}
	}
	return CSAElement{}, false
}

// Text returns the first value of element name, "" when absent.
func (h *CSAHeader) Text(name string) string {
	e, ok := h.Lookup(name)
	if !ok || len(e.Values) == 0 {
		return ""
	}
	return e.Values[0]
}

// Floats returns the numeric values of element name: its values up to
// the first empty one, each parsed as a number. It returns nil when the
// element is absent, has no value, or holds a value that is not a
// finite number.
func (h *CSAHeader) Floats(name string) []float64 {
	e, ok := h.Lookup(name)
	if !ok {
		return nil
	}
	var out []float64
	for _, s := range e.Values {
		if s == "" {
			break
		}
		v, err := strconv.ParseFloat(s, 64)
		if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
			return nil
		}
		out = append(out, v)
	}
	return out
}

// Float returns the first numeric value of element name.
func (h *CSAHeader) Float(name string) (float64, bool) {
	v := h.Floats(name)
	if len(v) == 0 {
		return 0, false
	}
	return v[0], true
}

// Int returns the first value of element name as an integer; false
// when absent or not a whole number that fits an int32.
func (h *CSAHeader) Int(name string) (int, bool) {
	v, ok := h.Float(name)
	if !ok || v != math.Trunc(v) || math.Abs(v) > math.MaxInt32 {
		return 0, false
	}
	return int(v), true
}

// Vector returns the numeric values of element name when there are
// exactly n of them.
func (h *CSAHeader) Vector(name string, n int) ([]float64, bool) {
	v := h.Floats(name)
	if len(v) != n {
		return nil, false
	}
	return v, true
}
