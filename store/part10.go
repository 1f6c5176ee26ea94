package store

import (
	"bufio"
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
)

// The Part 10 envelope is written here by hand because store imports only
// the standard library and bbolt. It is tiny: the preamble, the prefix and
// seven File Meta Elements.

// Layout of the envelope (PS3.10 7.1).
const (
	preambleLength = 128
	dicmPrefix     = "DICM"
	metaStart      = preambleLength + 4 // + len(dicmPrefix), kept untyped: offset of (0002,0000)
)

// Our implementation's identity, the same values scp/part10 writes (PS3.7
// D.3.3.2 defines both; PS3.10 7.1 requires the class UID in every file).
const (
	implementationClassUID    = "2.25.5539447777562070585615222628860829091"
	implementationVersionName = "DWIAUDIT_010" // SH, at most 16 characters
)

// maxAELength is the longest AE title (VR AE, PS3.5 6.2 Table 6.2-1).
const maxAELength = 16

// Limits readFileMeta applies to files it did not necessarily write.
const (
	// maxMetaValue caps one File Meta Element value. The longest text
	// values in group 0002 are UIDs and presentation addresses; the OB
	// Private Information element has no set size, and 64 KiB is far above
	// anything seen in practice (common practice).
	maxMetaValue = 64 << 10
	// maxMetaLength caps the whole group: enough for a few maximal values.
	maxMetaLength = 4 * maxMetaValue
)

// fileMeta is what the index needs from group 0002.
type fileMeta struct {
	SOPClassUID       string // (0002,0002)
	SOPInstanceUID    string // (0002,0003)
	TransferSyntaxUID string // (0002,0010)
	SourceAETitle     string // (0002,0016)
}

// encodeFileMeta returns the preamble, "DICM" and the File Meta Information
// (PS3.10 7.1 Table 7.1-1), in Explicit VR Little Endian as PS3.10 7.1
// requires whatever the data set's transfer syntax. The UIDs must already
// have passed checkUID. The source AE title is written only when it is a
// usable AE value; it is Type 3.
func encodeFileMeta(m fileMeta) []byte {
	var group []byte
	// (0002,0001) OB: bytes 00H 01H, version 1 (PS3.10 7.1 Table 7.1-1).
	group = appendElement(group, 0x0001, "OB", []byte{0x00, 0x01})
	group = appendElement(group, 0x0002, "UI", padded(m.SOPClassUID, 0x00))
	group = appendElement(group, 0x0003, "UI", padded(m.SOPInstanceUID, 0x00))
	group = appendElement(group, 0x0010, "UI", padded(m.TransferSyntaxUID, 0x00))
	group = appendElement(group, 0x0012, "UI", padded(implementationClassUID, 0x00))
	group = appendElement(group, 0x0013, "SH", padded(implementationVersionName, ' '))
	if usableAE(m.SourceAETitle) {
		group = appendElement(group, 0x0016, "AE", padded(m.SourceAETitle, ' '))
	}

	out := make([]byte, preambleLength, metaStart+12+len(group))
	out = append(out, dicmPrefix...)
	// (0002,0000) UL: the length of the rest of group 0002 (PS3.10 7.1).
	out = appendElement(out, 0x0000, "UL", binary.LittleEndian.AppendUint32(nil, uint32(len(group))))
	return append(out, group...)
}

// appendElement encodes one group 0002 element in Explicit VR Little
// Endian (PS3.5 7.1.2): OB takes the long form with two reserved bytes
// and a 32-bit length, the others a 16-bit length.
func appendElement(b []byte, element uint16, vr string, value []byte) []byte {
	b = binary.LittleEndian.AppendUint16(b, 0x0002)
	b = binary.LittleEndian.AppendUint16(b, element)
	b = append(b, vr...)
	if vr == "OB" {
		b = append(b, 0, 0)
		b = binary.LittleEndian.AppendUint32(b, uint32(len(value)))
	} else {
		b = binary.LittleEndian.AppendUint16(b, uint16(len(value)))
	}
	return append(b, value...)
}

// padded makes a value even-length (PS3.5 7.1.1): NUL after a UI, space
// after text (PS3.5 6.2).
func padded(s string, pad byte) []byte {
	b := []byte(s)
	if len(b)%2 == 1 {
		b = append(b, pad)
	}
	return b
}

// usableAE reports whether s can be written as an AE value: 1 to 16
// characters of the default repertoire, no backslash (the value
// separator) and no control characters (PS3.5 6.2).
func usableAE(s string) bool {
	if s == "" || len(s) > maxAELength {
		return false
	}
	for i := 0; i < len(s); i++ {
		if s[i] < 0x20 || s[i] > 0x7E || s[i] == '\\' {
			return false
		}
	}
	return true
}

// errNotPart10 is wrapped in ErrUnreadable by the callers of readFileMeta.
var errNotPart10 = errors.New("not a DICOM Part 10 file")

// readFileMeta reads the envelope of a Part 10 file and returns the meta
// values the index keeps and the offset where the data set begins. It
// walks the group element by element rather than trusting (0002,0000),
// which some writers omit, and it stops at the first element outside
// group 0002 (PS3.10 7.1).
func readFileMeta(r io.Reader) (fileMeta, int64, error) {
	br := bufio.NewReader(r)
	head := make([]byte, metaStart)
	if _, err := io.ReadFull(br, head); err != nil || string(head[preambleLength:]) != dicmPrefix {
		return fileMeta{}, 0, errNotPart10
	}
	var m fileMeta
	off := int64(metaStart)
	for {
		peek, err := br.Peek(2)
		if err != nil || binary.LittleEndian.Uint16(peek) != 0x0002 {
			break // end of file, or the data set begins
		}
		var h [8]byte
		if _, err := io.ReadFull(br, h[:]); err != nil {
			return fileMeta{}, 0, fmt.Errorf("%w: file meta truncated", errNotPart10)
		}
		element := binary.LittleEndian.Uint16(h[2:4])
		vr := string(h[4:6])
		length := int64(binary.LittleEndian.Uint16(h[6:8]))
		size := int64(8)
		switch vr {
		case "OB", "OD", "OF", "OL", "OV", "OW", "SQ", "SV", "UC", "UN", "UR", "UT", "UV":
			// Long form: two reserved bytes, then a 32-bit length (PS3.5 7.1.2).
			var l [4]byte
			if _, err := io.ReadFull(br, l[:]); err != nil {
				return fileMeta{}, 0, fmt.Errorf("%w: file meta truncated", errNotPart10)
			}
			length = int64(binary.LittleEndian.Uint32(l[:]))
			size += 4
		}
		if length > maxMetaValue {
			return fileMeta{}, 0, fmt.Errorf("%w: file meta element of %d bytes", errNotPart10, length)
		}
		value := make([]byte, length)
		if _, err := io.ReadFull(br, value); err != nil {
			return fileMeta{}, 0, fmt.Errorf("%w: file meta truncated", errNotPart10)
		}
		text := string(bytes.TrimRight(value, "\x00 "))
		switch element {
		case 0x0002:
			m.SOPClassUID = text
		case 0x0003:
			m.SOPInstanceUID = text
		case 0x0010:
			m.TransferSyntaxUID = text
		case 0x0016:
			m.SourceAETitle = text
		}
		off += size + length
		if off-metaStart > maxMetaLength {
			return fileMeta{}, 0, fmt.Errorf("%w: file meta longer than %d bytes", errNotPart10, maxMetaLength)
		}
	}
	if m.TransferSyntaxUID == "" {
		return fileMeta{}, 0, fmt.Errorf("%w: no transfer syntax UID in file meta", errNotPart10)
	}
	return m, off, nil
}
