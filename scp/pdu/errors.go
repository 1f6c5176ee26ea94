package pdu

import (
	"errors"
	"strconv"
)

// Sentinel errors. Every error this package returns is, or wraps, one of
// these or an io error, so callers test with errors.Is.
var (
	// errTooLong: a PDU declared a PDU-length above the Reader's limit.
	// Returned as *tooLongError.
	errTooLong = errors.New("pdu: PDU too long")

	// errMalformed: a PDU body (or header) breaks PS3.8 9.3. Returned as
	// *parseError, which names the A-ABORT reason to send.
	errMalformed = errors.New("pdu: malformed PDU")

	// errUnknownType: the PDU-type byte is none of the seven of PS3.8
	// 9.3.1. Returned as a *parseError with reason unrecognized-PDU; it is
	// also errMalformed.
	errUnknownType = errors.New("pdu: unknown PDU type")

	// errInvalidAETitle: an AE title to be encoded is empty, longer than
	// 16 bytes or contains a backslash or a control character (PS3.8 9.3.2
	// Table 9-11; PS3.5 6.2 AE value representation).
	errInvalidAETitle = errors.New("pdu: invalid AE title")

	// errInvalidUID: a UID or syntax name to be encoded is empty, longer
	// than 64 bytes or not digits and dots (PS3.8 Annex F; PS3.5 9.1).
	errInvalidUID = errors.New("pdu: invalid UID")

	// errInvalidField: some other value to be encoded is outside what the
	// standard allows, e.g. an even presentation context ID or a
	// P-DATA-TF without PDVs.
	errInvalidField = errors.New("pdu: invalid field value")

	// errFieldTooLong: a value to be encoded does not fit its length
	// field (16 bits for items, 32 bits for PDUs).
	errFieldTooLong = errors.New("pdu: field too long for its length field")
)

// tooLongError reports a PDU whose declared PDU-length exceeds the limit.
// Nothing of the body has been read or allocated. It matches errTooLong.
type tooLongError struct {
	Type   Type
	Length uint32 // the declared PDU-length
	Max    uint32 // the limit in force
}

func (e *tooLongError) Error() string {
	return "pdu: " + e.Type.String() + " PDU-length " + strconv.FormatUint(uint64(e.Length), 10) +
		" exceeds limit " + strconv.FormatUint(uint64(e.Max), 10)
}

// Unwrap returns errTooLong.
func (e *tooLongError) Unwrap() error { return errTooLong }

// parseError reports a PDU that breaks PS3.8 9.3. Reason is the A-ABORT
// reason (PS3.8 9.3.8 Table 9-26) the caller should send with source
// service-provider. It matches errMalformed, and also Err when set
// (errUnknownType for an unknown PDU type).
type parseError struct {
	Type   Type
	Reason AbortReason
	Msg    string
	// Err is a more specific sentinel, or nil.
	Err error
}

func (e *parseError) Error() string {
	return "pdu: malformed " + e.Type.String() + ": " + e.Msg + " (abort reason " + e.Reason.String() + ")"
}

// Unwrap returns errMalformed and, when set, Err.
func (e *parseError) Unwrap() []error {
	if e.Err != nil {
		return []error{errMalformed, e.Err}
	}
	return []error{errMalformed}
}

// AbortReasonFor returns the A-ABORT reason (PS3.8 9.3.8 Table 9-26) to
// send, with source service-provider, after Reader.Next returned err:
// a *parseError's own reason; invalid-PDU-parameter-value for a
// *tooLongError, because the PDU-length field holds a value the
// negotiation does not allow ("it shall be a protocol error", PS3.8 D.1);
// reason-not-specified for anything else, such as a network error.
func AbortReasonFor(err error) AbortReason {
	var pe *parseError
	if errors.As(err, &pe) {
		return pe.Reason
	}
	if errors.Is(err, errTooLong) {
		return AbortReasonInvalidPDUParameterValue
	}
	return AbortReasonNotSpecified
}
