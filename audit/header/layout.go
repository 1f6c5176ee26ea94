package header

import (
	"bufio"
	"encoding/binary"
	"io"
)

// Pixel data elements at the top level of an image (PS3.6 Table 6-1,
// group 7FE0), as group<<16|element.
const (
	TagFloatPixelData       = 0x7FE00008 // OF
	TagDoubleFloatPixelData = 0x7FE00009 // OD
	TagPixelData            = tagPixelData
)

// PixelDataLayout says where the pixel data of a data set lies, so that a
// reader can parse the header region before it with the data-set library
// and read the pixel values itself, without the library ever allocating
// them.
type PixelDataLayout struct {
	// Tag is the pixel data element found (TagPixelData,
	// TagFloatPixelData or TagDoubleFloatPixelData); 0 when the data set
	// has none at the top level.
	Tag uint32
	// Offset is where the element's tag starts, ValueOffset where its
	// value starts, both counted like the off given to FindPixelData.
	Offset, ValueOffset int64
	// Length is the value length as declared, or -1 for an undefined
	// length (encapsulated pixel data, PS3.5 A.4).
	Length int64
	// End is the offset just past the element: past its sequence
	// delimiter for encapsulated pixel data.
	End int64
	// Truncated is set when the declared length runs past the end of the
	// data set; End is then the end of the data set.
	Truncated bool
}

// FindPixelData walks the data set in r, which starts at offset off and
// ends at offset end and is encoded with byte order bo and implicit or
// explicit VR, checking the length of every element (and of every item
// and element nested in sequences) against its container, as ReadFile
// does, up to the first top-level pixel data element. The fragments of
// encapsulated pixel data are checked too; what follows the pixel data is
// not read. A pixel data value that runs past end is reported in the
// layout (Truncated), not as an error, so that the caller can say what is
// wrong with the image. Errors wrap ErrMalformed, or are I/O errors.
func FindPixelData(r io.Reader, bo binary.ByteOrder, implicit bool, off, end int64) (PixelDataLayout, error) {
	w := &walker{r: bufio.NewReaderSize(r, readBufferSize), bo: bo, implicit: implicit, pos: off}
	// The top-level loop of walker.elements, with a stop at the pixel
	// data: the value lengths of the pixel data are the caller's to judge.
	for w.pos < end {
		at := w.pos
		t, err := w.tag()
		if err != nil {
			return PixelDataLayout{}, err
		}
		if t == tagItem || t == tagItemDelim || t == tagSequenceDelim {
			return PixelDataLayout{}, malformedf("item tag (%04X,%04X) outside a sequence at byte %d", t>>16, t&0xFFFF, at)
		}
		vr, vl, err := w.vrLength(t)
		if err != nil {
			return PixelDataLayout{}, err
		}
		if w.pos > end {
			return PixelDataLayout{}, malformedf("element (%04X,%04X) at byte %d runs past the data set", t>>16, t&0xFFFF, at)
		}
		if t == TagPixelData || t == TagFloatPixelData || t == TagDoubleFloatPixelData {
			l := PixelDataLayout{Tag: t, Offset: at, ValueOffset: w.pos, Length: int64(vl)}
			switch {
			case vl == undefinedLength:
				l.Length = -1
				if err := w.fragments(end); err != nil {
					return PixelDataLayout{}, err
				}
				l.End = w.pos
			case int64(vl) > end-w.pos:
				l.Truncated = true
				l.End = end
			default:
				l.End = w.pos + int64(vl)
			}
			return l, nil
		}
		if vl != undefinedLength && int64(vl) > end-w.pos {
			return PixelDataLayout{}, malformedf("element (%04X,%04X) at byte %d: length %d runs past the data set", t>>16, t&0xFFFF, at, vl)
		}
		switch {
		case vr == "SQ" || vr == "UN" && vl == undefinedLength:
			err = w.sequence(vl, end, 1)
		case vl == undefinedLength:
			if vr != "OB" && vr != "OW" {
				return PixelDataLayout{}, malformedf("element (%04X,%04X) at byte %d: undefined length for VR %q", t>>16, t&0xFFFF, at, vr)
			}
			err = w.fragments(end)
		default:
			err = w.skip(int64(vl))
		}
		if err != nil {
			return PixelDataLayout{}, err
		}
	}
	return PixelDataLayout{}, nil
}
