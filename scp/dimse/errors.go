package dimse

import (
	"errors"
	"fmt"
	"strings"
)

// Sentinel errors, all in one place. Every error Decode returns, and
// every command Encode refuses, wraps exactly one of these (test with
// errors.Is); the wrapping message adds the tag and the numbers involved.
var (
	// errTruncated: the command set ends inside an element header or
	// value.
	errTruncated = errors.New("dimse: truncated command set")
	// errNotCommandGroup: an element outside group 0000 appears in the
	// command set (PS3.7 6.3.1: a command set holds group 0000 only).
	errNotCommandGroup = errors.New("dimse: element outside command group 0000")
	// errGroupLength: Command Group Length (0000,0000) disagrees with the
	// number of bytes that follow it (PS3.7 E.1).
	errGroupLength = errors.New("dimse: command group length mismatch")
	// errElementOrder: elements are not in strictly ascending tag order,
	// which also catches repeated elements (PS3.5 7.1).
	errElementOrder = errors.New("dimse: elements out of order or repeated")
	// errValueLength: a known element has a value length its VR forbids,
	// e.g. a US that is not 2 bytes (PS3.5 6.2).
	errValueLength = errors.New("dimse: bad value length")
	// errMissingElement: a mandatory element is absent: Command Field and
	// Command Data Set Type in every command, Status in every response
	// (PS3.7 9.3 and 10.3 message tables).
	errMissingElement = errors.New("dimse: missing mandatory element")
	// errInvalidCommand: Encode was given a command that would break the
	// PS3.7 message tables, e.g. a C-STORE-RQ without an Affected SOP
	// Instance UID.
	errInvalidCommand = errors.New("dimse: invalid command")
)

// MaxCommentLen is the longest Error Comment (0000,0902) we send: its VR
// is LO, at most 64 characters (PS3.5 6.2 Table 6.2-1).
const MaxCommentLen = 64

// StatusError is an error that carries the DIMSE status to send back. A
// handler returns one (possibly wrapped) to choose the response status
// and Error Comment; StatusOf finds it.
type StatusError struct {
	// Status is sent as Status (0000,0900).
	Status Status
	// Comment is sent as Error Comment (0000,0902), after truncateComment.
	// It goes to the peer: never put patient identifiers in it.
	Comment string
	// Err is the underlying cause, for local logs and errors.Is; it is
	// not sent.
	Err error
}

// NewStatusError returns a StatusError; err may be nil.
func NewStatusError(status Status, comment string, err error) *StatusError {
	return &StatusError{Status: status, Comment: comment, Err: err}
}

// Errorf returns a StatusError whose comment is formatted like
// fmt.Errorf. Errors given with %w become its Err, so errors.Is and
// errors.As see through it.
func Errorf(status Status, format string, args ...any) *StatusError {
	err := fmt.Errorf(format, args...)
	se := &StatusError{Status: status, Comment: err.Error()}
	if errors.Unwrap(err) != nil || isMultiWrap(err) {
		se.Err = err
	}
	return se
}

// isMultiWrap reports whether err wraps several errors (fmt.Errorf with
// more than one %w).
func isMultiWrap(err error) bool {
	u, ok := err.(interface{ Unwrap() []error })
	return ok && len(u.Unwrap()) > 0
}

// Error returns "dimse: status 0xA700 (out of resources): <comment>",
// followed by the cause when it says more than the comment.
func (e *StatusError) Error() string {
	if e == nil {
		return "<nil>" // as fmt prints a nil pointer; keeps StatusOf from panicking
	}
	var b strings.Builder
	b.WriteString("dimse: status ")
	b.WriteString(e.Status.String())
	if e.Comment != "" {
		b.WriteString(": ")
		b.WriteString(e.Comment)
	}
	if e.Err != nil && e.Err.Error() != e.Comment {
		b.WriteString(": ")
		b.WriteString(e.Err.Error())
	}
	return b.String()
}

// Unwrap returns the underlying cause.
func (e *StatusError) Unwrap() error {
	if e == nil {
		return nil
	}
	return e.Err
}

// StatusOf turns the error a handler returned into the Status and Error
// Comment of the response. It is the only place in dwiaudit where a Go
// error becomes a wire status, so every handler gets the same mapping:
//
//   - nil: StatusSuccess and no comment;
//   - an error that is or wraps a *StatusError (errors.As): its Status and
//     Comment;
//   - any other error: StatusProcessingFailure (0110H, PS3.7 C.5) with the
//     error text as comment.
//
// The comment is always passed through truncateComment, so it is ready
// for Error Comment (0000,0902). Error texts reach the peer: keep patient
// identifiers out of them.
func StatusOf(err error) (Status, string) {
	if err == nil {
		return StatusSuccess, ""
	}
	var se *StatusError
	if errors.As(err, &se) && se != nil {
		return se.Status, truncateComment(se.Comment)
	}
	return StatusProcessingFailure, truncateComment(err.Error())
}

// truncateComment makes s a valid LO value for Error Comment (0000,0902):
// control characters (including CR, LF and TAB) become spaces, a
// backslash, which LO forbids, becomes '/', and characters outside the
// default repertoire become '?' (a command set has no Specific Character
// Set, so only ISO-IR 6 applies; PS3.5 6.1.2 and 6.2). The result is cut
// to MaxCommentLen characters and trailing spaces, which are padding in
// LO, are dropped.
func truncateComment(s string) string {
	var b strings.Builder
	n := 0
	for _, r := range s {
		if n == MaxCommentLen {
			break
		}
		switch {
		case r == '\\':
			r = '/'
		case r < 0x20 || r == 0x7F:
			r = ' '
		case r > 0x7E:
			r = '?'
		}
		b.WriteRune(r)
		n++
	}
	return strings.TrimRight(b.String(), " ")
}
