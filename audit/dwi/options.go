package dwi

import (
	"errors"
	"fmt"
	"math"
	"strings"
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
	Scale   float64   // multiplies the value to give s/mm^2; 0 means 1
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
	// (Scanner.Label); nil leaves the label empty.
	ScannerLabel func(Scanner) string
}

func (o ExtractOptions) validate() error {
	var errs []error
	for _, p := range o.PrivateSources {
		errs = append(errs, p.Validate())
	}
	return errors.Join(errs...)
}

// Tolerances say how far header values may differ and still count as the
// same b-value, slice, orientation, pixel spacing or gradient direction.
type Tolerances struct {
	// BValue (s/mm^2) and BValueRelative (a fraction of b) together give
	// the b-value tolerance at b: max(BValue, BValueRelative*b). Sorted
	// b-values whose neighbours are at most that far apart form one
	// volume, whose nominal b-value is their mean.
	BValue, BValueRelative float64
	// SlicePosition (mm) is how far apart two images may lie, along the
	// slice normal or within the plane, and still be the same slice.
	SlicePosition float64
	// Orientation is the largest difference between corresponding Image
	// Orientation (Patient) direction cosines of the same geometry.
	Orientation float64
	// Spacing (mm) is the largest difference between pixel spacings of
	// the same geometry.
	Spacing float64
	// Direction (degrees) is the largest angle between two diffusion
	// gradient directions counted as one direction.
	Direction float64
	// B0Max (s/mm²) is the largest b-value that is a reference (b0)
	// weighting: its images need no gradient direction, and several of
	// them on one slice are repeats.
	B0Max float64
}

// DefaultTolerances returns the tolerances the audit uses unless
// configured otherwise:
//
//   - b-value: max(5 s/mm^2, 2% of b). Stored b-values differ slightly
//     from the nominal (a nominal 900 seen as 895-905, DOMAIN.md, common
//     practice); 2% at b = 900 is 18, three times that spread. The
//     absolute floor of 5 stays below half the smallest step between
//     nominal b-values in use, 10 s/mm^2 at the low end of IVIM protocols
//     (0, 10, 20, 30, ...; common practice), and 2% stays far below the
//     relative step between high b-values in use (800/1000, 1400/1500:
//     7% or more; common practice).
//   - slice position: 0.1 mm, a tenth of the thinnest clinical slices
//     (common practice) and far above the rounding of a DS position
//     (PS3.5 6.2: up to 16 characters, so micrometres or better).
//   - orientation: 0.001 per direction cosine, about 0.06 degrees: at
//     most a quarter pixel at the edge of a 250 mm field of view.
//   - pixel spacing: 0.001 mm, the same quarter pixel over 256 pixels.
//   - gradient direction: 1 degree: gradient directions are stored as FD
//     (PS3.3 C.8.13.5.9), differences from rounding are far smaller, and
//     even 256-direction schemes keep directions several degrees apart
//     (common practice).
//   - b0: b-values up to 50 s/mm² are the reference weighting (common
//     practice: body protocols use b 50 as their b0 to suppress
//     perfusion, DOMAIN.md). Only values within the b-value tolerance of
//     0 (5 s/mm²: a scanner's "b0" stored as 0.002 or 5) are shown as
//     0; a b 50 stays 50, since the ADC is computed against it.
func DefaultTolerances() Tolerances {
	return Tolerances{
		BValue:         5,
		BValueRelative: 0.02,
		SlicePosition:  0.1,
		Orientation:    1e-3,
		Spacing:        1e-3,
		Direction:      1,
		B0Max:          50,
	}
}

// Validate reports every tolerance that is negative or not a number.
func (t Tolerances) Validate() error {
	var errs []error
	for _, f := range []struct {
		name string
		v    float64
	}{
		{"BValue", t.BValue}, {"BValueRelative", t.BValueRelative}, {"SlicePosition", t.SlicePosition},
		{"Orientation", t.Orientation}, {"Spacing", t.Spacing}, {"Direction", t.Direction}, {"B0Max", t.B0Max},
	} {
		if f.v < 0 || math.IsNaN(f.v) || math.IsInf(f.v, 0) {
			errs = append(errs, fmt.Errorf("%w: tolerance %s = %v", ErrInvalidOptions, f.name, f.v))
		}
	}
	return errors.Join(errs...)
}

// bTolerance is the b-value tolerance at b.
func (t Tolerances) bTolerance(b float64) float64 {
	return max(t.BValue, t.BValueRelative*math.Abs(b))
}
