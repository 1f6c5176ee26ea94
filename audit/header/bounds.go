package header

import (
	"bufio"
	"compress/flate"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"

	"github.com/suyashkumar/dicom/pkg/tag"

	"dwiaudit/scp/part10"
)

// Limits of the bounds walk.
const (
	// maxDepth bounds sequence nesting. Real objects nest a handful of
	// levels (Enhanced MR: per-frame functional groups, a functional
	// group macro, a code sequence, common practice); 32 leaves room and
	// keeps hostile nesting from exhausting the stack.
	maxDepth = 32

	// lastIdentityGroup is the last group holding an attribute Identity
	// reads: (0020,xxxx), Relationship and geometry. The region handed to
	// the parser ends before the first top-level element of a later group.
	lastIdentityGroup = 0x0020
)

// Item and delimiter tags (PS3.5 7.5), as group<<16|element.
const (
	tagItem          = 0xFFFEE000
	tagItemDelim     = 0xFFFEE00D
	tagSequenceDelim = 0xFFFEE0DD
	tagPixelData     = 0x7FE00010

	undefinedLength = 0xFFFFFFFF // PS3.5 7.1.1
)

// walker checks the element lengths of a data set against the bytes that
// contain them, the way the data-set library will read them, so that the
// library is only ever given data sets in which every length it trusts is
// true. It reads element headers and discards values: memory is one
// buffer however large the data set.
type walker struct {
	r        *bufio.Reader
	bo       binary.ByteOrder
	implicit bool
	pos      int64 // bytes consumed from r, counted from the start of the file (or of the inflated data set)

	// stopAtGroup, when set, ends the top-level walk at the first element
	// of a group above lastIdentityGroup; stop is then its offset.
	stopAtGroup bool
	stop        int64
}

// errStop ends the walk at the region boundary; it never leaves the
// package.
var errStop = errors.New("header: region end")

func malformedf(format string, args ...any) error {
	return fmt.Errorf("%w: %s", ErrMalformed, fmt.Sprintf(format, args...))
}

func (w *walker) read(b []byte) error {
	n, err := io.ReadFull(w.r, b)
	w.pos += int64(n)
	return w.readErr(err)
}

func (w *walker) skip(n int64) error {
	m, err := w.r.Discard(int(n))
	w.pos += int64(m)
	return w.readErr(err)
}

// readErr tells a data set that ends too soon or does not inflate
// (ErrMalformed) from a failing disk (returned as is).
func (w *walker) readErr(err error) error {
	var corrupt flate.CorruptInputError
	switch {
	case err == nil:
		return nil
	case errors.Is(err, io.EOF), errors.Is(err, io.ErrUnexpectedEOF):
		return malformedf("truncated at byte %d", w.pos)
	case errors.As(err, &corrupt):
		return malformedf("deflate stream corrupt: %v", err)
	}
	return err
}

func (w *walker) u16() (uint16, error) {
	var b [2]byte
	if err := w.read(b[:]); err != nil {
		return 0, err
	}
	return w.bo.Uint16(b[:]), nil
}

func (w *walker) u32() (uint32, error) {
	var b [4]byte
	if err := w.read(b[:]); err != nil {
		return 0, err
	}
	return w.bo.Uint32(b[:]), nil
}

func (w *walker) tag() (uint32, error) {
	g, err := w.u16()
	if err != nil {
		return 0, err
	}
	e, err := w.u16()
	if err != nil {
		return 0, err
	}
	return uint32(g)<<16 | uint32(e), nil
}

// longLengthVR reports whether an explicit header with vr has two reserved
// bytes and a 32-bit length as the data-set library reads it (its readVL):
// the PS3.5 7.1.2 set, part10.LongLengthVR, less OV, SV and UV, which the
// library reads with a 16-bit length, plus "NA", its name for a missing
// VR. Mirroring the library, not the standard, is what keeps it safe.
func longLengthVR(vr string) bool {
	switch vr {
	case "NA":
		return true
	case "OV", "SV", "UV":
		return false
	}
	return part10.LongLengthVR(vr)
}

// vrOf is the VR the library assumes for t in an implicit VR data set:
// the dictionary's first, OW for pixel and overlay data, UN for tags it
// does not know (its readVR).
func vrOf(t uint32) string {
	tt := tag.Tag{Group: uint16(t >> 16), Element: uint16(t)}
	info, err := tag.Find(tt)
	if err != nil {
		return "UN"
	}
	if tt == tag.PixelData || tt == tag.OverlayData {
		return "OW"
	}
	return info.VRs[0]
}

// elements walks the elements of one level up to end (an offset), or up
// to an item delimiter when untilDelim is set (end then bounds how far
// that may be). top marks the data set itself, where an inflated stream
// may end at EOF (end is math.MaxInt64 then).
func (w *walker) elements(end int64, untilDelim bool, depth int, top bool) error {
	for {
		if !untilDelim && w.pos >= end {
			return nil
		}
		at := w.pos
		if top && end == math.MaxInt64 {
			if _, err := w.r.Peek(1); errors.Is(err, io.EOF) {
				return nil
			}
		}
		t, err := w.tag()
		if err != nil {
			return err
		}
		if t == tagItemDelim {
			if !untilDelim {
				return malformedf("item delimiter outside an item at byte %d", at)
			}
			_, err := w.u32() // its length, 0 (PS3.5 7.5.2)
			return err
		}
		if t == tagItem || t == tagSequenceDelim {
			return malformedf("item tag (%04X,%04X) outside a sequence at byte %d", t>>16, t&0xFFFF, at)
		}
		if top && w.stopAtGroup && t>>16 > lastIdentityGroup {
			w.stop = at
			return errStop
		}
		vr, vl, err := w.vrLength(t)
		if err != nil {
			return err
		}
		if w.pos > end {
			return malformedf("element (%04X,%04X) at byte %d runs past its container", t>>16, t&0xFFFF, at)
		}
		if vl != undefinedLength && int64(vl) > end-w.pos {
			return malformedf("element (%04X,%04X) at byte %d: length %d runs past its container", t>>16, t&0xFFFF, at, vl)
		}
		switch {
		case t != tagPixelData && (vr == "SQ" || vr == "UN" && vl == undefinedLength):
			if err := w.sequence(vl, end, depth+1); err != nil {
				return err
			}
		case vl == undefinedLength:
			// Encapsulated pixel data, or OB/OW of undefined length:
			// fragments to a sequence delimiter (PS3.5 A.4).
			if t != tagPixelData && vr != "OB" && vr != "OW" {
				return malformedf("element (%04X,%04X) at byte %d: undefined length for VR %q", t>>16, t&0xFFFF, at, vr)
			}
			if err := w.fragments(end); err != nil {
				return err
			}
		default:
			if err := w.skip(int64(vl)); err != nil {
				return err
			}
		}
	}
}

// vrLength reads the VR (explicit) and the value length of the element
// whose tag was just read (PS3.5 7.1.2, 7.1.3).
func (w *walker) vrLength(t uint32) (string, uint32, error) {
	if w.implicit {
		vl, err := w.u32()
		return vrOf(t), vl, err
	}
	var b [2]byte
	if err := w.read(b[:]); err != nil {
		return "", 0, err
	}
	vr := string(b[:])
	if longLengthVR(vr) {
		if err := w.skip(2); err != nil {
			return "", 0, err
		}
		vl, err := w.u32()
		return vr, vl, err
	}
	vl, err := w.u16()
	if vl == 0xFFFF {
		// The library reads a 16-bit FFFF as undefined length.
		return vr, undefinedLength, err
	}
	return vr, uint32(vl), err
}

// sequence walks the items of a sequence of length vl inside a container
// ending at end (PS3.5 7.5).
func (w *walker) sequence(vl uint32, end int64, depth int) error {
	if depth > maxDepth {
		return malformedf("sequences nested deeper than %d", maxDepth)
	}
	untilDelim := vl == undefinedLength
	if !untilDelim {
		end = w.pos + int64(vl)
	}
	for untilDelim || w.pos < end {
		at := w.pos
		t, err := w.tag()
		if err != nil {
			return err
		}
		n, err := w.u32() // item headers are always tag + 32-bit length (PS3.5 7.5)
		if err != nil {
			return err
		}
		if w.pos > end {
			return malformedf("item at byte %d runs past its sequence", at)
		}
		switch {
		case t == tagSequenceDelim && untilDelim:
			return nil
		case t != tagItem:
			return malformedf("(%04X,%04X) at byte %d where an item belongs", t>>16, t&0xFFFF, at)
		case n == undefinedLength:
			if err := w.elements(end, true, depth, false); err != nil {
				return err
			}
		case int64(n) > end-w.pos:
			return malformedf("item at byte %d: length %d runs past its sequence", at, n)
		default:
			if err := w.elements(w.pos+int64(n), false, depth, false); err != nil {
				return err
			}
		}
	}
	if w.pos != end {
		return malformedf("sequence ends at byte %d, its length says %d", w.pos, end)
	}
	return nil
}

// fragments walks the items of an undefined-length OB/OW value up to its
// sequence delimiter (PS3.5 A.4).
func (w *walker) fragments(end int64) error {
	for {
		at := w.pos
		t, err := w.tag()
		if err != nil {
			return err
		}
		n, err := w.u32()
		if err != nil {
			return err
		}
		switch {
		case t == tagSequenceDelim:
			return nil
		case t != tagItem:
			return malformedf("(%04X,%04X) at byte %d where a fragment belongs", t>>16, t&0xFFFF, at)
		case n == undefinedLength || int64(n) > end-w.pos:
			return malformedf("fragment at byte %d: length %d runs past its container", at, n)
		}
		if err := w.skip(int64(n)); err != nil {
			return err
		}
	}
}
