package part10

import (
	"bufio"
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"os"
	"strings"
)

// peeker is satisfied by *bufio.Reader. When r has it, ReadMeta looks at the
// next group number without consuming it.
type peeker interface {
	Peek(n int) ([]byte, error)
}

// source reads the file meta information and counts the bytes it consumed.
// pending holds lookahead bytes already taken from a reader that cannot peek.
type source struct {
	r       io.Reader
	p       peeker
	pos     int64 // offset in the file of the next byte this source returns
	pending []byte
	scratch [lookahead]byte
}

// read fills b completely or reports ErrTruncated.
func (s *source) read(b []byte) error {
	n := copy(b, s.pending)
	s.pending = s.pending[n:]
	if n < len(b) {
		m, err := io.ReadFull(s.r, b[n:])
		n += m
		if err != nil {
			s.pos += int64(n)
			if errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF) {
				return fmt.Errorf("%w at offset %d", ErrTruncated, s.pos)
			}
			return fmt.Errorf("part10: reading at offset %d: %w", s.pos, err)
		}
	}
	s.pos += int64(len(b))
	return nil
}

// peekGroup returns the group number of the next tag without moving pos.
// With a reader that cannot peek, the two bytes are kept in pending and are
// lost to the caller of ReadMeta if they turn out to belong to the data set.
func (s *source) peekGroup() (uint16, error) {
	if len(s.pending) == 0 {
		if s.p != nil {
			b, err := s.p.Peek(lookahead)
			if len(b) < lookahead {
				return 0, s.peekErr(err)
			}
			return binary.LittleEndian.Uint16(b), nil
		}
		n, err := io.ReadFull(s.r, s.scratch[:])
		if n < lookahead {
			return 0, s.peekErr(err)
		}
		s.pending = s.scratch[:]
	}
	if len(s.pending) < lookahead {
		// Only reachable if pending was partly consumed, which read never
		// leaves behind between elements; report rather than panic.
		return 0, fmt.Errorf("%w at offset %d", ErrTruncated, s.pos)
	}
	return binary.LittleEndian.Uint16(s.pending), nil
}

func (s *source) peekErr(err error) error {
	if err == nil || errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF) {
		// A Part 10 file holds a data set after its meta information
		// (PS3.10 7.1), so running out here is a cut file.
		return fmt.Errorf("%w at offset %d: no data set follows", ErrTruncated, s.pos)
	}
	return fmt.Errorf("part10: reading at offset %d: %w", s.pos, err)
}

// ReadMeta reads the preamble, the "DICM" prefix and the File Meta
// Information (group 0002, Explicit VR Little Endian, PS3.10 7.1) from r. It
// returns the meta information and the byte offset in the file at which the
// data set starts.
//
// When File Meta Information Group Length (0002,0000) is present ReadMeta
// reads exactly that many bytes after it, stopping early only if an element
// of another group shows up first (a wrong group length, which other readers
// also tolerate). Without it, ReadMeta reads elements while their group is
// 0002, looking two bytes ahead, so there at least the first two bytes of a
// data set must follow. r is then left at the returned offset if it
// implements Peek (as *bufio.Reader does); otherwise those two lookahead bytes
// have been consumed from r. Callers that go on reading the data set from r
// should pass a *bufio.Reader, or seek to the offset.
//
// Every length is checked against maxValueLength, maxBinaryValueLength and
// maxMetaLength before it is used. Input without the prefix gives
// ErrNotPart10; other faults give the sentinels in errors.go, wrapped in an
// *elementError where one element is at fault.
func ReadMeta(r io.Reader) (Meta, int64, error) {
	s := &source{r: r}
	if p, ok := r.(peeker); ok {
		s.p = p
	}

	var head [headerStart]byte
	if err := s.read(head[:]); err != nil {
		if errors.Is(err, ErrTruncated) {
			return Meta{}, 0, ErrNotPart10
		}
		return Meta{}, 0, err
	}
	// PS3.10 7.1: the preamble's content is not to be relied on; the prefix is.
	if string(head[preambleLength:]) != prefix {
		return Meta{}, 0, ErrNotPart10
	}

	var m Meta
	var end int64 = -1          // offset where the group length says group 0002 ends
	start := int64(headerStart) // where the bytes maxMetaLength counts begin
	first := true
	for {
		if end >= 0 && s.pos >= end {
			break
		}
		group, err := s.peekGroup()
		if err != nil {
			return Meta{}, 0, err
		}
		if group != metaGroup {
			break
		}
		at := s.pos
		e, err := readElement(s)
		if err != nil {
			return Meta{}, 0, err
		}
		if s.pos-start > maxMetaLength {
			return Meta{}, 0, &elementError{Tag: e.Tag, Offset: at,
				Err: fmt.Errorf("%w: more than %d bytes", errMetaTooLong, maxMetaLength)}
		}
		if e.Tag == TagGroupLength {
			if !first {
				return Meta{}, 0, &elementError{Tag: e.Tag, Offset: at, Err: errBadGroupLength}
			}
			if e.VR != "UL" || len(e.Value) != 4 {
				return Meta{}, 0, &elementError{Tag: e.Tag, Offset: at, Err: errBadGroupLength}
			}
			n := binary.LittleEndian.Uint32(e.Value)
			if n > maxMetaLength {
				return Meta{}, 0, &elementError{Tag: e.Tag, Offset: at,
					Err: fmt.Errorf("%w: group length %d", errMetaTooLong, n)}
			}
			start = s.pos
			end = s.pos + int64(n)
			first = false
			continue
		}
		first = false
		if end >= 0 && s.pos > end {
			// The element runs past the declared end of group 0002. Trust
			// the element boundary, which is what a peer reading the group
			// element by element sees, over a short group length.
			end = s.pos
		}
		m.set(e)
	}
	if m.TransferSyntaxUID == "" {
		return Meta{}, 0, ErrNoTransferSyntax
	}
	return m, s.pos, nil
}

// ReadMetaFile reads the meta information of the file at path; see ReadMeta.
func ReadMetaFile(path string) (Meta, int64, error) {
	f, err := os.Open(path)
	if err != nil {
		return Meta{}, 0, err
	}
	defer f.Close()
	// A small buffer: the meta information is a few hundred bytes, and
	// reading it element by element straight from the file would be one
	// system call per element.
	m, off, err := ReadMeta(bufio.NewReaderSize(f, 1024))
	if err != nil {
		return Meta{}, 0, fmt.Errorf("%s: %w", path, err)
	}
	return m, off, nil
}

// LongLengthVR reports whether an explicit VR element header with vr has
// two reserved bytes and a 32-bit value length rather than a 16-bit one
// (PS3.5 7.1.2, Table 7.1-1). It is the one table of them in the module.
func LongLengthVR(vr string) bool {
	switch vr {
	case "OB", "OD", "OF", "OL", "OV", "OW", "SQ", "SV", "UC", "UN", "UR", "UT", "UV":
		return true
	}
	return false
}

// knownVR reports whether vr is one of the value representations PS3.5 6.2
// Table 6.2-1 defines.
func knownVR(vr string) bool {
	switch vr {
	case "AE", "AS", "AT", "CS", "DA", "DS", "DT", "FD", "FL", "IS", "LO", "LT",
		"PN", "SH", "SL", "SS", "ST", "TM", "UI", "UL", "US":
		return true
	}
	return LongLengthVR(vr)
}

// valueLimit is the largest value ReadMeta and AppendHeader accept for vr:
// binary VRs may carry up to maxBinaryValueLength bytes, the rest
// maxValueLength.
func valueLimit(vr string) int {
	switch vr {
	case "OB", "OW", "UN":
		return maxBinaryValueLength
	}
	return maxValueLength
}

// readElement reads one Explicit VR Little Endian element (PS3.5 7.1.2).
func readElement(s *source) (Element, error) {
	at := s.pos
	var h [8]byte
	if err := s.read(h[:]); err != nil {
		return Element{}, err
	}
	tag := Tag(uint32(binary.LittleEndian.Uint16(h[0:2]))<<16 | uint32(binary.LittleEndian.Uint16(h[2:4])))
	vr := string(h[4:6])
	var length uint32
	switch {
	case !knownVR(vr):
		return Element{}, &elementError{Tag: tag, Offset: at, Err: fmt.Errorf("%w %q", errBadVR, vr)}
	case !LongLengthVR(vr):
		length = uint32(binary.LittleEndian.Uint16(h[6:8]))
	default:
		var l [4]byte
		if err := s.read(l[:]); err != nil {
			return Element{}, err
		}
		length = binary.LittleEndian.Uint32(l[:])
		if length == 0xFFFFFFFF {
			return Element{}, &elementError{Tag: tag, Offset: at, Err: errUndefinedLength}
		}
	}
	limit := uint32(valueLimit(vr))
	if length > limit {
		return Element{}, &elementError{Tag: tag, Offset: at,
			Err: fmt.Errorf("%w: %d bytes of %s, limit %d", ErrValueTooLong, length, vr, limit)}
	}
	value := make([]byte, length)
	if err := s.read(value); err != nil {
		return Element{}, err
	}
	return Element{Tag: tag, VR: vr, Value: value}, nil
}

// set files one element into m.
func (m *Meta) set(e Element) {
	switch e.Tag {
	case TagMediaStorageSOPClassUID:
		m.MediaStorageSOPClassUID = trimUID(e.Value)
	case TagMediaStorageSOPInstanceUID:
		m.MediaStorageSOPInstanceUID = trimUID(e.Value)
	case TagTransferSyntaxUID:
		m.TransferSyntaxUID = trimUID(e.Value)
	case TagImplementationClassUID:
		m.ImplementationClassUID = trimUID(e.Value)
	case TagImplementationVersionName:
		m.ImplementationVersionName = trimText(e.Value)
	case TagSourceApplicationEntityTitle:
		m.SourceApplicationEntityTitle = trimText(e.Value)
	default:
		m.Other = append(m.Other, e)
	}
}

// trimUID drops the trailing NUL padding of a UI value (PS3.5 6.2) and the
// trailing spaces some writers use instead.
func trimUID(b []byte) string {
	return string(bytes.TrimRight(b, "\x00 "))
}

// trimText drops the space padding of SH and AE values; leading spaces are
// not significant in either (PS3.5 6.2). NULs are dropped too, for writers
// that pad everything with them.
func trimText(b []byte) string {
	return strings.Trim(string(b), "\x00 ")
}
