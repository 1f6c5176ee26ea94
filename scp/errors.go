package scp

import (
	"errors"
	"fmt"

	"dwiaudit/scp/pdu"
)

// Sentinel errors of package scp.
var (
	// ErrServerClosed is returned by Server.Serve after Shutdown or Close.
	ErrServerClosed = errors.New("scp: server closed")

	// ErrIncomplete is returned (wrapped) by the data-set reader of a
	// C-STORE when the peer stopped before the last fragment: it aborted,
	// released, went silent past the idle timeout or closed the
	// connection. A handler that sees it must not keep what it read.
	ErrIncomplete = errors.New("scp: data set incomplete")

	// errAborted is returned (wrapped in *abortError) when the peer sent
	// A-ABORT.
	errAborted = errors.New("scp: association aborted")

	// errRejected is returned (wrapped in *RejectError) when the acceptor
	// answered A-ASSOCIATE-RJ.
	errRejected = errors.New("scp: association rejected")

	// errNoContext is returned by the requestor when no accepted
	// presentation context fits the SOP class and transfer syntax of an
	// object.
	errNoContext = errors.New("scp: no accepted presentation context")

	// errProtocol is wrapped by errors that describe a peer breaking
	// PS3.8 or PS3.7 (an unexpected PDU, a fragment on the wrong context).
	errProtocol = errors.New("scp: protocol error")

	// errAssociationClosed is returned when a requestor association is
	// used after Release, Abort or a failure.
	errAssociationClosed = errors.New("scp: association closed")
)

// RejectError carries the A-ASSOCIATE-RJ the acceptor sent (PS3.8 9.3.4).
type RejectError struct {
	RJ pdu.AssociateRJ
}

func (e *RejectError) Error() string {
	return "association rejected: " + e.RJ.Describe()
}

// Unwrap makes errors.Is(err, errRejected) true.
func (e *RejectError) Unwrap() error { return errRejected }

// abortError carries the A-ABORT the peer sent (PS3.8 9.3.8).
type abortError struct {
	Abort pdu.Abort
}

func (e *abortError) Error() string {
	if e.Abort.Source == pdu.AbortSourceServiceProvider {
		return fmt.Sprintf("association aborted by service provider: %v", e.Abort.Reason)
	}
	return "association aborted by peer"
}

// Unwrap makes errors.Is(err, errAborted) true.
func (e *abortError) Unwrap() error { return errAborted }

// protocolError builds an error wrapping errProtocol with the A-ABORT
// reason the acceptor or requestor sends for it.
type protocolError struct {
	reason pdu.AbortReason
	msg    string
}

func (e *protocolError) Error() string { return "scp: protocol error: " + e.msg }
func (e *protocolError) Unwrap() error { return errProtocol }

func protocolErrorf(reason pdu.AbortReason, format string, args ...any) error {
	return &protocolError{reason: reason, msg: fmt.Sprintf(format, args...)}
}

// abortReasonFor gives the A-ABORT reason (PS3.8 9.3.8 Table 9-26) to
// send for an error met while reading from the peer.
func abortReasonFor(err error) pdu.AbortReason {
	var pe *protocolError
	if errors.As(err, &pe) {
		return pe.reason
	}
	return pdu.AbortReasonFor(err)
}
