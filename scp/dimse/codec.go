package dimse

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"strings"

	"github.com/grailbio/go-dicom/dicomio"
	"github.com/grailbio/go-dicom/dicomtag"
)

// Sizes of the Implicit VR Little Endian element layout (PS3.5 7.1.3):
// tag group and element (2+2 bytes), then a 4-byte value length.
const (
	elementHeaderLen = 8
	usLen            = 2 // US value (PS3.5 Table 6.2-1)
	ulLen            = 4 // UL value (PS3.5 Table 6.2-1)
	atLen            = 4 // one AT value: group and element (PS3.5 Table 6.2-1)
)

// Length limits checked by Encode (PS3.5 Table 6.2-1).
const (
	maxAELen = 16 // AE: 16 bytes maximum
)

// maxElements bounds how many elements one command set can hold when we
// encode it: the Command struct has fewer fields than this, so the
// element list never grows past its stack array.
const maxElements = 16

// valueKind is how an element's value is written. Only the VRs the
// command group uses (PS3.7 E.1) are needed.
type valueKind uint8

const (
	kindUS   valueKind = iota
	kindUI             // padded with NUL (PS3.5 6.2, UI)
	kindText           // AE, LO: padded with space (PS3.5 6.2)
	kindAT
)

// element is one command element waiting to be written.
type element struct {
	tag  dicomtag.Tag
	kind valueKind
	us   uint16
	str  string
	at   []uint32
}

// valueLen is the encoded value length, padding included: every value
// has even length (PS3.5 7.1.1).
func (e *element) valueLen() int {
	switch e.kind {
	case kindUS:
		return usLen
	case kindAT:
		return atLen * len(e.at)
	}
	return len(e.str) + len(e.str)%2
}

// Encode writes c as an Implicit VR Little Endian command set
// (PS3.7 6.3.1): Command Group Length (0000,0000) first, then the
// elements in ascending tag order (PS3.5 7.1), each value padded to even
// length. Which elements appear follows the message tables of PS3.7 9.3
// and 10.3 for c.CommandField: a request never carries Status or the
// error fields, a response never carries Message ID or Priority, and
// optional elements are left out when empty. Encode refuses (with
// errInvalidCommand) unknown command fields and commands that contradict
// their table, such as a C-STORE-RQ without a data set.
func (c *Command) Encode() ([]byte, error) {
	if err := c.validate(); err != nil {
		return nil, err
	}
	var store [maxElements]element
	els := c.elements(store[:0])

	bodyLen := 0
	for i := range els {
		bodyLen += elementHeaderLen + els[i].valueLen()
	}
	buf := bytes.NewBuffer(make([]byte, 0, elementHeaderLen+ulLen+bodyLen))
	enc := dicomio.NewEncoder(buf, binary.LittleEndian, dicomio.ImplicitVR)

	// PS3.7 E.1: the group length counts the bytes after its own value.
	enc.WriteUInt16(dicomtag.CommandGroupLength.Group)
	enc.WriteUInt16(dicomtag.CommandGroupLength.Element)
	enc.WriteUInt32(ulLen)
	enc.WriteUInt32(uint32(bodyLen))
	for i := range els {
		writeElement(enc, &els[i])
	}
	if err := enc.Error(); err != nil {
		return nil, fmt.Errorf("dimse: encode %s: %w", c.CommandField, err)
	}
	return buf.Bytes(), nil
}

func writeElement(enc *dicomio.Encoder, e *element) {
	enc.WriteUInt16(e.tag.Group)
	enc.WriteUInt16(e.tag.Element)
	enc.WriteUInt32(uint32(e.valueLen()))
	switch e.kind {
	case kindUS:
		enc.WriteUInt16(e.us)
	case kindAT:
		for _, t := range e.at {
			enc.WriteUInt16(uint16(t >> 16))
			enc.WriteUInt16(uint16(t))
		}
	case kindUI:
		enc.WriteString(e.str)
		if len(e.str)%2 == 1 {
			enc.WriteByte(0x00) // PS3.5 6.2: UI pads with NUL
		}
	case kindText:
		enc.WriteString(e.str)
		if len(e.str)%2 == 1 {
			enc.WriteByte(' ') // PS3.5 6.2: AE and LO pad with space
		}
	}
}

// elements appends c's elements in ascending tag order.
func (c *Command) elements(els []element) []element {
	us := func(t dicomtag.Tag, v uint16) { els = append(els, element{tag: t, kind: kindUS, us: v}) }
	ui := func(t dicomtag.Tag, v string) {
		if v != "" {
			els = append(els, element{tag: t, kind: kindUI, str: v})
		}
	}
	text := func(t dicomtag.Tag, v string) {
		if v != "" {
			els = append(els, element{tag: t, kind: kindText, str: v})
		}
	}
	rq := c.CommandField.isRequest()

	ui(dicomtag.AffectedSOPClassUID, c.AffectedSOPClassUID)
	us(dicomtag.CommandField, uint16(c.CommandField))
	if rq && c.CommandField != CCancelRQ {
		us(dicomtag.MessageID, c.MessageID)
	}
	if !rq || c.CommandField == CCancelRQ {
		// PS3.7 Table 9.3-5: C-CANCEL-RQ names the request it cancels.
		us(dicomtag.MessageIDBeingRespondedTo, c.MessageIDBeingRespondedTo)
	}
	if c.CommandField == CMoveRQ {
		text(dicomtag.MoveDestination, c.MoveDestination)
	}
	if c.CommandField.hasPriority() {
		us(dicomtag.Priority, uint16(c.Priority))
	}
	us(dicomtag.CommandDataSetType, c.CommandDataSetType)
	if !rq {
		us(dicomtag.Status, uint16(c.Status))
		if len(c.OffendingElements) > 0 {
			els = append(els, element{tag: dicomtag.OffendingElement, kind: kindAT, at: c.OffendingElements})
		}
		text(dicomtag.ErrorComment, truncateComment(c.ErrorComment))
		if c.ErrorID != 0 {
			us(dicomtag.ErrorID, c.ErrorID)
		}
	}
	ui(dicomtag.AffectedSOPInstanceUID, c.AffectedSOPInstanceUID)
	if rq && c.MoveOriginatorAETitle != "" {
		text(dicomtag.MoveOriginatorApplicationEntityTitle, c.MoveOriginatorAETitle)
		us(dicomtag.MoveOriginatorMessageID, c.MoveOriginatorMessageID)
	}
	return els
}

// validate checks c against the message table of its command field.
// UIDs are deliberately not checked for syntax: a response echoes the
// peer's UIDs as they came, so the peer can match them.
func (c *Command) validate() error {
	cf := c.CommandField
	if !cf.known() {
		return fmt.Errorf("%w: unknown command field 0x%04X (PS3.7 E.1)", errInvalidCommand, uint16(cf))
	}
	if cf.hasPriority() && !c.Priority.valid() {
		return fmt.Errorf("%w: %s priority 0x%04X is not LOW, MEDIUM or HIGH (PS3.7 Table 9.3-1)", errInvalidCommand, cf, uint16(c.Priority))
	}
	if cf.isRequest() && len(strings.TrimSpace(c.MoveOriginatorAETitle)) > maxAELen {
		return fmt.Errorf("%w: move originator AE title longer than %d bytes (PS3.5 Table 6.2-1)", errInvalidCommand, maxAELen)
	}
	if cf == CMoveRQ && len(strings.TrimSpace(c.MoveDestination)) > maxAELen {
		return fmt.Errorf("%w: move destination longer than %d bytes (PS3.5 Table 6.2-1)", errInvalidCommand, maxAELen)
	}
	switch cf {
	case CStoreRQ: // PS3.7 Table 9.3-1
		if c.AffectedSOPClassUID == "" || c.AffectedSOPInstanceUID == "" {
			return fmt.Errorf("%w: C-STORE-RQ needs Affected SOP Class and Instance UIDs (PS3.7 Table 9.3-1)", errInvalidCommand)
		}
		if !c.HasDataSet() {
			return fmt.Errorf("%w: C-STORE-RQ must announce a data set (PS3.7 Table 9.3-1)", errInvalidCommand)
		}
	case CEchoRQ: // PS3.7 Table 9.3-12
		if c.AffectedSOPClassUID == "" {
			return fmt.Errorf("%w: C-ECHO-RQ needs an Affected SOP Class UID (PS3.7 Table 9.3-12)", errInvalidCommand)
		}
		if c.HasDataSet() {
			return fmt.Errorf("%w: C-ECHO-RQ carries no data set (PS3.7 Table 9.3-12)", errInvalidCommand)
		}
	case CStoreRSP, CEchoRSP, CCancelRQ: // PS3.7 Tables 9.3-2, 9.3-13, 9.3-5
		if c.HasDataSet() {
			return fmt.Errorf("%w: %s carries no data set, Command Data Set Type must be 0101H", errInvalidCommand, cf)
		}
	}
	return nil
}

// Decode parses an Implicit VR Little Endian command set (PS3.7 6.3.1).
//
// It is lenient where that is safe: group 0000 elements it does not model
// are skipped, trailing NUL and space padding is trimmed from strings
// (and leading spaces from AE values, PS3.5 6.2), Command Group Length may
// be absent, and command fields the standard does not define are
// returned as they are so the caller can decide what to do. (Known
// commands dwiaudit does not serve, such as C-FIND-RQ, can be answered
// with Response and StatusUnrecognizedOperation; a response to an
// undefined command field cannot be encoded.)
//
// It is strict where a wrong guess would be dangerous; all errors start
// with "dimse: " and wrap a sentinel from errors.go: a truncated element
// (errTruncated), an element outside group 0000 (errNotCommandGroup), a
// group length that does not match (errGroupLength), elements out of
// order or repeated (errElementOrder), a known element with an impossible
// length (errValueLength), and a missing Command Field, Command Data Set
// Type, or, in a response, Status (errMissingElement) — a missing Status
// must not read as success. Every value length is checked against the
// bytes that remain before anything is allocated for it.
func Decode(b []byte) (*Command, error) {
	d := dicomio.NewBytesDecoder(b, binary.LittleEndian, dicomio.ImplicitVR)
	// Bound the decoder to b, so its own reads can never look past it.
	d.PushLimit(int64(len(b)))

	c := &Command{}
	var (
		haveField, haveDataSetType, haveStatus bool
		prev                                   dicomtag.Tag
		first                                  = true
	)
	for off := 0; off < len(b); {
		if len(b)-off < elementHeaderLen {
			return nil, fmt.Errorf("%w: %d bytes left at offset %d, an element header needs %d", errTruncated, len(b)-off, off, elementHeaderLen)
		}
		tag := dicomtag.Tag{Group: d.ReadUInt16(), Element: d.ReadUInt16()}
		vl := d.ReadUInt32()
		off += elementHeaderLen
		if err := d.Error(); err != nil {
			return nil, fmt.Errorf("%w: element header at offset %d: %v", errTruncated, off-elementHeaderLen, err)
		}
		if tag.Group != dicomtag.CommandGroupLength.Group {
			return nil, fmt.Errorf("%w: %s at offset %d", errNotCommandGroup, tag, off-elementHeaderLen)
		}
		if !first && tag.Compare(prev) <= 0 {
			return nil, fmt.Errorf("%w: %s after %s", errElementOrder, tag, prev)
		}
		first, prev = false, tag
		// Checked before anything is read or allocated for the value.
		if uint64(vl) > uint64(len(b)-off) {
			return nil, fmt.Errorf("%w: %s says %d value bytes, %d left", errTruncated, tag, vl, len(b)-off)
		}
		n := int(vl)
		if err := checkLength(tag, n); err != nil {
			return nil, err
		}

		switch tag {
		case dicomtag.CommandGroupLength:
			if gl := d.ReadUInt32(); uint64(gl) != uint64(len(b)-off-n) {
				return nil, fmt.Errorf("%w: (0000,0000) says %d, %d bytes follow", errGroupLength, gl, len(b)-off-n)
			}
		case dicomtag.AffectedSOPClassUID:
			c.AffectedSOPClassUID = trimUI(d.ReadString(n))
		case dicomtag.CommandField:
			c.CommandField = CommandField(d.ReadUInt16())
			haveField = true
		case dicomtag.MessageID:
			c.MessageID = d.ReadUInt16()
		case dicomtag.MessageIDBeingRespondedTo:
			c.MessageIDBeingRespondedTo = d.ReadUInt16()
		case dicomtag.MoveDestination:
			c.MoveDestination = trimAE(d.ReadString(n))
		case dicomtag.Priority:
			c.Priority = Priority(d.ReadUInt16())
		case dicomtag.CommandDataSetType:
			c.CommandDataSetType = d.ReadUInt16()
			haveDataSetType = true
		case dicomtag.Status:
			c.Status = Status(d.ReadUInt16())
			haveStatus = true
		case dicomtag.OffendingElement:
			if n == 0 {
				break
			}
			c.OffendingElements = make([]uint32, 0, n/atLen)
			for range n / atLen {
				g, e := d.ReadUInt16(), d.ReadUInt16()
				c.OffendingElements = append(c.OffendingElements, uint32(g)<<16|uint32(e))
			}
		case dicomtag.ErrorComment:
			c.ErrorComment = trimText(d.ReadString(n))
		case dicomtag.ErrorID:
			c.ErrorID = d.ReadUInt16()
		case dicomtag.AffectedSOPInstanceUID:
			c.AffectedSOPInstanceUID = trimUI(d.ReadString(n))
		case dicomtag.MoveOriginatorApplicationEntityTitle:
			c.MoveOriginatorAETitle = trimAE(d.ReadString(n))
		case dicomtag.MoveOriginatorMessageID:
			c.MoveOriginatorMessageID = d.ReadUInt16()
		default:
			// Group 0000 elements we do not model (Requested SOP Class
			// UID, sub-operation counts, retired ACR-NEMA elements...).
			d.Skip(n)
		}
		off += n
		if err := d.Error(); err != nil {
			return nil, fmt.Errorf("%w: value of %s: %v", errTruncated, tag, err)
		}
	}

	switch {
	case !haveField:
		return nil, fmt.Errorf("%w: Command Field (0000,0100)", errMissingElement)
	case !haveDataSetType:
		return nil, fmt.Errorf("%w: Command Data Set Type (0000,0800) in %s", errMissingElement, c.CommandField)
	case c.CommandField.isResponse() && !haveStatus:
		return nil, fmt.Errorf("%w: Status (0000,0900) in %s", errMissingElement, c.CommandField)
	}
	return c, nil
}

// checkLength rejects value lengths the VR of a known element forbids
// (PS3.5 Table 6.2-1; all command elements have VM 1 except AT, 1-n).
func checkLength(tag dicomtag.Tag, n int) error {
	want := 0
	switch tag {
	case dicomtag.CommandGroupLength:
		want = ulLen
	case dicomtag.CommandField, dicomtag.MessageID, dicomtag.MessageIDBeingRespondedTo,
		dicomtag.Priority, dicomtag.CommandDataSetType, dicomtag.Status,
		dicomtag.ErrorID, dicomtag.MoveOriginatorMessageID:
		want = usLen
	case dicomtag.OffendingElement:
		if n%atLen != 0 {
			return fmt.Errorf("%w: %s is %d bytes, not a multiple of %d", errValueLength, tag, n, atLen)
		}
		return nil
	default:
		return nil
	}
	if n != want {
		return fmt.Errorf("%w: %s is %d bytes, want %d", errValueLength, tag, n, want)
	}
	return nil
}

// trimUI drops UI padding: NUL is the standard pad (PS3.5 6.2), trailing
// spaces are a common mistake of other implementations.
func trimUI(s string) string { return strings.TrimRight(s, "\x00 ") }

// trimAE drops AE padding; leading and trailing spaces are not
// significant in AE (PS3.5 Table 6.2-1).
func trimAE(s string) string { return strings.TrimLeft(strings.TrimRight(s, "\x00 "), " ") }

// trimText drops trailing padding from LO and similar text values.
func trimText(s string) string { return strings.TrimRight(s, "\x00 ") }
