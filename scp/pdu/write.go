package pdu

import (
	"encoding/binary"
	"fmt"
	"io"
	"math"
	"slices"
	"strings"
)

// maxPDVData is the largest data length one PDV can carry in a P-DATA-TF
// whose 4-byte PDU-length also counts the PDV's own 6 header bytes.
const maxPDVData = math.MaxUint32 - PDVOverhead

// Encode returns the wire form of p: header and body in one slice.
func Encode(p PDU) ([]byte, error) {
	return appendPDU(nil, p)
}

// write encodes p and writes it to w with a single Write call, so that a
// PDU is never interleaved with another writer's bytes and reaches the
// socket in one system call.
func write(w io.Writer, p PDU) error {
	b, err := Encode(p)
	if err != nil {
		return err
	}
	if _, err := w.Write(b); err != nil {
		return fmt.Errorf("pdu: writing %s: %w", p.Type(), err)
	}
	return nil
}

// writer writes PDUs to a stream like write, one Write call each, but
// encodes into a buffer it keeps, so that a steady stream of P-DATA-TF
// costs no allocation. It is not safe for concurrent use.
type writer struct {
	w   io.Writer
	buf []byte
}

// newWriter returns a Writer on w.
func newWriter(w io.Writer) *writer { return &writer{w: w} }

// write encodes p into the Writer's buffer and writes it with one Write
// call.
func (w *writer) Write(p PDU) error {
	b, err := appendPDU(w.buf[:0], p)
	if err != nil {
		return err
	}
	w.buf = b
	if _, err := w.w.Write(b); err != nil {
		return fmt.Errorf("pdu: writing %s: %w", p.Type(), err)
	}
	return nil
}

func appendPDU(dst []byte, p PDU) ([]byte, error) {
	switch v := p.(type) {
	case *AssociateRQ:
		if v != nil {
			return v.appendTo(dst)
		}
	case *AssociateAC:
		if v != nil {
			return v.appendTo(dst)
		}
	case *AssociateRJ:
		if v != nil {
			return v.appendTo(dst)
		}
	case *PDataTF:
		if v != nil {
			return v.appendTo(dst)
		}
	case *ReleaseRQ:
		return v.appendTo(dst)
	case *ReleaseRP:
		return v.appendTo(dst)
	case *Abort:
		if v != nil {
			return v.appendTo(dst)
		}
	}
	return dst, fmt.Errorf("%w: cannot encode PDU %T(%v)", errInvalidField, p, p)
}

// AppendPDataHeader appends the 12 bytes that precede a single data
// fragment in a P-DATA-TF carrying one PDV: the PDU header (type 04H, a
// reserved byte, PDU-length = PDVOverhead + dataLen; PS3.8 9.3.5
// Table 9-22) and the PDV item header (item-length = 2 + dataLen, the
// presentation context ID and the message control header; Table 9-23 and
// E.2). The caller appends exactly dataLen bytes of fragment after it, so a
// large fragment is copied once, straight into the outgoing buffer, or is
// written by a second Write right behind the header (e.g. with
// net.Buffers), without being copied at all.
//
// contextID must be odd and dataLen between 0 and math.MaxUint32 - 6; the
// function panics otherwise, as both are programming errors. Fragments of
// a DICOM message have an even length (PS3.8 E.1), and the PDU-length must
// not exceed the Maximum Length the peer advertised (PS3.8 D.1): both are
// for the caller to respect.
func AppendPDataHeader(dst []byte, contextID byte, command, last bool, dataLen int) []byte {
	if dataLen < 0 || uint64(dataLen) > maxPDVData {
		panic(fmt.Sprintf("pdu: AppendPDataHeader: data length %d out of range", dataLen))
	}
	if contextID&1 == 0 {
		panic(fmt.Sprintf("pdu: AppendPDataHeader: presentation context ID %d is not odd", contextID))
	}
	dst = append(dst, byte(TypePDataTF), 0)
	dst = binary.BigEndian.AppendUint32(dst, uint32(PDVOverhead+dataLen))
	dst = binary.BigEndian.AppendUint32(dst, uint32(2+dataLen))
	return append(dst, contextID, controlByte(command, last))
}

// controlByte builds the message control header (PS3.8 E.2); bits 2-7
// "are always set to 0 by the sender".
func controlByte(command, last bool) byte {
	var c byte
	if command {
		c |= controlCommand
	}
	if last {
		c |= controlLast
	}
	return c
}

// appendTo appends the P-DATA-TF (PS3.8 9.3.5 Tables 9-22 and 9-23) to dst.
// It needs at least one PDV, odd context IDs, and a total that fits the
// 32-bit PDU-length. On error dst is returned unchanged.
func (p *PDataTF) appendTo(dst []byte) ([]byte, error) {
	if len(p.Items) == 0 {
		// "one or more Presentation-Data-Value Items" (PS3.8 9.3.5)
		return dst, fmt.Errorf("%w: P-DATA-TF without PDV items", errInvalidField)
	}
	var total uint64
	for i, v := range p.Items {
		if v.ContextID&1 == 0 {
			return dst, fmt.Errorf("%w: PDV %d: presentation context ID %d is not odd", errInvalidField, i, v.ContextID)
		}
		total += PDVOverhead + uint64(len(v.Data))
	}
	if total > math.MaxUint32 {
		return dst, fmt.Errorf("%w: P-DATA-TF PDU-length %d", errFieldTooLong, total)
	}
	// One allocation at most, however many PDVs.
	dst = slices.Grow(dst, headerLength+int(total))
	dst = append(dst, byte(TypePDataTF), 0)
	dst = binary.BigEndian.AppendUint32(dst, uint32(total))
	for _, v := range p.Items {
		dst = binary.BigEndian.AppendUint32(dst, uint32(2+len(v.Data)))
		dst = append(dst, v.ContextID, controlByte(v.Command, v.Last))
		dst = append(dst, v.Data...)
	}
	return dst, nil
}

// appendTo appends the A-ASSOCIATE-RJ (PS3.8 9.3.4 Table 9-21) to dst. The
// values are written as given.
func (p *AssociateRJ) appendTo(dst []byte) ([]byte, error) {
	return append(dst, byte(TypeAssociateRJ), 0, 0, 0, 0, fixedBodyLength,
		0, byte(p.Result), byte(p.Source), byte(p.Reason)), nil
}

// appendTo appends the A-RELEASE-RQ (PS3.8 9.3.6 Table 9-24) to dst.
func (*ReleaseRQ) appendTo(dst []byte) ([]byte, error) {
	return append(dst, byte(TypeReleaseRQ), 0, 0, 0, 0, fixedBodyLength, 0, 0, 0, 0), nil
}

// appendTo appends the A-RELEASE-RP (PS3.8 9.3.7 Table 9-25) to dst.
func (*ReleaseRP) appendTo(dst []byte) ([]byte, error) {
	return append(dst, byte(TypeReleaseRP), 0, 0, 0, 0, fixedBodyLength, 0, 0, 0, 0), nil
}

// appendTo appends the A-ABORT (PS3.8 9.3.8 Table 9-26) to dst. The values
// are written as given; with source service-user the reason should be 0
// ("sent with a value 00H").
func (p *Abort) appendTo(dst []byte) ([]byte, error) {
	return append(dst, byte(TypeAbort), 0, 0, 0, 0, fixedBodyLength,
		0, 0, byte(p.Source), byte(p.Reason)), nil
}

// appendTo appends the A-ASSOCIATE-RQ (PS3.8 9.3.2 Table 9-11) to dst. It
// checks what it writes: AE titles (CheckAETitle), UIDs (checkUID), at
// least one presentation context, each with odd ID and at least one
// transfer syntax, and that every item fits its length field. On error
// dst is returned unchanged.
func (p *AssociateRQ) appendTo(dst []byte) ([]byte, error) {
	const t = TypeAssociateRQ
	if p.UserInfo.UserIdentityResponse != nil {
		return dst, fmt.Errorf("%w: %s: user identity sub-item 59H belongs in an A-ASSOCIATE-AC", errInvalidField, t)
	}
	start := len(dst)
	b, err := appendAssociateFixed(dst, t, p.ProtocolVersion, p.CalledAETitle, p.CallingAETitle, p.ApplicationContext)
	if err != nil {
		return dst, err
	}
	if len(p.PresentationContexts) == 0 {
		return dst, fmt.Errorf("%w: %s without presentation contexts", errInvalidField, t)
	}
	for _, pc := range p.PresentationContexts {
		if b, err = appendPresentationContextRQ(b, pc); err != nil {
			return dst, err
		}
	}
	if b, err = appendUserInfo(b, &p.UserInfo); err != nil {
		return dst, err
	}
	if err := finishPDU(b, start); err != nil {
		return dst, err
	}
	return b, nil
}

// appendTo appends the A-ASSOCIATE-AC (PS3.8 9.3.3 Table 9-17) to dst,
// with the checks of AssociateRQ.AppendTo; an accepted presentation context
// needs a transfer syntax, a rejected one may leave it empty. On error dst
// is returned unchanged.
func (p *AssociateAC) appendTo(dst []byte) ([]byte, error) {
	const t = TypeAssociateAC
	if p.UserInfo.UserIdentity != nil {
		return dst, fmt.Errorf("%w: %s: user identity sub-item 58H belongs in an A-ASSOCIATE-RQ", errInvalidField, t)
	}
	start := len(dst)
	b, err := appendAssociateFixed(dst, t, p.ProtocolVersion, p.CalledAETitle, p.CallingAETitle, p.ApplicationContext)
	if err != nil {
		return dst, err
	}
	if len(p.PresentationContexts) == 0 {
		return dst, fmt.Errorf("%w: %s without presentation contexts", errInvalidField, t)
	}
	for _, pc := range p.PresentationContexts {
		if b, err = appendPresentationContextAC(b, pc); err != nil {
			return dst, err
		}
	}
	if b, err = appendUserInfo(b, &p.UserInfo); err != nil {
		return dst, err
	}
	if err := finishPDU(b, start); err != nil {
		return dst, err
	}
	return b, nil
}

// appendAssociateFixed appends the PDU header with a length to be patched
// by finishPDU, the 68 fixed bytes (Tables 9-11 and 9-17, bytes 7-74) and
// the application context item (Table 9-12).
func appendAssociateFixed(b []byte, t Type, version uint16, called, calling, appCtx string) ([]byte, error) {
	if err := CheckAETitle(called); err != nil {
		return b, fmt.Errorf("%s called AE title: %w", t, err)
	}
	if err := CheckAETitle(calling); err != nil {
		return b, fmt.Errorf("%s calling AE title: %w", t, err)
	}
	if err := checkUID(appCtx); err != nil {
		return b, fmt.Errorf("%s application context name: %w", t, err)
	}
	b = append(b, byte(t), 0, 0, 0, 0, 0) // PDU-length patched by finishPDU
	b = binary.BigEndian.AppendUint16(b, version)
	b = append(b, 0, 0) // bytes 9-10 reserved
	b = appendAETitle(b, called)
	b = appendAETitle(b, calling)
	b = append(b, make([]byte, 32)...) // bytes 43-74 reserved, 00H
	return appendStringItem(b, itemApplicationContext, appCtx)
}

// finishPDU patches the PDU-length of the PDU that starts at b[start].
func finishPDU(b []byte, start int) error {
	n := uint64(len(b) - start - headerLength)
	if n > math.MaxUint32 {
		return fmt.Errorf("%w: %s PDU-length %d", errFieldTooLong, Type(b[start]), n)
	}
	binary.BigEndian.PutUint32(b[start+2:], uint32(n))
	return nil
}

// beginItem appends an item header whose item-length endItem patches.
func beginItem(b []byte, typ, extra byte) ([]byte, int) {
	return append(b, typ, extra, 0, 0), len(b)
}

// endItem patches the 2-byte item-length of the item that starts at
// b[start].
func endItem(b []byte, start int) error {
	n := len(b) - start - 4
	if n > maxItemLength {
		return fmt.Errorf("%w: item 0x%02x of %d bytes exceeds %d", errFieldTooLong, b[start], n, maxItemLength)
	}
	binary.BigEndian.PutUint16(b[start+2:], uint16(n))
	return nil
}

// appendStringItem appends an item whose whole value is s, as the
// application context (Table 9-12), abstract and transfer syntax
// (Tables 9-14, 9-15, 9-19) and implementation sub-items (PS3.7
// Tables D.3-1, D.3-3) are. Callers have checked s, which is at most 64
// bytes, so it always fits.
func appendStringItem(b []byte, typ byte, s string) ([]byte, error) {
	b, start := beginItem(b, typ, 0)
	b = append(b, s...)
	return b, endItem(b, start)
}

// appendString16 appends a 2-byte length and s, the layout of the UID
// fields inside PS3.7 sub-items 54H, 56H and 57H.
func appendString16(b []byte, s string) []byte {
	b = binary.BigEndian.AppendUint16(b, uint16(len(s)))
	return append(b, s...)
}

func appendBytes16(b []byte, v []byte, what string) ([]byte, error) {
	if len(v) > maxItemLength {
		return b, fmt.Errorf("%w: %s of %d bytes", errFieldTooLong, what, len(v))
	}
	b = binary.BigEndian.AppendUint16(b, uint16(len(v)))
	return append(b, v...), nil
}

func checkContextIDForWrite(id byte) error {
	if id&1 == 0 {
		return fmt.Errorf("%w: presentation context ID %d is not odd", errInvalidField, id)
	}
	return nil
}

// appendPresentationContextRQ appends a 20H item (PS3.8 9.3.2.2 Table 9-13)
// with its abstract syntax (Table 9-14) and transfer syntaxes (Table 9-15).
func appendPresentationContextRQ(b []byte, pc PresentationContextRQ) ([]byte, error) {
	if err := checkContextIDForWrite(pc.ID); err != nil {
		return b, err
	}
	if err := checkUID(pc.AbstractSyntax); err != nil {
		return b, fmt.Errorf("presentation context %d abstract syntax: %w", pc.ID, err)
	}
	if len(pc.TransferSyntaxes) == 0 {
		return b, fmt.Errorf("%w: presentation context %d without transfer syntaxes", errInvalidField, pc.ID)
	}
	b, start := beginItem(b, itemPresentationCtxRQ, 0)
	b = append(b, pc.ID, 0, 0, 0) // bytes 6-8 reserved
	b, _ = appendStringItem(b, itemAbstractSyntax, pc.AbstractSyntax)
	for _, ts := range pc.TransferSyntaxes {
		if err := checkUID(ts); err != nil {
			return b, fmt.Errorf("presentation context %d transfer syntax: %w", pc.ID, err)
		}
		b, _ = appendStringItem(b, itemTransferSyntax, ts)
	}
	if err := endItem(b, start); err != nil {
		return b, fmt.Errorf("presentation context %d: %w", pc.ID, err)
	}
	return b, nil
}

// appendPresentationContextAC appends a 21H item (PS3.8 9.3.3.2 Table 9-18)
// with its one transfer syntax sub-item (Table 9-19), which "shall not be
// significant" for a rejected context and is then sent empty if no name is
// given.
func appendPresentationContextAC(b []byte, pc PresentationContextAC) ([]byte, error) {
	if err := checkContextIDForWrite(pc.ID); err != nil {
		return b, err
	}
	if pc.Result == PCAcceptance || pc.TransferSyntax != "" {
		if err := checkUID(pc.TransferSyntax); err != nil {
			return b, fmt.Errorf("presentation context %d transfer syntax: %w", pc.ID, err)
		}
	}
	b, start := beginItem(b, itemPresentationCtxAC, 0)
	b = append(b, pc.ID, 0, byte(pc.Result), 0) // bytes 6 and 8 reserved
	b, _ = appendStringItem(b, itemTransferSyntax, pc.TransferSyntax)
	return b, endItem(b, start)
}

// appendUserInfo appends the 50H item (PS3.8 9.3.2.3 Table 9-16, 9.3.3.3
// Table 9-20) with its sub-items in ascending item-type order (the PS3.8
// 9.3.2.3 Note warns that older applications expect it).
func appendUserInfo(b []byte, ui *UserInformation) ([]byte, error) {
	b, start := beginItem(b, itemUserInformation, 0)
	var err error

	// 51H Maximum Length, PS3.8 D.1 Table D.1-1: item-length 4.
	b = append(b, subMaxLength, 0, 0, 4)
	b = binary.BigEndian.AppendUint32(b, ui.MaxLength)

	// 52H Implementation Class UID, PS3.7 D.3.3.2 Table D.3-1.
	if ui.ImplementationClassUID != "" {
		if err := checkUID(ui.ImplementationClassUID); err != nil {
			return b, fmt.Errorf("implementation class UID: %w", err)
		}
		b, _ = appendStringItem(b, subImplementationClass, ui.ImplementationClassUID)
	}

	// 53H Asynchronous Operations Window, PS3.7 D.3.3.3 Table D.3-7:
	// item-length 4.
	if a := ui.AsyncOps; a != nil {
		b = append(b, subAsyncOpsWindow, 0, 0, 4)
		b = binary.BigEndian.AppendUint16(b, a.MaxOpsInvoked)
		b = binary.BigEndian.AppendUint16(b, a.MaxOpsPerformed)
	}

	// 54H SCP/SCU Role Selection, PS3.7 D.3.3.4 Table D.3-9: UID-length,
	// SOP-class-uid, SCU-role, SCP-role.
	for _, rs := range ui.RoleSelections {
		if err := checkUID(rs.SOPClassUID); err != nil {
			return b, fmt.Errorf("role selection SOP class: %w", err)
		}
		var s int
		b, s = beginItem(b, subRoleSelection, 0)
		b = appendString16(b, rs.SOPClassUID)
		b = append(b, boolByte(rs.SCURole), boolByte(rs.SCPRole))
		_ = endItem(b, s) // at most 2 + 64 + 2 bytes
	}

	// 55H Implementation Version Name, PS3.7 D.3.3.2 Table D.3-3.
	if ui.ImplementationVersionName != "" {
		if err := checkVersionName(ui.ImplementationVersionName); err != nil {
			return b, err
		}
		b, _ = appendStringItem(b, subImplementationVer, ui.ImplementationVersionName)
	}

	// 56H SOP Class Extended Negotiation, PS3.7 D.3.3.5 Table D.3-11:
	// SOP-class-uid-length, SOP-class-uid, service-class-application-
	// information to the end of the sub-item.
	for _, en := range ui.ExtendedNegotiations {
		if err := checkUID(en.SOPClassUID); err != nil {
			return b, fmt.Errorf("extended negotiation SOP class: %w", err)
		}
		var s int
		b, s = beginItem(b, subExtendedNegotiation, 0)
		b = appendString16(b, en.SOPClassUID)
		b = append(b, en.Info...)
		if err := endItem(b, s); err != nil {
			return b, fmt.Errorf("extended negotiation %s: %w", en.SOPClassUID, err)
		}
	}

	// 57H SOP Class Common Extended Negotiation, PS3.7 D.3.3.6
	// Tables D.3-12 and D.3-13: byte 2 is the sub-item-version, 0.
	for _, cen := range ui.CommonExtendedNegotiations {
		if err := checkUID(cen.SOPClassUID); err != nil {
			return b, fmt.Errorf("common extended negotiation SOP class: %w", err)
		}
		if err := checkUID(cen.ServiceClassUID); err != nil {
			return b, fmt.Errorf("common extended negotiation service class: %w", err)
		}
		var s int
		b, s = beginItem(b, subCommonExtNegotiation, 0)
		b = appendString16(b, cen.SOPClassUID)
		b = appendString16(b, cen.ServiceClassUID)
		rel := len(b)
		b = append(b, 0, 0) // related-general-sop-class-identification-length
		for _, uid := range cen.RelatedGeneralSOPClasses {
			if err := checkUID(uid); err != nil {
				return b, fmt.Errorf("common extended negotiation related general SOP class: %w", err)
			}
			b = appendString16(b, uid)
		}
		n := len(b) - rel - 2
		if n > maxItemLength {
			return b, fmt.Errorf("%w: related general SOP classes of %d bytes", errFieldTooLong, n)
		}
		binary.BigEndian.PutUint16(b[rel:], uint16(n))
		if err := endItem(b, s); err != nil {
			return b, fmt.Errorf("common extended negotiation %s: %w", cen.SOPClassUID, err)
		}
	}

	// 58H User Identity (RQ), PS3.7 D.3.3.7 Table D.3-14.
	if id := ui.UserIdentity; id != nil {
		var s int
		b, s = beginItem(b, subUserIdentityRQ, 0)
		b = append(b, id.Type, boolByte(id.PositiveResponseRequested))
		if b, err = appendBytes16(b, id.Primary, "user identity primary field"); err != nil {
			return b, err
		}
		if b, err = appendBytes16(b, id.Secondary, "user identity secondary field"); err != nil {
			return b, err
		}
		if err := endItem(b, s); err != nil {
			return b, fmt.Errorf("user identity: %w", err)
		}
	}

	// 59H User Identity (AC), PS3.7 D.3.3.7 Table D.3-15.
	if id := ui.UserIdentityResponse; id != nil {
		var s int
		b, s = beginItem(b, subUserIdentityAC, 0)
		if b, err = appendBytes16(b, id.ServerResponse, "user identity server response"); err != nil {
			return b, err
		}
		if err := endItem(b, s); err != nil {
			return b, fmt.Errorf("user identity response: %w", err)
		}
	}

	if err := endItem(b, start); err != nil {
		return b, fmt.Errorf("user information: %w", err)
	}
	return b, nil
}

func boolByte(v bool) byte {
	if v {
		return 1
	}
	return 0
}

// appendAETitle appends s, less its non-significant leading and trailing
// spaces, padded with spaces to 16 bytes (PS3.8 9.3.2 Table 9-11: "encoded
// as 16 characters ... with leading and trailing spaces (20H) being
// non-significant"); never with NULs. The caller has checked s.
func appendAETitle(b []byte, s string) []byte {
	s = strings.Trim(s, " ")
	b = append(b, s...)
	for i := len(s); i < aeTitleLength; i++ {
		b = append(b, ' ')
	}
	return b
}

// CheckAETitle reports whether s can be sent as an AE title: after its
// non-significant leading and trailing spaces are removed it must be 1 to
// 16 characters (PS3.8 9.3.2 Table 9-11: sixteen spaces, "no Application
// Name specified", "shall not be used") of the ISO 646 G0 set without
// backslash or control characters (PS3.5 6.2, AE value representation).
// The error matches errInvalidAETitle.
//
// Decoding does not apply this check, so that the caller can answer a
// peer's unacceptable AE title with an A-ASSOCIATE-RJ rather than an
// abort; it can call CheckAETitle to decide.
func CheckAETitle(s string) error {
	t := strings.Trim(s, " ")
	switch {
	case t == "":
		return fmt.Errorf("%w: empty", errInvalidAETitle)
	case len(t) > aeTitleLength:
		return fmt.Errorf("%w: %d characters, more than %d", errInvalidAETitle, len(t), aeTitleLength)
	}
	for i := 0; i < len(t); i++ {
		if c := t[i]; c < 0x20 || c > 0x7e || c == '\\' {
			return fmt.Errorf("%w: character 0x%02x at %d", errInvalidAETitle, c, i)
		}
	}
	return nil
}

// checkUID reports whether s can be sent as a UID or syntax name: 1 to 64
// characters, digits and dots only, so in particular without the NUL or
// space padding of PS3.5 9.1 ("Components shall not be padded", PS3.8
// Annex F). Leading zeros in components, which Annex F also forbids, are
// not refused, because peers' UIDs with them exist and we must be able to
// echo them back. The error matches errInvalidUID.
func checkUID(s string) error {
	switch {
	case s == "":
		return fmt.Errorf("%w: empty", errInvalidUID)
	case len(s) > maxUIDLength:
		return fmt.Errorf("%w: %d characters, more than %d", errInvalidUID, len(s), maxUIDLength)
	}
	for i := 0; i < len(s); i++ {
		if c := s[i]; (c < '0' || c > '9') && c != '.' {
			return fmt.Errorf("%w: character 0x%02x at %d", errInvalidUID, c, i)
		}
	}
	return nil
}

// checkVersionName applies PS3.7 D.3.3.2 Table D.3-3: "a string of 1 to 16
// ISO 646:1990 (basic G0 set) characters".
func checkVersionName(s string) error {
	if len(s) > maxImplementationVersionName {
		return fmt.Errorf("%w: implementation version name of %d characters, more than %d", errInvalidField, len(s), maxImplementationVersionName)
	}
	for i := 0; i < len(s); i++ {
		if c := s[i]; c < 0x20 || c > 0x7e {
			return fmt.Errorf("%w: implementation version name character 0x%02x at %d", errInvalidField, c, i)
		}
	}
	return nil
}
