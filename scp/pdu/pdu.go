package pdu

import "strconv"

// Type is the PDU-type byte that starts every PDU (PS3.8 9.3.1, Figure 9-1).
type Type byte

// The seven PDU types of the DICOM UL protocol (PS3.8 9.3.1).
const (
	TypeAssociateRQ Type = 0x01 // PS3.8 9.3.2 Table 9-11
	TypeAssociateAC Type = 0x02 // PS3.8 9.3.3 Table 9-17
	TypeAssociateRJ Type = 0x03 // PS3.8 9.3.4 Table 9-21
	TypePDataTF     Type = 0x04 // PS3.8 9.3.5 Table 9-22
	TypeReleaseRQ   Type = 0x05 // PS3.8 9.3.6 Table 9-24
	TypeReleaseRP   Type = 0x06 // PS3.8 9.3.7 Table 9-25
	TypeAbort       Type = 0x07 // PS3.8 9.3.8 Table 9-26
)

// String returns the PS3.8 name of the PDU type, e.g. "A-ASSOCIATE-RQ".
func (t Type) String() string {
	switch t {
	case TypeAssociateRQ:
		return "A-ASSOCIATE-RQ"
	case TypeAssociateAC:
		return "A-ASSOCIATE-AC"
	case TypeAssociateRJ:
		return "A-ASSOCIATE-RJ"
	case TypePDataTF:
		return "P-DATA-TF"
	case TypeReleaseRQ:
		return "A-RELEASE-RQ"
	case TypeReleaseRP:
		return "A-RELEASE-RP"
	case TypeAbort:
		return "A-ABORT"
	}
	return "PDU type 0x" + hex2(byte(t))
}

// PDU is one decoded protocol data unit. It is implemented by *AssociateRQ,
// *AssociateAC, *AssociateRJ, *PDataTF, *ReleaseRQ, *ReleaseRP and *Abort.
type PDU interface {
	Type() Type
}

// ApplicationContextName is the one DICOM application context name
// (PS3.7 A.2.1), carried in the application context item (PS3.8 9.3.2.1).
const ApplicationContextName = "1.2.840.10008.3.1.1.1"

// ProtocolVersion1 is the protocol-version field with bit 0 set, the only
// version of the DICOM UL protocol (PS3.8 9.3.2 Table 9-11, bytes 7-8).
const ProtocolVersion1 uint16 = 0x0001

// Item types inside A-ASSOCIATE-RQ/AC (PS3.8 9.3.2, 9.3.3, Annex D and
// PS3.7 D.3.3).
const (
	itemApplicationContext  = 0x10 // PS3.8 9.3.2.1 Table 9-12
	itemPresentationCtxRQ   = 0x20 // PS3.8 9.3.2.2 Table 9-13
	itemPresentationCtxAC   = 0x21 // PS3.8 9.3.3.2 Table 9-18
	itemAbstractSyntax      = 0x30 // PS3.8 9.3.2.2.1 Table 9-14
	itemTransferSyntax      = 0x40 // PS3.8 9.3.2.2.2 Table 9-15, 9.3.3.2.1 Table 9-19
	itemUserInformation     = 0x50 // PS3.8 9.3.2.3 Table 9-16, 9.3.3.3 Table 9-20
	subMaxLength            = 0x51 // PS3.8 D.1 Table D.1-1
	subImplementationClass  = 0x52 // PS3.7 D.3.3.2 Table D.3-1
	subAsyncOpsWindow       = 0x53 // PS3.7 D.3.3.3 Table D.3-7
	subRoleSelection        = 0x54 // PS3.7 D.3.3.4 Table D.3-9
	subImplementationVer    = 0x55 // PS3.7 D.3.3.2 Table D.3-3
	subExtendedNegotiation  = 0x56 // PS3.7 D.3.3.5 Table D.3-11
	subCommonExtNegotiation = 0x57 // PS3.7 D.3.3.6 Table D.3-12
	subUserIdentityRQ       = 0x58 // PS3.7 D.3.3.7 Table D.3-14
	subUserIdentityAC       = 0x59 // PS3.7 D.3.3.7 Table D.3-15
)

// Field sizes fixed by the standard.
const (
	// headerLength is PDU-type, reserved and the 4-byte PDU-length
	// (PS3.8 9.3.1, bytes 1-6 of every PDU).
	headerLength = 6
	// aeTitleLength is the fixed width of an AE title field
	// (PS3.8 9.3.2 Table 9-11, bytes 11-26 and 27-42).
	aeTitleLength = 16
	// associateFixedLength is the part of an A-ASSOCIATE-RQ/AC body before
	// the variable items: protocol version, reserved, two AE titles and 32
	// reserved bytes (PS3.8 Table 9-11 bytes 7-74).
	associateFixedLength = 68
	// fixedBodyLength is the PDU-length of A-ASSOCIATE-RJ, A-RELEASE-RQ/RP
	// and A-ABORT (PS3.8 Tables 9-21, 9-24, 9-25, 9-26: "fixed value of
	// 00000004H").
	fixedBodyLength = 4
	// maxUIDLength is the longest UID or syntax name (PS3.8 Annex F;
	// PS3.5 9.1).
	maxUIDLength = 64
	// maxImplementationVersionName is the longest implementation version
	// name (PS3.7 D.3.3.2 Table D.3-3: "1 to 16 ... characters").
	maxImplementationVersionName = 16
	// maxItemLength is the largest value of a 2-byte item-length field.
	maxItemLength = 0xFFFF
)

// AssociateRQ is an A-ASSOCIATE-RQ PDU (PS3.8 9.3.2 Table 9-11).
type AssociateRQ struct {
	// ProtocolVersion is bytes 7-8; bit 0 set means version 1. A receiver
	// implementing only version 1 tests bit 0 only (Table 9-11).
	ProtocolVersion uint16
	// CalledAETitle (bytes 11-26) and CallingAETitle (bytes 27-42), without
	// the padding spaces.
	CalledAETitle, CallingAETitle string
	// ApplicationContext is the application context name of the
	// application context item (PS3.8 9.3.2.1 Table 9-12); normally
	// ApplicationContextName.
	ApplicationContext string
	// PresentationContexts are the presentation context items
	// (PS3.8 9.3.2.2 Table 9-13), in the order received.
	PresentationContexts []PresentationContextRQ
	// UserInfo is the user information item (PS3.8 9.3.2.3 Table 9-16).
	UserInfo UserInformation
}

// Type returns TypeAssociateRQ.
func (*AssociateRQ) Type() Type { return TypeAssociateRQ }

// AssociateAC is an A-ASSOCIATE-AC PDU (PS3.8 9.3.3 Table 9-17).
type AssociateAC struct {
	// ProtocolVersion is bytes 7-8 (Table 9-17).
	ProtocolVersion uint16
	// CalledAETitle and CallingAETitle are reserved fields in the AC that
	// "shall be sent with a value identical to the value received in the
	// same field of the A-ASSOCIATE-RQ PDU" (Table 9-17 bytes 11-42).
	CalledAETitle, CallingAETitle string
	// ApplicationContext is the application context name (PS3.8 9.3.3.1).
	ApplicationContext string
	// PresentationContexts are the presentation context items of the AC
	// (PS3.8 9.3.3.2 Table 9-18), one per context proposed.
	PresentationContexts []PresentationContextAC
	// UserInfo is the user information item (PS3.8 9.3.3.3 Table 9-20).
	UserInfo UserInformation
}

// Type returns TypeAssociateAC.
func (*AssociateAC) Type() Type { return TypeAssociateAC }

// PresentationContextRQ is a presentation context item of an
// A-ASSOCIATE-RQ (item type 20H, PS3.8 9.3.2.2 Table 9-13).
type PresentationContextRQ struct {
	// ID is the presentation-context-ID, an odd number 1-255 (Table 9-13
	// byte 5).
	ID byte
	// AbstractSyntax is the abstract syntax name (sub-item 30H,
	// Table 9-14), usually a SOP Class UID.
	AbstractSyntax string
	// TransferSyntaxes are the proposed transfer syntax names (sub-items
	// 40H, Table 9-15), in the order proposed.
	TransferSyntaxes []string
}

// PresentationContextAC is a presentation context item of an
// A-ASSOCIATE-AC (item type 21H, PS3.8 9.3.3.2 Table 9-18).
type PresentationContextAC struct {
	// ID is the presentation-context-ID of the proposal answered.
	ID byte
	// Result is the result/reason field (Table 9-18 byte 7).
	Result PCResult
	// TransferSyntax is the accepted transfer syntax (sub-item 40H,
	// Table 9-19). When Result is not PCAcceptance the field "shall not be
	// significant" and may be empty.
	TransferSyntax string
}

// PCResult is the result/reason of a presentation context in an
// A-ASSOCIATE-AC (PS3.8 9.3.3.2 Table 9-18 byte 7).
type PCResult byte

// Presentation context results (PS3.8 9.3.3.2 Table 9-18).
const (
	PCAcceptance                   PCResult = 0
	PCUserRejection                PCResult = 1
	PCNoReason                     PCResult = 2 // provider rejection
	PCAbstractSyntaxNotSupported   PCResult = 3 // provider rejection
	PCTransferSyntaxesNotSupported PCResult = 4 // provider rejection
)

// String returns the PS3.8 Table 9-18 name of the result.
func (r PCResult) String() string {
	switch r {
	case PCAcceptance:
		return "acceptance"
	case PCUserRejection:
		return "user-rejection"
	case PCNoReason:
		return "no-reason (provider rejection)"
	case PCAbstractSyntaxNotSupported:
		return "abstract-syntax-not-supported (provider rejection)"
	case PCTransferSyntaxesNotSupported:
		return "transfer-syntaxes-not-supported (provider rejection)"
	}
	return "reserved result " + strconv.Itoa(int(r))
}

// UserInformation is the content of the user information item (item type
// 50H, PS3.8 9.3.2.3 Table 9-16 and 9.3.3.3 Table 9-20). Each field is one
// kind of user-data sub-item; a zero field means the sub-item is absent,
// except MaxLength, which is always sent. Sub-items are encoded in
// ascending item-type order because "some older applications might expect"
// it (PS3.8 9.3.2.3 Note).
type UserInformation struct {
	// MaxLength is the maximum-length-received of sub-item 51H
	// (PS3.8 D.1 Table D.1-1): the largest P-DATA-TF PDU-length the sender
	// of this PDU accepts; 0 means no limit. It is encoded whenever the
	// UserInformation is encoded, because its support "is required for all
	// DICOM V3.0 conforming implementations" (PS3.8 D.1).
	MaxLength uint32
	// ImplementationClassUID is sub-item 52H (PS3.7 D.3.3.2 Table D.3-1).
	// PS3.7 requires every implementation to send one; it is omitted only
	// when empty.
	ImplementationClassUID string
	// ImplementationVersionName is sub-item 55H (PS3.7 D.3.3.2
	// Table D.3-3), 1 to 16 characters.
	ImplementationVersionName string
	// AsyncOps is sub-item 53H (PS3.7 D.3.3.3 Table D.3-7).
	AsyncOps *AsyncOpsWindow
	// RoleSelections are sub-items 54H (PS3.7 D.3.3.4 Table D.3-9).
	RoleSelections []RoleSelection
	// ExtendedNegotiations are sub-items 56H (PS3.7 D.3.3.5 Table D.3-11).
	ExtendedNegotiations []ExtendedNegotiation
	// CommonExtendedNegotiations are sub-items 57H (PS3.7 D.3.3.6
	// Table D.3-12).
	CommonExtendedNegotiations []CommonExtendedNegotiation
	// UserIdentity is sub-item 58H, sent in an A-ASSOCIATE-RQ
	// (PS3.7 D.3.3.7 Table D.3-14).
	UserIdentity *UserIdentityRQ
	// UserIdentityResponse is sub-item 59H, sent in an A-ASSOCIATE-AC
	// (PS3.7 D.3.3.7 Table D.3-15).
	UserIdentityResponse *UserIdentityAC
}

// AsyncOpsWindow is the asynchronous operations window sub-item
// (PS3.7 D.3.3.3 Tables D.3-7 and D.3-8). Zero means unlimited.
type AsyncOpsWindow struct {
	MaxOpsInvoked   uint16
	MaxOpsPerformed uint16
}

// RoleSelection is one SCP/SCU role selection sub-item (PS3.7 D.3.3.4
// Tables D.3-9 and D.3-10). In an RQ the booleans are the roles proposed,
// in an AC whether each proposal is accepted.
type RoleSelection struct {
	SOPClassUID string
	SCURole     bool
	SCPRole     bool
}

// ExtendedNegotiation is one SOP class extended negotiation sub-item
// (PS3.7 D.3.3.5 Table D.3-11); Info is the service-class-application-
// information, whose meaning PS3.4 defines per service class.
type ExtendedNegotiation struct {
	SOPClassUID string
	Info        []byte
}

// CommonExtendedNegotiation is one SOP class common extended negotiation
// sub-item (PS3.7 D.3.3.6 Tables D.3-12 and D.3-13).
type CommonExtendedNegotiation struct {
	SOPClassUID              string
	ServiceClassUID          string
	RelatedGeneralSOPClasses []string
}

// User identity types (PS3.7 D.3.3.7 Table D.3-14 byte 5).
const (
	userIdentityUsername         byte = 1
	userIdentityUsernamePasscode byte = 2
	userIdentityKerberos         byte = 3
	userIdentitySAML             byte = 4
	userIdentityJWT              byte = 5
)

// UserIdentityRQ is the user identity negotiation sub-item of an
// A-ASSOCIATE-RQ (PS3.7 D.3.3.7 Table D.3-14). Primary and Secondary are
// credentials; never log them.
type UserIdentityRQ struct {
	Type                      byte
	PositiveResponseRequested bool
	Primary                   []byte
	Secondary                 []byte
}

// UserIdentityAC is the user identity negotiation sub-item of an
// A-ASSOCIATE-AC (PS3.7 D.3.3.7 Table D.3-15).
type UserIdentityAC struct {
	ServerResponse []byte
}

// AssociateRJ is an A-ASSOCIATE-RJ PDU (PS3.8 9.3.4 Table 9-21).
type AssociateRJ struct {
	Result RejectResult
	Source RejectSource
	Reason RejectReason
}

// Type returns TypeAssociateRJ.
func (*AssociateRJ) Type() Type { return TypeAssociateRJ }

// RejectResult is the result field of an A-ASSOCIATE-RJ (Table 9-21 byte 8).
type RejectResult byte

// Reject results (PS3.8 9.3.4 Table 9-21).
const (
	RejectPermanent RejectResult = 1
	RejectTransient RejectResult = 2
)

// String returns the Table 9-21 name, e.g. "rejected-permanent".
func (r RejectResult) String() string {
	switch r {
	case RejectPermanent:
		return "rejected-permanent"
	case RejectTransient:
		return "rejected-transient"
	}
	return "reserved result " + strconv.Itoa(int(r))
}

// RejectSource is the source field of an A-ASSOCIATE-RJ (Table 9-21 byte 9).
type RejectSource byte

// Reject sources (PS3.8 9.3.4 Table 9-21).
const (
	SourceServiceUser                 RejectSource = 1
	SourceServiceProviderACSE         RejectSource = 2
	SourceServiceProviderPresentation RejectSource = 3
)

// String returns the Table 9-21 name of the source.
func (s RejectSource) String() string {
	switch s {
	case SourceServiceUser:
		return "service-user"
	case SourceServiceProviderACSE:
		return "service-provider (ACSE)"
	case SourceServiceProviderPresentation:
		return "service-provider (presentation)"
	}
	return "reserved source " + strconv.Itoa(int(s))
}

// RejectReason is the raw reason/diag. field of an A-ASSOCIATE-RJ
// (Table 9-21 byte 10); its meaning depends on the source, so use
// AssociateRJ.Describe to name it.
type RejectReason byte

// Reject reasons (PS3.8 9.3.4 Table 9-21). The same number means different
// things for different sources.
const (
	// Source SourceServiceUser.
	ReasonNoReasonGiven                  RejectReason = 1
	ReasonApplicationContextNotSupported RejectReason = 2
	ReasonCallingAENotRecognized         RejectReason = 3
	ReasonCalledAENotRecognized          RejectReason = 7

	// Source SourceServiceProviderACSE.
	ReasonACSENoReason                RejectReason = 1
	ReasonProtocolVersionNotSupported RejectReason = 2

	// Source SourceServiceProviderPresentation.
	ReasonTemporaryCongestion RejectReason = 1
	ReasonLocalLimitExceeded  RejectReason = 2
)

// Describe names the reason in the context of the source, e.g. "called AE
// title not recognized" (PS3.8 9.3.4 Table 9-21).
func (rj *AssociateRJ) Describe() string {
	switch rj.Source {
	case SourceServiceUser:
		switch rj.Reason {
		case ReasonNoReasonGiven:
			return "no reason given"
		case ReasonApplicationContextNotSupported:
			return "application context name not supported"
		case ReasonCallingAENotRecognized:
			return "calling AE title not recognized"
		case ReasonCalledAENotRecognized:
			return "called AE title not recognized"
		}
	case SourceServiceProviderACSE:
		switch rj.Reason {
		case ReasonACSENoReason:
			return "no reason given"
		case ReasonProtocolVersionNotSupported:
			return "protocol version not supported"
		}
	case SourceServiceProviderPresentation:
		switch rj.Reason {
		case ReasonTemporaryCongestion:
			return "temporary congestion"
		case ReasonLocalLimitExceeded:
			return "local limit exceeded"
		}
	}
	return "reserved reason " + strconv.Itoa(int(rj.Reason))
}

// String gives result, source and reason, e.g. "rejected-permanent by
// service-user: called AE title not recognized".
func (rj *AssociateRJ) String() string {
	return rj.Result.String() + " by " + rj.Source.String() + ": " + rj.Describe()
}

// PDataTF is a P-DATA-TF PDU (PS3.8 9.3.5 Table 9-22): one or more
// presentation data value items.
type PDataTF struct {
	Items []PDV
}

// Type returns TypePDataTF.
func (*PDataTF) Type() Type { return TypePDataTF }

// PDV is one presentation data value item (PS3.8 9.3.5.1 Table 9-23) with
// its message control header (PS3.8 E.2) split into Command and Last.
type PDV struct {
	// ContextID is the presentation-context-ID (Table 9-23 byte 5), odd.
	ContextID byte
	// Command is bit 0 of the message control header: the fragment is
	// command information rather than data set (PS3.8 E.2).
	Command bool
	// Last is bit 1 of the message control header: the fragment is the
	// last of its command or data set (PS3.8 E.2).
	Last bool
	// Data is the message fragment after the control header.
	Data []byte
}

// Message control header bits (PS3.8 E.2). Bits 2-7 "are always set to 0 by
// the sender and never checked by the receiver".
const (
	controlCommand = 0x01
	controlLast    = 0x02
)

// ReleaseRQ is an A-RELEASE-RQ PDU (PS3.8 9.3.6 Table 9-24).
type ReleaseRQ struct{}

// Type returns TypeReleaseRQ.
func (*ReleaseRQ) Type() Type { return TypeReleaseRQ }

// ReleaseRP is an A-RELEASE-RP PDU (PS3.8 9.3.7 Table 9-25).
type ReleaseRP struct{}

// Type returns TypeReleaseRP.
func (*ReleaseRP) Type() Type { return TypeReleaseRP }

// Abort is an A-ABORT PDU (PS3.8 9.3.8 Table 9-26).
type Abort struct {
	Source AbortSource
	// Reason is significant only when Source is AbortSourceServiceProvider;
	// otherwise it is sent as 0 (Table 9-26 byte 10).
	Reason AbortReason
}

// Type returns TypeAbort.
func (*Abort) Type() Type { return TypeAbort }

// String gives source and reason, e.g. "A-ABORT by service-provider:
// invalid-PDU-parameter-value".
func (a *Abort) String() string {
	if a.Source == AbortSourceServiceProvider {
		return "A-ABORT by " + a.Source.String() + ": " + a.Reason.String()
	}
	return "A-ABORT by " + a.Source.String()
}

// AbortSource is the source field of an A-ABORT (Table 9-26 byte 9).
type AbortSource byte

// Abort sources (PS3.8 9.3.8 Table 9-26; 1 is reserved).
const (
	AbortSourceServiceUser     AbortSource = 0
	AbortSourceServiceProvider AbortSource = 2
)

// String returns the Table 9-26 name of the source.
func (s AbortSource) String() string {
	switch s {
	case AbortSourceServiceUser:
		return "service-user"
	case AbortSourceServiceProvider:
		return "service-provider"
	}
	return "reserved source " + strconv.Itoa(int(s))
}

// AbortReason is the reason/diag. field of an A-ABORT (Table 9-26 byte 10).
type AbortReason byte

// Abort reasons for source AbortSourceServiceProvider (PS3.8 9.3.8
// Table 9-26; 3 is reserved).
const (
	AbortReasonNotSpecified             AbortReason = 0
	AbortReasonUnrecognizedPDU          AbortReason = 1
	AbortReasonUnexpectedPDU            AbortReason = 2
	AbortReasonUnrecognizedPDUParameter AbortReason = 4
	AbortReasonUnexpectedPDUParameter   AbortReason = 5
	AbortReasonInvalidPDUParameterValue AbortReason = 6
)

// String returns the Table 9-26 name of the reason.
func (r AbortReason) String() string {
	switch r {
	case AbortReasonNotSpecified:
		return "reason-not-specified"
	case AbortReasonUnrecognizedPDU:
		return "unrecognized-PDU"
	case AbortReasonUnexpectedPDU:
		return "unexpected-PDU"
	case AbortReasonUnrecognizedPDUParameter:
		return "unrecognized-PDU-parameter"
	case AbortReasonUnexpectedPDUParameter:
		return "unexpected-PDU-parameter"
	case AbortReasonInvalidPDUParameterValue:
		return "invalid-PDU-parameter-value"
	}
	return "reserved reason " + strconv.Itoa(int(r))
}

// hex2 formats b as two lower-case hex digits without fmt, so that String
// methods stay cheap.
func hex2(b byte) string {
	const digits = "0123456789abcdef"
	return string([]byte{digits[b>>4], digits[b&0x0f]})
}
