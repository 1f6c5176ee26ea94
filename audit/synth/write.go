package synth

import (
	"bufio"
	"fmt"
	"os"
	"slices"
	"strconv"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"
)

// This file holds the low-level Part 10 writing that WriteSeries and the
// diffusion phantom (package audit/phantom) share.

// SortElements puts elems in ascending tag order, in place. PS3.5 7.1
// wants a data set (and every sequence item) in ascending tag order, and
// suyashkumar's writer keeps the order it is given.
func SortElements(elems []*dicom.Element) {
	slices.SortStableFunc(elems, func(a, b *dicom.Element) int {
		return compareTags(a.Tag, b.Tag)
	})
}

func compareTags(a, b tag.Tag) int {
	if a.Group != b.Group {
		return int(a.Group) - int(b.Group)
	}
	return int(a.Element) - int(b.Element)
}

// WriteFile writes ds, which must hold its File Meta Information with a
// Transfer Syntax UID of Explicit or Implicit VR Little Endian, as a Part
// 10 file at path, removing the file on failure. It does not fsync: what
// it writes are test fixtures, rewritten at will.
func WriteFile(path string, ds dicom.Dataset) (err error) {
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	defer func() {
		if err != nil {
			f.Close()
			os.Remove(path)
		}
	}()
	w := bufio.NewWriterSize(f, 64<<10)
	if err := dicom.Write(w, ds); err != nil {
		return fmt.Errorf("synth: writing %s: %w", path, err)
	}
	if err := w.Flush(); err != nil {
		return err
	}
	return f.Close()
}

// FormatDS formats v as a Decimal String of at most 16 characters (PS3.5
// 6.2), with as many significant digits as fit.
func FormatDS(v float64) string {
	if v == 0 {
		return "0" // and not "-0"
	}
	for prec := 15; prec > 0; prec-- {
		s := strconv.FormatFloat(v, 'g', prec, 64)
		if len(s) <= 16 {
			return s
		}
	}
	return strconv.FormatFloat(v, 'e', 0, 64)
}
