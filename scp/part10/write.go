package part10

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"io"
	"slices"
	"strings"
)

// Limits AppendHeader enforces on what it is given (PS3.5 6.2 Table 6.2-1).
const (
	maxUIDLength = 64 // UI
	maxSHLength  = 16 // SH: Implementation Version Name
	maxAELength  = 16 // AE: Source Application Entity Title
)

// WriteHeader writes the 128-byte preamble of zeros, "DICM" and the File Meta
// Information for m (PS3.10 7.1 Table 7.1-1), Explicit VR Little Endian, in
// tag order, led by its group length. The caller writes the data set after
// it, in m.TransferSyntaxUID. The bytes are AppendHeader's.
func WriteHeader(w io.Writer, m Meta) error {
	out, err := AppendHeader(nil, m)
	if err != nil {
		return err
	}
	_, err = w.Write(out)
	return err
}

// AppendHeader appends to b the 128-byte preamble of zeros, "DICM" and the
// File Meta Information for m (PS3.10 7.1 Table 7.1-1), Explicit VR Little
// Endian, in tag order, led by its group length, and returns the extended
// slice. It is the one encoder of the envelope: the store writes every
// instance it receives with it, WriteHeader and the readers that re-wrap a
// data set use it too.
//
// Empty ImplementationClassUID and ImplementationVersionName are filled with
// this package's constants; the source AE title is written only when set.
// Elements in m.Other are written too, except the group length, the version
// and the tags Meta has fields for, which AppendHeader always makes itself.
// A Meta lacking one of the three Type 1 UIDs, or holding a value that does
// not fit its VR, gives errInvalidMeta and b unchanged.
func AppendHeader(b []byte, m Meta) ([]byte, error) {
	if m.ImplementationClassUID == "" {
		m.ImplementationClassUID = ImplementationClassUID
	}
	if m.ImplementationVersionName == "" {
		m.ImplementationVersionName = ImplementationVersionName
	}
	elems, err := m.elements()
	if err != nil {
		return b, err
	}

	var group bytes.Buffer
	for _, e := range elems {
		if err := appendElement(&group, e); err != nil {
			return b, err
		}
	}
	if group.Len() > maxMetaLength {
		// Keep what we write readable by ReadMeta.
		return b, fmt.Errorf("%w: %d bytes of file meta information", errInvalidMeta, group.Len())
	}

	out := slices.Grow(b, headerStart+12+group.Len())
	out = append(out, make([]byte, preambleLength)...)
	out = append(out, prefix...)
	// (0002,0000) UL: bytes after this element up to the end of group 0002.
	out = binary.LittleEndian.AppendUint16(out, metaGroup)
	out = binary.LittleEndian.AppendUint16(out, 0x0000)
	out = append(out, "UL"...)
	out = binary.LittleEndian.AppendUint16(out, 4)
	out = binary.LittleEndian.AppendUint32(out, uint32(group.Len()))
	return append(out, group.Bytes()...), nil
}

// ValidAETitle reports whether s can be written as Source Application
// Entity Title (0002,0016): 1 to 16 characters of the default repertoire,
// no backslash (the value separator) and no control characters (PS3.5
// 6.2). AppendHeader refuses a Meta whose non-empty title fails it; a
// writer for which the title is optional (it is Type 3) leaves it out.
func ValidAETitle(s string) bool {
	return s != "" && checkText(s, maxAELength) == nil
}

// elements lists what AppendHeader writes after the group length, sorted by
// tag (PS3.5 7.1: ascending order).
func (m Meta) elements() ([]Element, error) {
	required := []struct {
		tag   Tag
		value string
	}{
		{TagMediaStorageSOPClassUID, m.MediaStorageSOPClassUID},
		{TagMediaStorageSOPInstanceUID, m.MediaStorageSOPInstanceUID},
		{TagTransferSyntaxUID, m.TransferSyntaxUID},
		{TagImplementationClassUID, m.ImplementationClassUID},
	}
	// (0002,0001): byte 00H then 01H, version 1 (PS3.10 7.1 Table 7.1-1).
	elems := []Element{{Tag: TagFileMetaInformationVersion, VR: "OB", Value: []byte{0x00, 0x01}}}
	for _, r := range required {
		if err := checkUID(r.value); err != nil {
			return nil, fmt.Errorf("%w: %v: %v", errInvalidMeta, r.tag, err)
		}
		elems = append(elems, Element{Tag: r.tag, VR: "UI", Value: pad([]byte(r.value), 0x00)})
	}
	if err := checkText(m.ImplementationVersionName, maxSHLength); err != nil {
		return nil, fmt.Errorf("%w: %v: %v", errInvalidMeta, TagImplementationVersionName, err)
	}
	elems = append(elems, Element{Tag: TagImplementationVersionName, VR: "SH",
		Value: pad([]byte(m.ImplementationVersionName), ' ')})
	if m.SourceApplicationEntityTitle != "" {
		if err := checkText(m.SourceApplicationEntityTitle, maxAELength); err != nil {
			return nil, fmt.Errorf("%w: %v: %v", errInvalidMeta, TagSourceApplicationEntityTitle, err)
		}
		elems = append(elems, Element{Tag: TagSourceApplicationEntityTitle, VR: "AE",
			Value: pad([]byte(m.SourceApplicationEntityTitle), ' ')})
	}

	made := map[Tag]bool{TagGroupLength: true}
	for _, e := range elems {
		made[e.Tag] = true
	}
	for _, e := range m.Other {
		if made[e.Tag] {
			continue
		}
		if e.Tag.group() != metaGroup {
			return nil, fmt.Errorf("%w: %v is not in group 0002", errInvalidMeta, e.Tag)
		}
		made[e.Tag] = true // a tag appears once in a data set (PS3.5 7.1)
		e.Value = pad(e.Value, padByte(e.VR))
		elems = append(elems, e)
	}
	slices.SortFunc(elems, func(a, b Element) int {
		switch {
		case a.Tag < b.Tag:
			return -1
		case a.Tag > b.Tag:
			return 1
		}
		return 0
	})
	return elems, nil
}

// appendElement encodes e in Explicit VR Little Endian (PS3.5 7.1.2).
func appendElement(buf *bytes.Buffer, e Element) error {
	var h []byte
	h = binary.LittleEndian.AppendUint16(h, e.Tag.group())
	h = binary.LittleEndian.AppendUint16(h, e.Tag.element())
	if !knownVR(e.VR) || e.VR == "SQ" {
		return fmt.Errorf("%w: %v: cannot write VR %q", errInvalidMeta, e.Tag, e.VR)
	}
	// The reader's limits, so that ReadMeta accepts whatever we write.
	if limit := valueLimit(e.VR); len(e.Value) > limit {
		return fmt.Errorf("%w: %v: %d bytes of %s, limit %d", errInvalidMeta, e.Tag, len(e.Value), e.VR, limit)
	}
	h = append(h, e.VR...)
	if LongLengthVR(e.VR) {
		h = append(h, 0, 0)
		h = binary.LittleEndian.AppendUint32(h, uint32(len(e.Value)))
	} else {
		h = binary.LittleEndian.AppendUint16(h, uint16(len(e.Value)))
	}
	buf.Write(h)
	buf.Write(e.Value)
	return nil
}

// pad makes a value even-length (PS3.5 7.1.1), with NUL for UI and binary
// VRs and space for text (PS3.5 6.2).
func pad(v []byte, b byte) []byte {
	if len(v)%2 == 0 {
		return v
	}
	out := make([]byte, len(v), len(v)+1)
	copy(out, v)
	return append(out, b)
}

// padByte is the padding a VR takes (PS3.5 6.2): NUL for UI and the binary
// VRs, space for the character string VRs.
func padByte(vr string) byte {
	switch vr {
	case "AE", "AS", "CS", "DA", "DS", "DT", "IS", "LO", "LT", "PN", "SH", "ST", "TM", "UC", "UR", "UT":
		return ' '
	}
	return 0x00
}

// checkUID enforces the UID syntax of PS3.5 9.1: digits and dots, at most 64
// characters, no empty component. Leading zeros in a component, which PS3.5
// 9.1 also forbids, are let through, as scp/pdu and the store let them
// through: senders in the field produce them, the store keeps such
// instances, and re-wrapping one of them must not fail.
func checkUID(uid string) error {
	if uid == "" {
		return fmt.Errorf("empty UID")
	}
	if len(uid) > maxUIDLength {
		return fmt.Errorf("UID of %d characters, limit %d", len(uid), maxUIDLength)
	}
	for _, c := range strings.Split(uid, ".") {
		if c == "" {
			return fmt.Errorf("UID %q has an empty component", uid)
		}
		for i := 0; i < len(c); i++ {
			if c[i] < '0' || c[i] > '9' {
				return fmt.Errorf("UID %q has a character other than digits and dots", uid)
			}
		}
	}
	return nil
}

// checkText enforces the SH/AE repertoire and length (PS3.5 6.2): at most
// max characters, no backslash (the value separator), no control characters.
func checkText(s string, max int) error {
	if len(s) > max {
		return fmt.Errorf("%q has %d characters, limit %d", s, len(s), max)
	}
	for i := 0; i < len(s); i++ {
		if s[i] < 0x20 || s[i] == '\\' || s[i] > 0x7E {
			return fmt.Errorf("%q has a character not allowed here", s)
		}
	}
	return nil
}
