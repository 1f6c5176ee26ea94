package header

import (
	"encoding/binary"
	"fmt"
	"math"
	"strconv"
	"strings"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"
)

// level is the elements of one data set level: the top level, or one
// item of a sequence.
type level []*dicom.Element

func (l level) find(t tag.Tag) *dicom.Element {
	for _, e := range l {
		if e.Tag == t {
			return e
		}
	}
	return nil
}

// items returns the items of sequence t, nil when absent or not a
// sequence (an undefined-length UN is read as a sequence too, PS3.5
// 6.2.2).
func (l level) items(t tag.Tag) []level {
	e := l.find(t)
	if e == nil || e.Value == nil {
		return nil
	}
	seq, ok := e.Value.GetValue().([]*dicom.SequenceItemValue)
	if !ok {
		return nil
	}
	out := make([]level, 0, len(seq))
	for _, it := range seq {
		elems, _ := it.GetValue().([]*dicom.Element)
		out = append(out, level(elems))
	}
	return out
}

// item returns the first item of sequence t, nil when there is none.
func (l level) item(t tag.Tag) level {
	if items := l.items(t); len(items) > 0 {
		return items[0]
	}
	return nil
}

// strs returns the values of a text element, padding removed (PS3.5
// 6.2: trailing spaces, NUL for UI); nil when absent. A text element
// stored as UN (or OB) bytes is read as its text.
func (l level) strs(t tag.Tag) []string {
	e := l.find(t)
	if e == nil || e.Value == nil {
		return nil
	}
	var v []string
	switch x := e.Value.GetValue().(type) {
	case []string:
		v = x
	case []byte:
		v = strings.Split(string(x), `\`)
	default:
		return nil
	}
	out := make([]string, len(v))
	for i, s := range v {
		out[i] = strings.Trim(s, " \x00")
	}
	return out
}

// str returns a text value, multiple values joined with a backslash
// (their separator, PS3.5 6.4); "" when absent.
func (l level) str(t tag.Tag) string {
	return strings.Join(l.strs(t), `\`)
}

// floats returns the values of a numeric element (FD, FL, DS, or an
// integer VR), nil when absent or unreadable. kind says how to decode the
// value when it comes as UN bytes (an implicit VR private element, or a
// standard one written as UN by a converter that did not know it).
func (l level) floats(t tag.Tag, kind ValueKind, bo binary.ByteOrder) []float64 {
	e := l.find(t)
	if e == nil {
		return nil
	}
	v, err := numbers(e, kind, bo)
	if err != nil {
		return nil
	}
	return v
}

// float returns the first value of a numeric element.
func (l level) float(t tag.Tag, kind ValueKind, bo binary.ByteOrder) (float64, bool) {
	v := l.floats(t, kind, bo)
	if len(v) == 0 {
		return 0, false
	}
	return v[0], true
}

// integer returns the first value of an integer element (US, UL, SS,
// SL, IS).
func (l level) integer(t tag.Tag, kind ValueKind, bo binary.ByteOrder) (int, bool) {
	v, ok := l.float(t, kind, bo)
	if !ok || v != math.Trunc(v) || math.Abs(v) > math.MaxInt32 {
		return 0, false
	}
	return int(v), true
}

// numbers reads the values of e as numbers. Values the parser already
// typed (FD, FL, integer VRs) are taken as they are; text values are
// parsed as decimal strings (PS3.5 6.2 DS and IS), or scanned for numbers
// when kind is ValueText; bytes (UN, OB) are decoded as kind.
func numbers(e *dicom.Element, kind ValueKind, bo binary.ByteOrder) ([]float64, error) {
	if e.Value == nil {
		return nil, fmt.Errorf("no value")
	}
	switch x := e.Value.GetValue().(type) {
	case []float64:
		return finite(x)
	case []int:
		out := make([]float64, len(x))
		for i, n := range x {
			out[i] = float64(n)
		}
		return out, nil
	case []string:
		if kind == ValueText {
			return textNumbers(strings.Join(x, `\`)), nil
		}
		return decimals(x)
	case []byte:
		return decodeBytes(x, kind, bo)
	}
	return nil, fmt.Errorf("value of VR %s is not a number", e.RawValueRepresentation)
}

// finite refuses NaN and infinities: no attribute the audit reads may
// hold them, and they would poison every comparison downstream.
func finite(v []float64) ([]float64, error) {
	for _, f := range v {
		if math.IsNaN(f) || math.IsInf(f, 0) {
			return nil, fmt.Errorf("value %v is not a finite number", f)
		}
	}
	return v, nil
}

// decimals parses DS or IS values (PS3.5 6.2: leading and trailing
// spaces allowed). strconv also reads "NaN" and "Inf", which DS does not
// allow; finite refuses them.
func decimals(v []string) ([]float64, error) {
	out := make([]float64, 0, len(v))
	for _, s := range v {
		s = strings.Trim(s, " \x00")
		if s == "" {
			continue
		}
		f, err := strconv.ParseFloat(s, 64)
		if err != nil {
			return nil, fmt.Errorf("%q is not a decimal string", s)
		}
		out = append(out, f)
	}
	return finite(out)
}

// decodeBytes decodes a value the parser left as bytes.
func decodeBytes(b []byte, kind ValueKind, bo binary.ByteOrder) ([]float64, error) {
	w := kind.width()
	if w == 0 {
		s := strings.Trim(string(b), " \x00")
		if kind == ValueText {
			return textNumbers(s), nil
		}
		return decimals(strings.Split(s, `\`))
	}
	if len(b)%w != 0 {
		return nil, fmt.Errorf("%d bytes are not a whole number of %s values", len(b), kind)
	}
	out := make([]float64, len(b)/w)
	for i := range out {
		p := b[i*w:]
		switch kind {
		case ValueFD:
			out[i] = math.Float64frombits(bo.Uint64(p))
		case ValueFL:
			out[i] = float64(math.Float32frombits(bo.Uint32(p)))
		case ValueSL:
			out[i] = float64(int32(bo.Uint32(p)))
		case ValueUL:
			out[i] = float64(bo.Uint32(p))
		case ValueSS:
			out[i] = float64(int16(bo.Uint16(p)))
		case ValueUS:
			out[i] = float64(bo.Uint16(p))
		}
	}
	return finite(out)
}

// textNumbers returns the decimal numbers written in free text, in
// order: an optional sign, digits with an optional fraction, an optional
// exponent ("b=1000", "b1000t", "DIFF 1.0e3").
func textNumbers(s string) []float64 {
	var out []float64
	digit := func(i int) bool { return i < len(s) && s[i] >= '0' && s[i] <= '9' }
	for i := 0; i < len(s); {
		start := i
		if (s[i] == '-' || s[i] == '+') && (digit(i+1) || i+2 < len(s) && s[i+1] == '.' && digit(i+2)) {
			i++
		}
		if !digit(i) && !(s[i] == '.' && digit(i+1)) {
			i = start + 1
			continue
		}
		for digit(i) {
			i++
		}
		if i < len(s) && s[i] == '.' {
			i++
			for digit(i) {
				i++
			}
		}
		if i < len(s) && (s[i] == 'e' || s[i] == 'E') {
			j := i + 1
			if j < len(s) && (s[j] == '-' || s[j] == '+') {
				j++
			}
			if digit(j) {
				for i = j; digit(i); i++ {
				}
			}
		}
		if f, err := strconv.ParseFloat(s[start:i], 64); err == nil && !math.IsInf(f, 0) {
			out = append(out, f)
		}
	}
	return out
}
