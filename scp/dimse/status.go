package dimse

import "fmt"

// Status is the value of Status (0000,0900) in a response (PS3.7 Annex C).
type Status uint16

// General status codes (PS3.7 Annex C; the 01xx/02xx meanings are fixed
// for every service, PS3.7 Annex C introduction) and the C-STORE specific
// ones (PS3.4 B.2.3 Table B.2-1). For the Axxx, Bxxx and Cxxx ranges the
// constant is the first code of the range; an SCP may use any code in it.
const (
	StatusSuccess Status = 0x0000

	// Warning class.
	StatusWarning                            Status = 0x0001
	StatusAttributeListError                 Status = 0x0107
	StatusAttributeValueOutOfRange           Status = 0x0116
	StatusCoercionOfDataElements             Status = 0xB000 // PS3.4 Table B.2-1
	StatusElementsDiscarded                  Status = 0xB006 // PS3.4 Table B.2-1
	StatusDataSetDoesNotMatchSOPClassWarning Status = 0xB007 // PS3.4 Table B.2-1

	// Failure class, general codes.
	StatusNoSuchAttribute       Status = 0x0105
	StatusInvalidAttributeValue Status = 0x0106
	StatusProcessingFailure     Status = 0x0110
	StatusDuplicateSOPInstance  Status = 0x0111
	StatusNoSuchSOPInstance     Status = 0x0112
	StatusNoSuchEventType       Status = 0x0113
	StatusNoSuchArgument        Status = 0x0114
	StatusInvalidArgumentValue  Status = 0x0115
	StatusInvalidObjectInstance Status = 0x0117
	StatusNoSuchSOPClass        Status = 0x0118
	StatusClassInstanceConflict Status = 0x0119
	StatusMissingAttribute      Status = 0x0120
	StatusMissingAttributeValue Status = 0x0121
	StatusSOPClassNotSupported  Status = 0x0122
	StatusNoSuchAction          Status = 0x0123
	StatusNotAuthorized         Status = 0x0124
	StatusDuplicateInvocation   Status = 0x0210
	StatusUnrecognizedOperation Status = 0x0211
	StatusMistypedArgument      Status = 0x0212
	StatusResourceLimitation    Status = 0x0213

	// Failure class, C-STORE codes (PS3.4 Table B.2-1).
	StatusOutOfResources              Status = 0xA700 // Refused: Out of Resources, A7xx
	StatusDataSetDoesNotMatchSOPClass Status = 0xA900 // Error: Data Set does not match SOP Class, A9xx
	StatusCannotUnderstand            Status = 0xC000 // Error: Cannot understand, Cxxx

	// Cancel and pending classes (C-FIND/GET/MOVE).
	StatusCancel         Status = 0xFE00
	StatusPending        Status = 0xFF00
	StatusPendingWarning Status = 0xFF01
)

// StatusClass is the Status Class a status code belongs to
// (PS3.7 Annex C).
type StatusClass int

// Status classes, PS3.7 C.1 to C.5.
const (
	ClassSuccess StatusClass = iota
	ClassWarning
	ClassFailure
	ClassCancel
	ClassPending
)

// String returns the class name in lower case, e.g. "warning".
func (c StatusClass) String() string {
	switch c {
	case ClassSuccess:
		return "success"
	case ClassWarning:
		return "warning"
	case ClassFailure:
		return "failure"
	case ClassCancel:
		return "cancel"
	case ClassPending:
		return "pending"
	}
	return fmt.Sprintf("StatusClass(%d)", int(c))
}

// Class sorts s into its Status Class by the convention of the PS3.7
// Annex C introduction: Success 0000; Warning 0001, Bxxx, 0107, 0116;
// Cancel FE00; Pending FF00 and FF01; Failure Axxx, Cxxx, 01xx, 02xx.
// Codes the standard leaves unassigned also count as failure, because a
// peer that sends one has not told us the operation worked.
func (s Status) Class() StatusClass {
	switch {
	case s == StatusSuccess:
		return ClassSuccess
	case s == StatusWarning, s == StatusAttributeListError, s == StatusAttributeValueOutOfRange, s&0xF000 == 0xB000:
		return ClassWarning
	case s == StatusCancel:
		return ClassCancel
	case s == StatusPending, s == StatusPendingWarning:
		return ClassPending
	}
	return ClassFailure
}

// String returns the code and its meaning, e.g. "0xA700 (out of
// resources)"; a code without a known meaning shows its class instead,
// e.g. "0xD001 (failure)". The Axxx, A9xx and Cxxx meanings are those of
// C-STORE (PS3.4 Table B.2-1), the only service dwiaudit provides with
// service-specific codes.
func (s Status) String() string {
	return fmt.Sprintf("0x%04X (%s)", uint16(s), s.meaning())
}

// meaning is the PS3.7 Annex C / PS3.4 B.2.3 meaning of s in lower case.
// The 01xx/02xx meanings follow PS3.7 C.5 (cross-checked against
// pynetdicom's table of the general statuses).
func (s Status) meaning() string {
	switch s {
	case StatusSuccess:
		return "success"
	case StatusWarning:
		return "warning"
	case StatusAttributeListError:
		return "attribute list error"
	case StatusAttributeValueOutOfRange:
		return "attribute value out of range"
	case StatusCoercionOfDataElements:
		return "coercion of data elements"
	case StatusElementsDiscarded:
		return "elements discarded"
	case StatusDataSetDoesNotMatchSOPClassWarning:
		return "data set does not match SOP class (warning)"
	case StatusNoSuchAttribute:
		return "no such attribute"
	case StatusInvalidAttributeValue:
		return "invalid attribute value"
	case StatusProcessingFailure:
		return "processing failure"
	case StatusDuplicateSOPInstance:
		return "duplicate SOP instance"
	case StatusNoSuchSOPInstance:
		return "no such SOP instance"
	case StatusNoSuchEventType:
		return "no such event type"
	case StatusNoSuchArgument:
		return "no such argument"
	case StatusInvalidArgumentValue:
		return "invalid argument value"
	case StatusInvalidObjectInstance:
		return "invalid object instance"
	case StatusNoSuchSOPClass:
		return "no such SOP class"
	case StatusClassInstanceConflict:
		return "class-instance conflict"
	case StatusMissingAttribute:
		return "missing attribute"
	case StatusMissingAttributeValue:
		return "missing attribute value"
	case StatusSOPClassNotSupported:
		return "SOP class not supported"
	case StatusNoSuchAction:
		return "no such action"
	case StatusNotAuthorized:
		return "not authorized"
	case StatusDuplicateInvocation:
		return "duplicate invocation"
	case StatusUnrecognizedOperation:
		return "unrecognized operation"
	case StatusMistypedArgument:
		return "mistyped argument"
	case StatusResourceLimitation:
		return "resource limitation"
	case StatusCancel:
		return "cancel"
	case StatusPending:
		return "pending"
	case StatusPendingWarning:
		return "pending, optional keys not supported"
	}
	switch s & 0xFF00 {
	case 0xA700:
		return "out of resources"
	case 0xA900:
		return "data set does not match SOP class"
	}
	if s&0xF000 == 0xC000 {
		return "cannot understand"
	}
	return s.Class().String()
}
