package header

import (
	"bufio"
	"bytes"
	"compress/flate"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"strconv"
	"strings"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"
	"github.com/suyashkumar/dicom/pkg/uid"

	"dwiaudit/scp/part10"
)

// Identity is what identifies an instance and places it in its study,
// series and scanner: the attributes the store indexes. Text values are
// as stored, multiple values joined with a backslash, padding removed;
// an absent attribute is "" (or 0).
type Identity struct {
	TransferSyntaxUID string // from the file meta (0002,0010)

	SOPClassUID         string // (0008,0016)
	SOPInstanceUID      string // (0008,0018)
	StudyInstanceUID    string // (0020,000D)
	SeriesInstanceUID   string // (0020,000E)
	FrameOfReferenceUID string // (0020,0052)

	StudyDate         string // (0008,0020) DA, YYYYMMDD
	StudyTime         string // (0008,0030) TM
	AccessionNumber   string // (0008,0050)
	Modality          string // (0008,0060)
	SeriesDescription string // (0008,103E)
	SeriesNumber      int    // (0020,0011) IS; 0 when absent or not a number
	InstanceNumber    int    // (0020,0013) IS; 0 when absent or not a number

	PatientName string // (0010,0010) PN: an identifier, never log it
	PatientID   string // (0010,0020): an identifier, never log it

	InstitutionName    string // (0008,0080)
	Manufacturer       string // (0008,0070)
	StationName        string // (0008,1010)
	DeviceSerialNumber string // (0018,1000)
}

// readBufferSize is the read buffer of the file: big enough that walking
// element headers costs few system calls, small enough to be nothing
// beside an association's PDU buffer.
const readBufferSize = 32 << 10

// ReadFile reads the Identity of the Part 10 file at path. It never
// panics and never reads the pixel data. Errors wrap ErrNotPart10,
// ErrUnknownTransferSyntax or ErrMalformed, or are I/O errors.
func ReadFile(path string) (Identity, error) {
	f, err := os.Open(path)
	if err != nil {
		return Identity{}, err
	}
	defer f.Close()
	info, err := f.Stat()
	if err != nil {
		return Identity{}, err
	}

	br := bufio.NewReaderSize(f, readBufferSize)
	meta, off, err := part10.ReadMeta(br)
	if err != nil {
		return Identity{}, fmt.Errorf("%w: %w", ErrNotPart10, err)
	}
	ts := meta.TransferSyntaxUID
	bo, implicit, err := uid.ParseTransferSyntaxUID(ts)
	if err != nil {
		// The library would go on with a nil byte order and panic.
		return Identity{}, fmt.Errorf("%w: %q", ErrUnknownTransferSyntax, ts)
	}

	// Check every length first (bounds.go), and find where the region
	// the parser needs ends.
	w := &walker{r: br, bo: bo, implicit: implicit, pos: off, stopAtGroup: true}
	if ts != uid.DeflatedExplicitVRLittleEndian {
		limit := info.Size()
		switch err := w.elements(info.Size(), false, 0, true); {
		case errors.Is(err, errStop):
			limit = w.stop
		case err != nil:
			return Identity{}, err
		}
		if _, err := f.Seek(0, io.SeekStart); err != nil {
			return Identity{}, err
		}
		return identify(f, limit, ts)
	}

	// PS3.5 A.5: after the file meta the data set is one raw deflate
	// stream; offsets in it mean nothing in the file. The header region
	// is inflated into memory (bounded by maxInflatedRegion) and given
	// to the parser behind a file meta that names Explicit VR Little
	// Endian, which is what the inflated bytes are.
	region := &cappedBuffer{max: maxInflatedRegion + readBufferSize}
	w.r = bufio.NewReaderSize(io.TeeReader(flate.NewReader(br), region), readBufferSize)
	w.pos = 0
	end := int64(math.MaxInt64)
	switch err := w.elements(end, false, 0, true); {
	case errors.Is(err, errStop):
		end = w.stop
	case err != nil:
		return Identity{}, err
	default:
		end = w.pos
	}
	if end > maxInflatedRegion {
		return Identity{}, malformedf("deflated header region inflates past %d bytes", maxInflatedRegion)
	}
	meta.TransferSyntaxUID = uid.ExplicitVRLittleEndian
	var head bytes.Buffer
	if err := part10.WriteHeader(&head, meta); err != nil {
		return Identity{}, fmt.Errorf("%w: %w", ErrNotPart10, err)
	}
	n := int64(head.Len()) + end
	return identify(io.MultiReader(&head, bytes.NewReader(region.b[:end])), n, ts)
}

// maxInflatedRegion bounds the inflated header region of a deflated data
// set: the attributes before group 0028 take kilobytes; 16 MiB is room
// for very large private groups, and stops a deflate bomb (about 1000:1,
// from memory) from growing in memory.
const maxInflatedRegion = 16 << 20

// cappedBuffer collects what it is written, up to max bytes.
type cappedBuffer struct {
	b   []byte
	max int
}

func (c *cappedBuffer) Write(p []byte) (int, error) {
	if len(c.b)+len(p) > c.max {
		return 0, malformedf("deflated header region inflates past %d bytes", maxInflatedRegion)
	}
	c.b = append(c.b, p...)
	return len(p), nil
}

// identify parses the first limit bytes of a Part 10 stream and reads
// the Identity from them.
func identify(r io.Reader, limit int64, ts string) (Identity, error) {
	ds, err := parse(r, limit)
	if err != nil {
		return Identity{}, err
	}
	id := identityOf(ds)
	id.TransferSyntaxUID = ts
	return id, nil
}

// parse runs the data-set library over the first limit bytes of r (a
// header region whose every length the bounds walker has checked),
// turning its panics into ErrMalformed. It is the one place the library
// parses: ReadFile and extraction both go through it.
func parse(r io.Reader, limit int64) (ds dicom.Dataset, err error) {
	defer func() {
		if p := recover(); p != nil {
			err = fmt.Errorf("%w: parser panic: %v", ErrMalformed, p)
		}
	}()
	ds, err = dicom.Parse(r, limit, nil,
		dicom.SkipPixelData(), // nested pixel data (icons); the top-level one is outside the region
		// What the store keeps is what the peer sent; read what is
		// there rather than refuse a missing group length or an
		// unknown character set (those only change how names decode).
		dicom.AllowMissingMetaElementGroupLength(),
		dicom.AllowUnknownSpecificCharacterSet(),
	)
	if err != nil {
		return ds, fmt.Errorf("%w: %w", ErrMalformed, err)
	}
	return ds, nil
}

func identityOf(ds dicom.Dataset) Identity {
	s := func(t tag.Tag) string { return text(ds, t) }
	return Identity{
		SOPClassUID:         s(tag.SOPClassUID),
		SOPInstanceUID:      s(tag.SOPInstanceUID),
		StudyInstanceUID:    s(tag.StudyInstanceUID),
		SeriesInstanceUID:   s(tag.SeriesInstanceUID),
		FrameOfReferenceUID: s(tag.FrameOfReferenceUID),
		StudyDate:           s(tag.StudyDate),
		StudyTime:           s(tag.StudyTime),
		AccessionNumber:     s(tag.AccessionNumber),
		Modality:            s(tag.Modality),
		SeriesDescription:   s(tag.SeriesDescription),
		SeriesNumber:        integer(s(tag.SeriesNumber)),
		InstanceNumber:      integer(s(tag.InstanceNumber)),
		PatientName:         s(tag.PatientName),
		PatientID:           s(tag.PatientID),
		InstitutionName:     s(tag.InstitutionName),
		Manufacturer:        s(tag.Manufacturer),
		StationName:         s(tag.StationName),
		DeviceSerialNumber:  s(tag.DeviceSerialNumber),
	}
}

// text returns a top-level text value, multiple values joined with a
// backslash (their separator, PS3.5 6.4), trailing padding removed
// (space for text, NUL for UI; PS3.5 6.2).
func text(ds dicom.Dataset, t tag.Tag) string {
	e, err := ds.FindElementByTag(t)
	if err != nil || e.Value == nil {
		return ""
	}
	v, ok := e.Value.GetValue().([]string)
	if !ok {
		return ""
	}
	return strings.TrimRight(strings.Join(v, `\`), " \x00")
}

// integer reads an IS value (PS3.5 6.2: an optionally signed decimal,
// leading and trailing spaces allowed); anything else is 0.
func integer(s string) int {
	n, err := strconv.Atoi(strings.TrimSpace(s))
	if err != nil {
		return 0
	}
	return n
}
