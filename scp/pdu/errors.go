package pdu

import (
	"errors"
	"strconv"
)

// Sentinel errors. Every error this package returns is, or wraps, one of
// these or an io error, so callers test with errors.Is.
var (
	// ErrTooLong: a PDU declared a PDU-length above the Reader's limit.
	// Returned as *TooLongError.
	ErrTooLong = errors.New("pdu: PDU too long")

	// ErrMalformed: a PDU body (or header) breaks PS3.8 9.3. Returned as
	// *ParseError, which names the A-ABORT reason to send.
	ErrMalformed = errors.New("pdu: malformed PDU")

	// ErrUnknownType: the PDU-type byte is none of the seven of PS3.8
	// 9.3.1. Returned as a *ParseError with reason unrecognized-PDU; it is
	// also ErrMalformed.
	ErrUnknownType = errors.New("pdu: unknown PDU type")

	// ErrInvalidAETitle: an AE title to be encoded is empty, longer than
	// 16 bytes or contains a backslash or a control character (PS3.8 9.3.2
	// Table 9-11; PS3.5 6.2 AE value representation).
	ErrInvalidAETitle = errors.New("pdu: invalid AE title")

	// ErrInvalidUID: a UID or syntax name to be encoded is empty, longer
	// than 64 bytes or not digits and dots (PS3.8 Annex F; PS3.5 9.1).
	ErrInvalidUID = errors.New("pdu: invalid UID")

	// ErrInvalidField: some other value to be encoded is outside what the
	// standard allows, e.g. an even presentation context ID or a
	// P-DATA-TF without PDVs.
	ErrInvalidField = errors.New("pdu: invalid field value")

	// ErrFieldTooLong: a value to be encoded does not fit its length
	// field (16 bits for items, 32 bits for PDUs).
	ErrFieldTooLong = errors.New("pdu: field too long for its length field")
)

// TooLongError reports a PDU whose declared PDU-length exceeds the limit.
// Nothing of the body has been read or allocated. It matches ErrTooLong.
type TooLongError struct {
	Type   Type
	Length uint32 // the declared PDU-length
	Max    uint32 // the limit in force
}

func (e *TooLongError) Error() string {
	return "pdu: " + e.Type.String() + " PDU-length " + strconv.FormatUint(uint64(e.Length), 10) +
		" exceeds limit " + strconv.FormatUint(uint64(e.Max), 10)
}

// Unwrap returns ErrTooLong.
func (e *TooLongError) Unwrap() error { return ErrTooLong }

// ParseError reports a PDU that breaks PS3.8 9.3. Reason is the A-ABORT
// reason (PS3.8 9.3.8 Table 9-26) the caller should send with source
// service-provider. It matches ErrMalformed, and also Err when set
// (ErrUnknownType for an unknown PDU type).
type ParseError struct {
	Type   Type
	Reason AbortReason
	Msg    string
	// Err is a more specific sentinel, or nil.
	Err error
}

func (e *ParseError) Error() string {
	return "pdu: malformed " + e.Type.String() + ": " + e.Msg + " (abort reason " + e.Reason.String() + ")"
}

// Unwrap returns ErrMalformed and, when set, Err.
func (e *ParseError) Unwrap() []error {
	if e.Err != nil {
		return []error{ErrMalformed, e.Err}
	}
	return []error{ErrMalformed}
}

// AbortReasonFor returns the A-ABORT reason (PS3.8 9.3.8 Table 9-26) to
// send, with source service-provider, after Reader.Next returned err:
// a *ParseError's own reason; invalid-PDU-parameter-value for a
// *TooLongError, because the PDU-length field holds a value the
// negotiation does not allow ("it shall be a protocol error", PS3.8 D.1);
// reason-not-specified for anything else, such as a network error.
func AbortReasonFor(err error) AbortReason {
	var pe *ParseError
	if errors.As(err, &pe) {
		return pe.Reason
	}
	if errors.Is(err, ErrTooLong) {
		return AbortReasonInvalidPDUParameterValue
	}
	return AbortReasonNotSpecified
}
