package header

import (
	"errors"
	"fmt"
	"math"
	"strings"

	"dwiaudit/audit/dwi"
)

// ValueKind says how a private source's value is encoded: one of the
// binary or text VRs of PS3.5 6.2, or ValueText for a number written
// somewhere inside free text.
type ValueKind int

const (
	ValueInvalid ValueKind = iota
	ValueFD                // 64-bit IEEE float
	ValueFL                // 32-bit IEEE float
	ValueDS                // decimal string, backslash-separated values
	ValueIS                // integer string, backslash-separated values
	ValueSL                // signed 32-bit
	ValueUL                // unsigned 32-bit
	ValueSS                // signed 16-bit
	ValueUS                // unsigned 16-bit
	ValueText              // the numbers found in a text value (LO, SH, LT, UN bytes...), Index counting them
)

var valueKindNames = [...]string{
	ValueInvalid: "invalid", ValueFD: "FD", ValueFL: "FL", ValueDS: "DS", ValueIS: "IS",
	ValueSL: "SL", ValueUL: "UL", ValueSS: "SS", ValueUS: "US", ValueText: "text",
}

func (k ValueKind) String() string {
	if k < 0 || int(k) >= len(valueKindNames) {
		return fmt.Sprintf("ValueKind(%d)", int(k))
	}
	return valueKindNames[k]
}

// ParseValueKind reads the names String gives ("FD", "DS", "text", ...),
// case-insensitively.
func ParseValueKind(s string) (ValueKind, error) {
	for k, name := range valueKindNames {
		if k != int(ValueInvalid) && strings.EqualFold(s, name) {
			return ValueKind(k), nil
		}
	}
	return ValueInvalid, fmt.Errorf("%w: value kind %q (want FD, FL, DS, IS, SL, UL, SS, US or text)", ErrInvalidOptions, s)
}

// MarshalText and UnmarshalText let a configuration file name the kind.
func (k ValueKind) MarshalText() ([]byte, error) { return []byte(k.String()), nil }

func (k *ValueKind) UnmarshalText(b []byte) error {
	v, err := ParseValueKind(string(b))
	if err != nil {
		return err
	}
	*k = v
	return nil
}

// width is the size of one binary value, 0 for text kinds.
func (k ValueKind) width() int {
	switch k {
	case ValueFD:
		return 8
	case ValueFL, ValueSL, ValueUL:
		return 4
	case ValueSS, ValueUS:
		return 2
	}
	return 0
}

// PrivateSource tells where a scanner keeps the b-value in a private
// element when it does not fill Diffusion b-value (0018,9087).
//
// A private element is found through its private creator (PS3.5 7.8.1):
// the element (Group,00xx), xx in 10..FF, holds the Creator string and
// reserves the block (Group,xx00)-(Group,xxFF) for it; the value sits at
// (Group,xx<<8|Element). The block number xx varies from file to file, so
// a source names the creator, never a full tag.
//
// Sources are configured per site; none is shipped. An example in
// general words: a creator "ACME DIFFUSION 1" in group 0019, offset 0x0C,
// read as IS, Index 0, Scale 1.
type PrivateSource struct {
	Name    string    // label, used in Frame.BValueSource ("private:<Name>") and errors
	Creator string    // private creator value, compared without its padding
	Group   uint16    // odd group (PS3.5 7.8.1)
	Element uint8     // offset within the creator's block: the low byte ee of (gggg,xxee)
	Read    ValueKind // how the value is encoded
	Index   int       // which value of a multi-valued element (0 first); for ValueText, which number in the text
	Scale   float64   // multiplies the value, after Offset, to give s/mm^2; 0 means 1
	// Offset is subtracted from the value before Scale: some scanners
	// add a constant to the b-value (1e9 on some versions of one maker,
	// docs/makers.md). 0 subtracts nothing.
	Offset float64
	// Gradient, when set, says where the same scanner keeps the
	// gradient direction; it is read for images whose b-value this
	// source gave and whose standard attributes hold no direction.
	Gradient *GradientSource
}

// GradientSource tells where a scanner keeps the diffusion gradient
// direction in private elements: one element holding three values, or
// three elements holding one component each, in the block of a private
// creator (PS3.5 7.8.1).
type GradientSource struct {
	Creator string    // "" means the PrivateSource's
	Group   uint16    // 0 means the PrivateSource's
	Element []uint8   // one offset (three values) or three offsets (x, y, z)
	Read    ValueKind // how the values are encoded
	// ImageAxes says the components are along the image's rows,
	// columns and slice normal, and are to be turned into patient axes
	// with its Image Orientation (Patient); otherwise they are patient
	// axes (LPS, PS3.3 C.7.6.2.1.1), as Diffusion Gradient Orientation
	// (0018,9089) is.
	ImageAxes bool
}

// validate reports every problem of the gradient source of p.
func (g *GradientSource) validate(bad func(format string, args ...any)) {
	group := g.Group
	if group != 0 && (group%2 == 0 || group <= 0x0007 || group == 0xFFFF) {
		bad("Gradient.Group %04X is not a private group", group)
	}
	if n := len(g.Element); n != 1 && n != 3 {
		bad("Gradient.Element has %d offsets (want 1 element of three values, or 3 elements)", n)
	}
	if g.Read <= ValueInvalid || g.Read > ValueText {
		bad("Gradient.Read is not set")
	}
}

// Validate reports every problem of the source at once.
func (p PrivateSource) Validate() error {
	var errs []error
	bad := func(format string, args ...any) {
		errs = append(errs, fmt.Errorf("%w: private source %q: %s", ErrInvalidOptions, p.Name, fmt.Sprintf(format, args...)))
	}
	if p.Name == "" {
		bad("Name is empty")
	}
	if strings.TrimSpace(p.Creator) == "" {
		bad("Creator is empty")
	}
	// PS3.5 7.8.1: private groups are odd, and 0001, 0003, 0005, 0007 and
	// FFFF are not available.
	if p.Group%2 == 0 || p.Group <= 0x0007 || p.Group == 0xFFFF {
		bad("Group %04X is not a private group", p.Group)
	}
	if p.Read <= ValueInvalid || p.Read > ValueText {
		bad("Read is not set")
	}
	if p.Index < 0 {
		bad("Index %d is negative", p.Index)
	}
	if math.IsNaN(p.Scale) || math.IsInf(p.Scale, 0) || p.Scale < 0 {
		bad("Scale %v is not a positive number", p.Scale)
	}
	if math.IsNaN(p.Offset) || math.IsInf(p.Offset, 0) {
		bad("Offset %v is not a number", p.Offset)
	}
	if p.Gradient != nil {
		p.Gradient.validate(bad)
	}
	return errors.Join(errs...)
}

// ExtractOptions configures ExtractFile and Extract.
type ExtractOptions struct {
	// PrivateSources are tried in order when an image has no standard
	// b-value.
	PrivateSources []PrivateSource
	// LoadPixels reads the pixel values into Frame.Pixels. Without it
	// only the header is read (and the pixel data length still checked).
	LoadPixels bool
	// CallingAETitle is the AE title the instance came from, copied into
	// Frame.Scanner.
	CallingAETitle string
	// ScannerLabel maps a scanner's identity to its configured label
	// (dwi.Scanner.Label); nil leaves the label empty.
	ScannerLabel func(dwi.Scanner) string
	// Makers are the maker readers tried on images whose standard
	// attributes and private sources leave the b-value or direction
	// unknown (makers.go). Nil means DefaultMakers(), on with no
	// configuration; an empty, non-nil list turns them off.
	Makers []MakerReader
}

func (o ExtractOptions) validate() error {
	var errs []error
	for _, p := range o.PrivateSources {
		errs = append(errs, p.Validate())
	}
	for i := range o.Makers {
		errs = append(errs, o.Makers[i].validate())
	}
	return errors.Join(errs...)
}
