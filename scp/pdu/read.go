package pdu

import (
	"encoding/binary"
	"fmt"
	"io"
)

// maxAssociatePDULength bounds the PDU-length of every PDU other than
// P-DATA-TF. Only A-ASSOCIATE-RQ/AC are ever large, and a generous one fits
// well within 256 KiB: presentation context IDs are odd numbers 1-255, so
// there are at most 128 contexts (PS3.8 9.3.2.2), and 128 contexts each with
// a 64-byte abstract syntax and 20 transfer syntaxes of the longest allowed
// 64 bytes (PS3.8 Annex F) take 128 × (8 + 68 + 20 × 68) = 183,808 bytes; with
// the 68 fixed bytes, the application context item (68) and the largest
// possible user information item (4 + 65,535, its item-length being 16
// bits) the body is 249,483 bytes. DCMTK echoscu's largest proposal, 128
// contexts of 38 transfer syntaxes, is 129,697 bytes, half the limit (see
// testdata/README.md). The bound keeps a peer from making us allocate more
// than this for a PDU we must hold whole before we can parse it.
const maxAssociatePDULength = 256 << 10

// maxPDataLengthCeiling is the limit a Reader applies to P-DATA-TF when it
// is told a maximum of 0. On the wire 0 means "no maximum length is
// specified" (PS3.8 D.1 Table D.1-1), but a receiver that holds a whole PDU
// in memory must stop somewhere; 16 MiB is 128 times DCMTK's largest
// negotiable receive PDU (storescp -pdu accepts 4096..131072).
const maxPDataLengthCeiling = 16 << 20

// PDVOverhead is what one PDV adds to a P-DATA-TF's PDU-length besides its
// data: the 4-byte item-length, the presentation-context-ID and the message
// control header (PS3.8 9.3.5.1 Table 9-23, E.2). A sender bound by a peer's
// Maximum Length m puts at most m - PDVOverhead data bytes in a P-DATA-TF
// that carries a single PDV.
const PDVOverhead = 6

// Reader reads PDUs from a byte stream, one at a time, holding each whole in
// one internal buffer that is reused from call to call.
//
// A Reader never reads beyond the PDU it returns, so the stream may be
// handed to something else between calls.
type Reader struct {
	r        io.Reader
	maxPData uint32
	hdr      [headerLength]byte
	buf      []byte
	pdata    PDataTF
}

// NewReader returns a Reader on r. maxPDataLength is the Maximum Length we
// advertised in our A-ASSOCIATE-RQ or -AC (PS3.8 D.1): a P-DATA-TF whose
// PDU-length exceeds it is refused with a *tooLongError. 0 applies
// maxPDataLengthCeiling.
func NewReader(r io.Reader, maxPDataLength uint32) *Reader {
	rd := &Reader{r: r}
	rd.setMaxPDataLength(maxPDataLength)
	return rd
}

// setMaxPDataLength changes the P-DATA-TF limit, e.g. once the association
// is negotiated. 0 applies maxPDataLengthCeiling.
func (r *Reader) setMaxPDataLength(n uint32) {
	if n == 0 {
		n = maxPDataLengthCeiling
	}
	r.maxPData = n
}

// maxPDataLength returns the P-DATA-TF limit in force.
func (r *Reader) maxPDataLength() uint32 { return r.maxPData }

// Next reads and decodes the next PDU.
//
// It reads the 6-byte header, checks the PDU-length against the limit for
// the PDU type before allocating anything, then reads the body into the
// Reader's buffer, grown as needed but never beyond the limit.
//
// A returned *PDataTF, its Items slice and every PDV.Data alias that buffer:
// they are valid only until the next call to Next, which overwrites them.
// Copy what must outlive it. Every other PDU is newly allocated and shares
// nothing with the Reader. In steady state a P-DATA-TF costs no allocation.
//
// Errors:
//   - io.EOF, unwrapped, when the stream ends cleanly before the first byte
//     of a header;
//   - an error matching io.ErrUnexpectedEOF when it ends inside a PDU;
//   - *tooLongError (errTooLong) when the PDU-length exceeds the limit; the
//     body has not been read;
//   - *parseError (errMalformed) for a body that breaks PS3.8 9.3, carrying
//     the A-ABORT reason to send; the body has been read. For an unknown
//     PDU type (also errUnknownType, reason unrecognized-PDU) only the
//     header has been read, since the length of a PDU we do not know cannot
//     be trusted to skip by;
//   - any other read error, wrapped.
//
// After an error other than a *parseError for a known type the stream is
// no longer at a PDU boundary; the caller aborts the association and
// closes it (PS3.8 9.2: an unrecognized or invalid PDU, event 19, leads to
// action AA-8, an A-ABORT; event and action numbers from memory).
func (r *Reader) Next() (PDU, error) {
	if _, err := io.ReadFull(r.r, r.hdr[:]); err != nil {
		if err == io.EOF {
			return nil, io.EOF
		}
		return nil, fmt.Errorf("pdu: reading PDU header: %w", err)
	}
	t := Type(r.hdr[0])
	// r.hdr[1] is reserved: "sent with a value 00H but not tested to this
	// value when received" (PS3.8 Table 9-11 byte 2 and alike).
	length := binary.BigEndian.Uint32(r.hdr[2:6])
	limit, ok := limitFor(t, r.maxPData)
	if !ok {
		return nil, unknownType(t)
	}
	if length > limit {
		return nil, &tooLongError{Type: t, Length: length, Max: limit}
	}
	n := int(length)
	if cap(r.buf) < n {
		// Exactly n: the limit above bounds it, and growing by doubling
		// could pass the limit.
		r.buf = make([]byte, n)
	}
	body := r.buf[:n]
	if _, err := io.ReadFull(r.r, body); err != nil {
		if err == io.EOF {
			err = io.ErrUnexpectedEOF
		}
		return nil, fmt.Errorf("pdu: reading %s body of %d bytes: %w", t, n, err)
	}
	return decodeBody(t, body, &r.pdata)
}

// decodeBody decodes the body of a PDU of known type t, reusing pd for a
// P-DATA-TF.
func decodeBody(t Type, body []byte, pd *PDataTF) (PDU, error) {
	switch t {
	case TypePDataTF:
		if err := decodePData(body, pd); err != nil {
			return nil, err
		}
		return pd, nil
	case TypeAssociateRQ:
		return decodeAssociateRQ(body)
	case TypeAssociateAC:
		return decodeAssociateAC(body)
	case TypeAssociateRJ:
		if err := checkFixed(t, body); err != nil {
			return nil, err
		}
		// PS3.8 9.3.4 Table 9-21: byte 7 reserved, 8 result, 9 source,
		// 10 reason/diag.
		return &AssociateRJ{Result: RejectResult(body[1]), Source: RejectSource(body[2]), Reason: RejectReason(body[3])}, nil
	case TypeReleaseRQ:
		if err := checkFixed(t, body); err != nil {
			return nil, err
		}
		return &ReleaseRQ{}, nil
	case TypeReleaseRP:
		if err := checkFixed(t, body); err != nil {
			return nil, err
		}
		return &ReleaseRP{}, nil
	case TypeAbort:
		if err := checkFixed(t, body); err != nil {
			return nil, err
		}
		// PS3.8 9.3.8 Table 9-26: bytes 7-8 reserved, 9 source,
		// 10 reason/diag.
		return &Abort{Source: AbortSource(body[2]), Reason: AbortReason(body[3])}, nil
	}
	return nil, unknownType(t)
}

// unknownType is the error for a PDU-type byte outside PS3.8 9.3.1, for
// which Table 9-26 has the A-ABORT reason unrecognized-PDU.
func unknownType(t Type) error {
	return &parseError{Type: t, Reason: AbortReasonUnrecognizedPDU,
		Msg: "unknown PDU type 0x" + hex2(byte(t)), Err: errUnknownType}
}

// limitFor returns the PDU-length limit for type t, or false for a type
// outside PS3.8 9.3.1.
func limitFor(t Type, maxPData uint32) (uint32, bool) {
	switch t {
	case TypePDataTF:
		return maxPData, true
	case TypeAssociateRQ, TypeAssociateAC, TypeAssociateRJ, TypeReleaseRQ, TypeReleaseRP, TypeAbort:
		return maxAssociatePDULength, true
	}
	return 0, false
}

// Decode decodes one complete PDU, header included, from b, which must hold
// exactly that PDU. It applies the limits of a Reader with maxPDataLength 0
// and returns the same errors as Reader.Next. A P-DATA-TF it returns is newly
// allocated but its PDV data alias b. Meant for tests and tools; a network
// peer is read with a Reader.
func Decode(b []byte) (PDU, error) {
	if len(b) < headerLength {
		return nil, fmt.Errorf("pdu: decoding %d bytes, too few for a PDU header: %w", len(b), io.ErrUnexpectedEOF)
	}
	t := Type(b[0])
	length := binary.BigEndian.Uint32(b[2:6])
	limit, ok := limitFor(t, maxPDataLengthCeiling)
	if !ok {
		return nil, unknownType(t)
	}
	if length > limit {
		return nil, &tooLongError{Type: t, Length: length, Max: limit}
	}
	body := b[headerLength:]
	if uint64(length) > uint64(len(body)) {
		return nil, fmt.Errorf("pdu: decoding %s of PDU-length %d from %d bytes: %w", t, length, len(body), io.ErrUnexpectedEOF)
	}
	if int(length) < len(body) {
		return nil, malformed(t, fmt.Sprintf("%d bytes after the PDU", len(body)-int(length)))
	}
	return decodeBody(t, body, &PDataTF{})
}

// malformed builds the usual parseError: a length or value the standard does
// not allow, for which PS3.8 Table 9-26 has invalid-PDU-parameter-value.
func malformed(t Type, msg string) *parseError {
	return &parseError{Type: t, Reason: AbortReasonInvalidPDUParameterValue, Msg: msg}
}

// unexpected builds a parseError for an item the standard defines but not
// in the place, or not as often, as it was found (unexpected-PDU-parameter,
// PS3.8 Table 9-26).
func unexpected(t Type, msg string) *parseError {
	return &parseError{Type: t, Reason: AbortReasonUnexpectedPDUParameter, Msg: msg}
}

// checkFixed checks the PDU-length of the four fixed-size PDUs: "it shall
// have the fixed value of 00000004H" (PS3.8 Tables 9-21, 9-24, 9-25, 9-26).
func checkFixed(t Type, body []byte) error {
	if len(body) != fixedBodyLength {
		return malformed(t, fmt.Sprintf("PDU-length %d, want %d", len(body), fixedBodyLength))
	}
	return nil
}

// decodePData decodes the PDV items of a P-DATA-TF body into pd, reusing
// pd.Items. Data slices alias body and are capped so that an append by the
// caller cannot overwrite the next PDV.
func decodePData(body []byte, pd *PDataTF) error {
	items := pd.Items[:0]
	b := body
	for len(b) > 0 {
		// PS3.8 9.3.5.1 Table 9-23: bytes 1-4 item-length, 5 context ID,
		// 6-xxx the PDV, whose first byte is the message control header.
		if len(b) < 4 {
			return malformed(TypePDataTF, fmt.Sprintf("%d bytes left, too few for a PDV item-length", len(b)))
		}
		l := binary.BigEndian.Uint32(b)
		if l < 2 {
			return malformed(TypePDataTF, fmt.Sprintf("PDV item-length %d, too short for context ID and message control header", l))
		}
		if uint64(l) > uint64(len(b)-4) {
			return malformed(TypePDataTF, fmt.Sprintf("PDV item-length %d overruns the %d bytes left", l, len(b)-4))
		}
		ctx := b[4]
		if ctx&1 == 0 {
			// "Presentation-context-ID values shall be odd integers between
			// 1 and 255" (Table 9-23 byte 5).
			return malformed(TypePDataTF, fmt.Sprintf("PDV presentation context ID %d is not odd", ctx))
		}
		mch := b[5] // PS3.8 E.2; bits 2-7 "never checked by the receiver"
		end := 4 + int(l)
		items = append(items, PDV{ContextID: ctx, Command: mch&controlCommand != 0, Last: mch&controlLast != 0, Data: b[6:end:end]})
		b = b[end:]
	}
	pd.Items = items
	if len(items) == 0 {
		// "The variable data field shall contain one or more
		// Presentation-Data-Value Items" (PS3.8 9.3.5).
		return malformed(TypePDataTF, "no PDV items")
	}
	return nil
}

// associateFixed splits the 68 fixed bytes of an A-ASSOCIATE-RQ/AC body
// (PS3.8 Tables 9-11 and 9-17, bytes 7-74) from its variable items.
func associateFixed(t Type, body []byte) (version uint16, called, calling string, items []byte, err error) {
	if len(body) < associateFixedLength {
		return 0, "", "", nil, malformed(t, fmt.Sprintf("PDU-length %d, shorter than the %d fixed bytes", len(body), associateFixedLength))
	}
	version = binary.BigEndian.Uint16(body[0:2]) // bytes 7-8
	// bytes 9-10 reserved, not tested
	called = trimAETitle(body[4:20])   // bytes 11-26
	calling = trimAETitle(body[20:36]) // bytes 27-42
	// bytes 43-74 reserved, not tested
	return version, called, calling, body[associateFixedLength:], nil
}

// item is one item or sub-item with a 1-byte type, 1 reserved byte and a
// 2-byte item-length (PS3.8 9.3.2.1-9.3.2.3, 9.3.3.1-9.3.3.3, Annex D).
type item struct {
	typ   byte
	extra byte // the reserved byte, or sub-item version of 57H
	value []byte
}

// nextItem splits the first item off b, checking its item-length against
// what remains.
// where names the enclosing structure for the error message; it is called
// only on error, so that decoding a valid PDU formats nothing.
func nextItem(t Type, where func() string, b []byte) (it item, rest []byte, err error) {
	if len(b) < 4 {
		return item{}, nil, malformed(t, fmt.Sprintf("%s: %d bytes left, too few for an item header", where(), len(b)))
	}
	l := int(binary.BigEndian.Uint16(b[2:4]))
	if l > len(b)-4 {
		return item{}, nil, malformed(t, fmt.Sprintf("%s: item 0x%02x item-length %d overruns the %d bytes left", where(), b[0], l, len(b)-4))
	}
	return item{typ: b[0], extra: b[1], value: b[4 : 4+l]}, b[4+l:], nil
}

// knownItemType reports whether typ is an item or sub-item type this
// package knows. A known type in the wrong place is an error; an unknown
// one is skipped: "Items of unrecognized types shall be ignored and
// skipped" (PS3.8 9.3.1), and acceptors "are required to ignore such
// unrecognized user information Sub-Items" (PS3.8 D.2 Note 2).
func knownItemType(typ byte) bool {
	switch typ {
	case itemApplicationContext, itemPresentationCtxRQ, itemPresentationCtxAC,
		itemAbstractSyntax, itemTransferSyntax, itemUserInformation:
		return true
	}
	return typ >= subMaxLength && typ <= subUserIdentityAC
}

func variableItems() string   { return "variable items" }
func userInformation() string { return "user information" }

// associateVariable is what A-ASSOCIATE-RQ and -AC share: the fixed
// fields and the application context and user information items.
type associateVariable struct {
	ver             uint16
	called, calling string
	appCtx          string
	userInfo        UserInformation
}

// decodeAssociate decodes the body of an A-ASSOCIATE-RQ or -AC (PS3.8
// 9.3.2, 9.3.3). Presentation context items of type pcType go to onPC;
// the rest of the item rules are the same for both PDUs.
func decodeAssociate(t Type, body []byte, pcType byte, onPC func([]byte) error) (associateVariable, error) {
	var v associateVariable
	var b []byte
	var err error
	v.ver, v.called, v.calling, b, err = associateFixed(t, body)
	if err != nil {
		return v, err
	}
	var haveAppCtx, haveUserInfo bool
	contexts := 0
	for len(b) > 0 {
		var it item
		if it, b, err = nextItem(t, variableItems, b); err != nil {
			return v, err
		}
		switch {
		case it.typ == itemApplicationContext:
			if haveAppCtx {
				return v, unexpected(t, "second application context item")
			}
			haveAppCtx = true
			v.appCtx = trimUID(it.value)
		case it.typ == pcType:
			if err := onPC(it.value); err != nil {
				return v, err
			}
			contexts++
		case it.typ == itemUserInformation:
			if haveUserInfo {
				return v, unexpected(t, "second user information item")
			}
			haveUserInfo = true
			if err := decodeUserInfo(t, it.value, &v.userInfo); err != nil {
				return v, err
			}
		case knownItemType(it.typ):
			return v, unexpected(t, fmt.Sprintf("item type 0x%02x is not allowed among the variable items", it.typ))
		}
	}
	// PS3.8 9.3.2 (and 9.3.3 for the AC): "one Application Context Item,
	// one or more Presentation Context Items, and one User Information
	// Item".
	return v, checkRequiredItems(t, haveAppCtx, contexts, haveUserInfo)
}

func decodeAssociateRQ(body []byte) (PDU, error) {
	p := &AssociateRQ{}
	v, err := decodeAssociate(TypeAssociateRQ, body, itemPresentationCtxRQ, func(b []byte) error {
		pc, err := decodePresentationContextRQ(b)
		p.PresentationContexts = append(p.PresentationContexts, pc)
		return err
	})
	if err != nil {
		return nil, err
	}
	p.ProtocolVersion, p.CalledAETitle, p.CallingAETitle, p.ApplicationContext, p.UserInfo = v.ver, v.called, v.calling, v.appCtx, v.userInfo
	return p, nil
}

func decodeAssociateAC(body []byte) (PDU, error) {
	p := &AssociateAC{}
	v, err := decodeAssociate(TypeAssociateAC, body, itemPresentationCtxAC, func(b []byte) error {
		pc, err := decodePresentationContextAC(b)
		p.PresentationContexts = append(p.PresentationContexts, pc)
		return err
	})
	if err != nil {
		return nil, err
	}
	p.ProtocolVersion, p.CalledAETitle, p.CallingAETitle, p.ApplicationContext, p.UserInfo = v.ver, v.called, v.calling, v.appCtx, v.userInfo
	return p, nil
}

func checkRequiredItems(t Type, appCtx bool, pcs int, userInfo bool) error {
	switch {
	case !appCtx:
		return malformed(t, "no application context item")
	case pcs == 0:
		return malformed(t, "no presentation context item")
	case !userInfo:
		return malformed(t, "no user information item")
	}
	return nil
}

// checkContextID applies "Presentation-context-ID values shall be odd
// integers between 1 and 255" (PS3.8 Tables 9-13 and 9-18, byte 5).
func checkContextID(t Type, id byte) error {
	if id&1 == 0 {
		return malformed(t, fmt.Sprintf("presentation context ID %d is not odd", id))
	}
	return nil
}

// decodePresentationContextRQ decodes the value of a 20H item
// (PS3.8 9.3.2.2 Table 9-13).
func decodePresentationContextRQ(v []byte) (PresentationContextRQ, error) {
	const t = TypeAssociateRQ
	if len(v) < 4 {
		return PresentationContextRQ{}, malformed(t, fmt.Sprintf("presentation context item-length %d, shorter than 4", len(v)))
	}
	// byte 5 ID, bytes 6-8 reserved
	pc := PresentationContextRQ{ID: v[0]}
	if err := checkContextID(t, pc.ID); err != nil {
		return pc, err
	}
	where := func() string { return fmt.Sprintf("presentation context %d", pc.ID) }
	var haveAbstract bool
	b := v[4:]
	for len(b) > 0 {
		var it item
		var err error
		if it, b, err = nextItem(t, where, b); err != nil {
			return pc, err
		}
		switch it.typ {
		case itemAbstractSyntax: // Table 9-14
			if haveAbstract {
				// "one Abstract Syntax Sub-Item followed by one or more
				// Transfer Syntax Sub-Items" (PS3.8 9.3.2.2).
				return pc, unexpected(t, where()+": second abstract syntax sub-item")
			}
			haveAbstract = true
			pc.AbstractSyntax = trimUID(it.value)
		case itemTransferSyntax: // Table 9-15
			pc.TransferSyntaxes = append(pc.TransferSyntaxes, trimUID(it.value))
		default:
			if knownItemType(it.typ) {
				return pc, unexpected(t, fmt.Sprintf("%s: sub-item type 0x%02x is not allowed here", where(), it.typ))
			}
		}
	}
	if !haveAbstract {
		return pc, malformed(t, where()+": no abstract syntax sub-item")
	}
	if len(pc.TransferSyntaxes) == 0 {
		return pc, malformed(t, where()+": no transfer syntax sub-item")
	}
	return pc, nil
}

// decodePresentationContextAC decodes the value of a 21H item
// (PS3.8 9.3.3.2 Table 9-18).
func decodePresentationContextAC(v []byte) (PresentationContextAC, error) {
	const t = TypeAssociateAC
	if len(v) < 4 {
		return PresentationContextAC{}, malformed(t, fmt.Sprintf("presentation context item-length %d, shorter than 4", len(v)))
	}
	// byte 5 ID, 6 reserved, 7 result/reason, 8 reserved
	pc := PresentationContextAC{ID: v[0], Result: PCResult(v[2])}
	if err := checkContextID(t, pc.ID); err != nil {
		return pc, err
	}
	where := func() string { return fmt.Sprintf("presentation context %d", pc.ID) }
	var haveTS bool
	b := v[4:]
	for len(b) > 0 {
		var it item
		var err error
		if it, b, err = nextItem(t, where, b); err != nil {
			return pc, err
		}
		switch it.typ {
		case itemTransferSyntax: // Table 9-19
			if haveTS {
				// "The variable field shall consist of one Transfer Syntax
				// Sub-Item" (PS3.8 9.3.3.2).
				return pc, unexpected(t, where()+": second transfer syntax sub-item")
			}
			haveTS = true
			pc.TransferSyntax = trimUID(it.value)
		default:
			if knownItemType(it.typ) {
				return pc, unexpected(t, fmt.Sprintf("%s: sub-item type 0x%02x is not allowed here", where(), it.typ))
			}
		}
	}
	// For a rejected context the sub-item "shall not be significant and its
	// value shall not be tested when received" (Table 9-18 bytes 9-xxx), so
	// only an accepted one needs it.
	if !haveTS && pc.Result == PCAcceptance {
		return pc, malformed(t, where()+": accepted without a transfer syntax sub-item")
	}
	return pc, nil
}

// decodeUserInfo decodes the sub-items of a 50H item (PS3.8 9.3.2.3
// Table 9-16, 9.3.3.3 Table 9-20, Annex D; PS3.7 D.3.3). The sub-items "may
// be present in any order" (PS3.8 9.3.2.3 Note).
func decodeUserInfo(t Type, v []byte, ui *UserInformation) error {
	var haveMax, haveClass, haveVersion bool
	for len(v) > 0 {
		var it item
		var err error
		if it, v, err = nextItem(t, userInformation, v); err != nil {
			return err
		}
		// w names the sub-item in messages; built only on error.
		typ := it.typ
		w := func() string { return fmt.Sprintf("user information sub-item 0x%02x", typ) }
		switch it.typ {
		case subMaxLength: // PS3.8 D.1 Table D.1-1: item-length 4
			if haveMax {
				// "Only one Maximum Length Sub-Item shall be present"
				return unexpected(t, "second "+w())
			}
			haveMax = true
			if len(it.value) != 4 {
				return malformed(t, fmt.Sprintf("%s: item-length %d, want 4", w(), len(it.value)))
			}
			ui.MaxLength = binary.BigEndian.Uint32(it.value)
		case subImplementationClass: // PS3.7 Table D.3-1
			if haveClass {
				return unexpected(t, "second "+w())
			}
			haveClass = true
			ui.ImplementationClassUID = trimUID(it.value)
		case subImplementationVer: // PS3.7 Table D.3-3
			if haveVersion {
				return unexpected(t, "second "+w())
			}
			haveVersion = true
			ui.ImplementationVersionName = string(trimRightPad(it.value))
		case subAsyncOpsWindow: // PS3.7 Table D.3-7: item-length 4
			if ui.AsyncOps != nil {
				return unexpected(t, "second "+w())
			}
			if len(it.value) != 4 {
				return malformed(t, fmt.Sprintf("%s: item-length %d, want 4", w(), len(it.value)))
			}
			ui.AsyncOps = &AsyncOpsWindow{
				MaxOpsInvoked:   binary.BigEndian.Uint16(it.value[0:2]),
				MaxOpsPerformed: binary.BigEndian.Uint16(it.value[2:4]),
			}
		case subRoleSelection: // PS3.7 Table D.3-9
			c := cursor{t: t, typ: it.typ, b: it.value}
			uid := c.uid16()
			scu, scp := c.byte1(), c.byte1()
			if err := c.done(); err != nil {
				return err
			}
			ui.RoleSelections = append(ui.RoleSelections, RoleSelection{SOPClassUID: uid, SCURole: scu != 0, SCPRole: scp != 0})
		case subExtendedNegotiation: // PS3.7 Table D.3-11
			c := cursor{t: t, typ: it.typ, b: it.value}
			uid := c.uid16()
			if c.err != nil {
				return c.err
			}
			// The service-class-application-information runs to the end
			// of the sub-item.
			ui.ExtendedNegotiations = append(ui.ExtendedNegotiations, ExtendedNegotiation{SOPClassUID: uid, Info: clone(c.b)})
		case subCommonExtNegotiation: // PS3.7 Tables D.3-12 and D.3-13
			// it.extra is the sub-item-version, 0 in this edition.
			c := cursor{t: t, typ: it.typ, b: it.value}
			cen := CommonExtendedNegotiation{SOPClassUID: c.uid16(), ServiceClassUID: c.uid16()}
			rel := cursor{t: t, typ: it.typ, what: " related general SOP classes", b: c.bytes16()}
			if err := c.done(); err != nil {
				return err
			}
			for len(rel.b) > 0 && rel.err == nil {
				cen.RelatedGeneralSOPClasses = append(cen.RelatedGeneralSOPClasses, rel.uid16())
			}
			if rel.err != nil {
				return rel.err
			}
			ui.CommonExtendedNegotiations = append(ui.CommonExtendedNegotiations, cen)
		case subUserIdentityRQ: // PS3.7 Table D.3-14
			if t != TypeAssociateRQ {
				return unexpected(t, w()+" belongs in an A-ASSOCIATE-RQ")
			}
			if ui.UserIdentity != nil {
				return unexpected(t, "second "+w())
			}
			c := cursor{t: t, typ: it.typ, b: it.value}
			id := &UserIdentityRQ{Type: c.byte1(), PositiveResponseRequested: c.byte1() != 0}
			id.Primary = clone(c.bytes16())
			id.Secondary = clone(c.bytes16())
			if err := c.done(); err != nil {
				return err
			}
			ui.UserIdentity = id
		case subUserIdentityAC: // PS3.7 Table D.3-15
			if t != TypeAssociateAC {
				return unexpected(t, w()+" belongs in an A-ASSOCIATE-AC")
			}
			if ui.UserIdentityResponse != nil {
				return unexpected(t, "second "+w())
			}
			c := cursor{t: t, typ: it.typ, b: it.value}
			id := &UserIdentityAC{ServerResponse: clone(c.bytes16())}
			if err := c.done(); err != nil {
				return err
			}
			ui.UserIdentityResponse = id
		default:
			if knownItemType(it.typ) {
				return unexpected(t, fmt.Sprintf("user information: item type 0x%02x is not a user information sub-item", it.typ))
			}
		}
	}
	return nil
}

// cursor reads the fields of a sub-item whose inner lengths must stay within
// it. The first error sticks and later reads return zero values, so a
// decoder can read all fields and check once.
type cursor struct {
	t    Type
	typ  byte   // the sub-item type, for messages
	what string // a part of the sub-item, for messages
	b    []byte
	err  error
}

func (c *cursor) where() string {
	return fmt.Sprintf("user information sub-item 0x%02x%s", c.typ, c.what)
}

func (c *cursor) fail(msg string) {
	if c.err == nil {
		c.err = malformed(c.t, c.where()+": "+msg)
	}
	c.b = nil
}

func (c *cursor) byte1() byte {
	if c.err != nil {
		return 0
	}
	if len(c.b) < 1 {
		c.fail("ends before a 1-byte field")
		return 0
	}
	v := c.b[0]
	c.b = c.b[1:]
	return v
}

// bytes16 reads a 2-byte length and that many bytes.
func (c *cursor) bytes16() []byte {
	if c.err != nil {
		return nil
	}
	if len(c.b) < 2 {
		c.fail("ends before a 2-byte length field")
		return nil
	}
	n := int(binary.BigEndian.Uint16(c.b))
	if n > len(c.b)-2 {
		c.fail(fmt.Sprintf("length %d overruns the %d bytes left", n, len(c.b)-2))
		return nil
	}
	v := c.b[2 : 2+n]
	c.b = c.b[2+n:]
	return v
}

func (c *cursor) uid16() string { return trimUID(c.bytes16()) }

// done reports the first error, or bytes left over: these sub-items'
// item-length runs "to the last byte of" their last field (PS3.7 Tables
// D.3-9, D.3-12, D.3-14, D.3-15), so surplus bytes mean the lengths
// disagree.
func (c *cursor) done() error {
	if c.err != nil {
		return c.err
	}
	if len(c.b) != 0 {
		return malformed(c.t, fmt.Sprintf("%s: %d bytes after the last field", c.where(), len(c.b)))
	}
	return nil
}

// trimAETitle removes the padding of a received AE title: trailing NULs and
// spaces, which some peers use as padding, and leading spaces, which are
// "non-significant" (PS3.8 9.3.2 Table 9-11 bytes 11-26).
func trimAETitle(b []byte) string {
	b = trimRightPad(b)
	for len(b) > 0 && b[0] == ' ' {
		b = b[1:]
	}
	return string(b)
}

// trimUID removes a trailing NUL or space pad from a received UID or name.
// PS3.8 Annex F forbids padding in items, but some peers carry over the
// PS3.5 9.1 padding of data elements to an even length.
func trimUID(b []byte) string { return string(trimRightPad(b)) }

func trimRightPad(b []byte) []byte {
	for len(b) > 0 && (b[len(b)-1] == 0 || b[len(b)-1] == ' ') {
		b = b[:len(b)-1]
	}
	return b
}

// clone copies b so that a decoded A-ASSOCIATE shares nothing with the
// Reader's buffer; empty becomes nil so that decoded values compare equal
// however the peer spelled "nothing".
func clone(b []byte) []byte {
	if len(b) == 0 {
		return nil
	}
	return append([]byte(nil), b...)
}
