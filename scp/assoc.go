package scp

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"net"
	"runtime/debug"
	"strings"
	"sync"
	"time"

	"dwiaudit/scp/dimse"
	"dwiaudit/scp/pdu"
)

type connState int

const (
	stateAwaitingRQ connState = iota // transport open, waiting for A-ASSOCIATE-RQ (PS3.8 Sta2)
	stateIdle                        // association established, between messages (Sta6)
	stateActive                      // a DIMSE message is being received or answered
	stateClosing
)

// conn is one accepted transport connection. Its serve goroutine owns
// everything but state.
type conn struct {
	srv *Server
	nc  net.Conn

	mu    sync.Mutex // guards state
	state connState
}

// interruptIfIdle makes a connection that waits between messages return
// from its read at once, so Shutdown can abort it. Called with srv.mu held.
func (c *conn) interruptIfIdle() {
	c.mu.Lock()
	defer c.mu.Unlock()
	if c.state == stateIdle || c.state == stateAwaitingRQ {
		c.nc.SetReadDeadline(time.Now())
	}
}

// setState records a transition and reports whether the server is
// shutting down (in which case an idle association must end).
func (c *conn) setState(st connState) (shuttingDown bool) {
	c.mu.Lock()
	c.state = st
	c.mu.Unlock()
	return c.srv.inShutdown.Load()
}

// assoc is the state of one established association.
type assoc struct {
	m        *msgConn
	calling  string
	called   string
	contexts map[byte]acceptedContext
	sum      AssociationSummary
}

type acceptedContext struct {
	abstract string
	ts       string
}

func (c *conn) serve() {
	s := c.srv
	start := time.Now()
	ctx, cancel := context.WithCancel(context.Background())
	sum := AssociationSummary{Remote: c.nc.RemoteAddr().String()}
	log := s.logger().With("peer", sum.Remote)
	defer func() {
		if r := recover(); r != nil {
			log.Error("association goroutine panicked", "panic", r, "stack", string(debug.Stack()))
			sum.Result, sum.Detail = "closed", fmt.Sprint("internal error: ", r)
		}
		cancel()
		c.nc.Close()
		c.setState(stateClosing)
		s.trackConn(c, false)
	}()

	m := newMsgConn(c.nc, s.maxPDU(), orDefault(s.ARTIMTimeout, DefaultARTIMTimeout), orDefault(s.WriteTimeout, DefaultWriteTimeout))
	p, err := m.readPDU()
	if err != nil {
		c.failBeforeAssociation(m, err, log)
		return
	}
	rq, ok := p.(*pdu.AssociateRQ)
	if !ok {
		// PS3.8 9.2 state table, Sta2: any PDU but A-ASSOCIATE-RQ is
		// answered with A-ABORT (AA-1).
		log.Debug("first PDU is not A-ASSOCIATE-RQ", "pdu", p.Type())
		c.abort(m, pdu.AbortReasonUnexpectedPDU)
		return
	}
	sum.CallingAE, sum.CalledAE = rq.CallingAETitle, rq.CalledAETitle
	log = log.With("calling_ae", rq.CallingAETitle, "called_ae", rq.CalledAETitle)

	if rj := c.judge(rq); rj != nil {
		m.writePDU(rj)
		c.lingerClose(m, orDefault(s.ARTIMTimeout, DefaultARTIMTimeout))
		sum.Result, sum.Detail, sum.Duration = "rejected", rj.Describe(), time.Since(start)
		c.finish(log, sum)
		return
	}
	defer s.releaseAssociation()

	a := &assoc{m: m, calling: rq.CallingAETitle, called: rq.CalledAETitle, contexts: map[byte]acceptedContext{}, sum: sum}
	ac := &pdu.AssociateAC{
		ProtocolVersion:    pdu.ProtocolVersion1,
		CalledAETitle:      rq.CalledAETitle,
		CallingAETitle:     rq.CallingAETitle,
		ApplicationContext: pdu.ApplicationContextName,
		UserInfo: pdu.UserInformation{
			MaxLength:                 s.maxPDU(),
			ImplementationClassUID:    ImplementationClassUID,
			ImplementationVersionName: ImplementationVersionName,
		},
	}
	ac.PresentationContexts = negotiate(rq.PresentationContexts, s.acceptsAbstract)
	for i, pc := range ac.PresentationContexts {
		if pc.Result == pdu.PCAcceptance {
			a.contexts[pc.ID] = acceptedContext{abstract: rq.PresentationContexts[i].AbstractSyntax, ts: pc.TransferSyntax}
		}
	}
	if rq.UserInfo.AsyncOps != nil {
		// PS3.7 D.3.3.3: we perform one operation at a time.
		ac.UserInfo.AsyncOps = &pdu.AsyncOpsWindow{MaxOpsInvoked: 1, MaxOpsPerformed: 1}
	}
	for _, rs := range rq.UserInfo.RoleSelections {
		// PS3.7 D.3.3.4: the peer may be SCU (it sends, we store); we do
		// not take the SCU role on an association we accepted.
		ac.UserInfo.RoleSelections = append(ac.UserInfo.RoleSelections, pdu.RoleSelection{
			SOPClassUID: rs.SOPClassUID, SCURole: rs.SCURole, SCPRole: false,
		})
	}
	m.peerMax = rq.UserInfo.MaxLength
	if err := m.writePDU(ac); err != nil {
		sum.Result, sum.Detail, sum.Duration = "closed", err.Error(), time.Since(start)
		c.finish(log, sum)
		return
	}
	m.idleTimeout = orDefault(s.IdleTimeout, DefaultIdleTimeout)
	c.run(ctx, a, log)
	a.sum.Bytes = m.bytesIn
	a.sum.Duration = time.Since(start)
	c.finish(log, a.sum)
}

// failBeforeAssociation handles a read error while waiting for
// A-ASSOCIATE-RQ. Closing before any byte, or ARTIM expiry, is ordinary
// (port scans, health checks) and logged at debug level only.
func (c *conn) failBeforeAssociation(m *msgConn, err error, log *slog.Logger) {
	switch {
	case errors.Is(err, io.EOF), errors.Is(err, net.ErrClosed):
		log.Debug("connection closed before A-ASSOCIATE-RQ")
	case isTimeout(err):
		if c.srv.inShutdown.Load() {
			log.Debug("connection closed by shutdown before A-ASSOCIATE-RQ")
			return
		}
		// PS3.8 9.1.5: ARTIM expiry closes the transport connection.
		log.Debug("ARTIM expired before A-ASSOCIATE-RQ")
	default:
		log.Debug("bad PDU before association", "err", err)
		c.abort(m, abortReasonFor(err))
	}
}

// judge applies PS3.8 9.3.4 to an A-ASSOCIATE-RQ, returning the
// A-ASSOCIATE-RJ to send or nil to accept. A nil result has reserved a
// slot against MaxAssociations.
func (c *conn) judge(rq *pdu.AssociateRQ) *pdu.AssociateRJ {
	s := c.srv
	switch {
	case rq.ProtocolVersion&pdu.ProtocolVersion1 == 0:
		// PS3.8 9.3.2 Table 9-11: bit 0 set means version 1; without it
		// the ACSE provider rejects (Table 9-21: source 2, reason 2).
		return &pdu.AssociateRJ{Result: pdu.RejectPermanent, Source: pdu.SourceServiceProviderACSE, Reason: pdu.ReasonProtocolVersionNotSupported}
	case strings.TrimRight(rq.ApplicationContext, "\x00 ") != pdu.ApplicationContextName:
		return &pdu.AssociateRJ{Result: pdu.RejectPermanent, Source: pdu.SourceServiceUser, Reason: pdu.ReasonApplicationContextNotSupported}
	case rq.CalledAETitle != strings.TrimSpace(s.aeTitle()) || pdu.CheckAETitle(rq.CalledAETitle) != nil:
		return &pdu.AssociateRJ{Result: pdu.RejectPermanent, Source: pdu.SourceServiceUser, Reason: pdu.ReasonCalledAENotRecognized}
	case !s.callingAllowed(rq.CallingAETitle) || pdu.CheckAETitle(rq.CallingAETitle) != nil ||
		(s.AllowCalling != nil && !s.AllowCalling(rq.CallingAETitle, c.nc.RemoteAddr())):
		// An AE title we could not echo back in the A-ASSOCIATE-AC
		// (control characters, backslash) is "not recognized" too.
		return &pdu.AssociateRJ{Result: pdu.RejectPermanent, Source: pdu.SourceServiceUser, Reason: pdu.ReasonCallingAENotRecognized}
	case !s.reserveAssociation():
		// Table 9-21: source 3 (presentation provider), reason 2 (local
		// limit exceeded), transient so the sender retries later.
		return &pdu.AssociateRJ{Result: pdu.RejectTransient, Source: pdu.SourceServiceProviderPresentation, Reason: pdu.ReasonLocalLimitExceeded}
	}
	return nil
}

// run is the data-transfer phase (PS3.8 Sta6): one DIMSE message at a
// time until release, abort, timeout or shutdown.
func (c *conn) run(ctx context.Context, a *assoc, log *slog.Logger) {
	m := a.m
	for {
		if c.setState(stateIdle) {
			a.sum.Result = "shutdown"
			c.abort(m, pdu.AbortReasonNotSpecified)
			return
		}
		var p pdu.PDU
		if m.pending != nil {
			p, m.pending = m.pending, nil
			if a.control(c, p) {
				return
			}
			continue
		}
		ctxID, cmd, ctrl, err := m.readCommand(func() { c.setState(stateActive) })
		if err != nil {
			c.readFailed(a, err)
			return
		}
		if ctrl != nil {
			if a.control(c, ctrl) {
				return
			}
			continue
		}
		if err := c.dispatch(ctx, a, ctxID, cmd, log); err != nil {
			c.readFailed(a, err)
			return
		}
	}
}

// control handles a non-P-DATA PDU in the data-transfer phase and
// reports whether the association is over.
func (a *assoc) control(c *conn, p pdu.PDU) bool {
	switch p := p.(type) {
	case *pdu.ReleaseRQ:
		// PS3.8 9.2 AR-2/AR-4: answer A-RELEASE-RP, then the requestor
		// closes the transport (we wait at most ARTIM).
		a.m.writePDU(&pdu.ReleaseRP{})
		c.lingerClose(a.m, orDefault(c.srv.ARTIMTimeout, DefaultARTIMTimeout))
		a.sum.Result = "released"
		return true
	case *pdu.Abort:
		a.sum.Result, a.sum.Detail = "aborted-by-peer", (&abortError{Abort: *p}).Error()
		return true
	default:
		// A-ASSOCIATE-* or A-RELEASE-RP here is an unexpected PDU (AA-8).
		a.sum.Result, a.sum.Detail = "aborted", fmt.Sprintf("unexpected %v", p.Type())
		c.abort(a.m, pdu.AbortReasonUnexpectedPDU)
		return true
	}
}

// readFailed ends an association after a read or protocol error.
func (c *conn) readFailed(a *assoc, err error) {
	switch {
	case a.m.pending != nil:
		// The peer released or aborted in the middle of a message.
		p := a.m.pending
		a.m.pending = nil
		if !a.control(c, p) {
			c.abort(a.m, pdu.AbortReasonUnexpectedPDU)
		}
		if a.sum.Detail == "" {
			a.sum.Detail = err.Error()
		}
	case isTimeout(err) && c.srv.inShutdown.Load():
		a.sum.Result = "shutdown"
		c.abort(a.m, pdu.AbortReasonNotSpecified)
	case isTimeout(err):
		a.sum.Result, a.sum.Detail = "timeout", "no PDU within the idle timeout"
		c.abort(a.m, pdu.AbortReasonNotSpecified)
	case errors.Is(err, io.EOF), errors.Is(err, io.ErrUnexpectedEOF), errors.Is(err, net.ErrClosed):
		a.sum.Result, a.sum.Detail = "closed", "peer closed the connection without release"
	default:
		a.sum.Result, a.sum.Detail = "aborted", err.Error()
		c.abort(a.m, abortReasonFor(err))
	}
}

// dispatch performs one DIMSE request. A returned error ends the
// association.
func (c *conn) dispatch(ctx context.Context, a *assoc, ctxID byte, cmd *dimse.Command, log *slog.Logger) error {
	pc, ok := a.contexts[ctxID]
	if !ok {
		return protocolErrorf(pdu.AbortReasonInvalidPDUParameterValue, "presentation context %d was not accepted", ctxID)
	}
	data := &dataReader{m: a.m, ctxID: ctxID}
	if !cmd.HasDataSet() {
		data.last, data.err = true, io.EOF
	}
	var status dimse.Status
	var comment string
	switch cmd.CommandField {
	case dimse.CEchoRQ:
		if err := data.drain(); err != nil {
			return err
		}
		a.sum.Echoes++
		if pc.abstract != VerificationSOPClass {
			status, comment = dimse.StatusSOPClassNotSupported, "C-ECHO on a storage presentation context"
		}
	case dimse.CStoreRQ:
		status, comment = c.store(ctx, a, pc, cmd, data, log)
		if !data.complete() {
			if err := data.drain(); err != nil {
				// The data set never completed: the peer is gone or broke
				// the protocol, and no response can be sent.
				a.sum.Failures++
				return err
			}
		}
		if status.Class() == dimse.ClassFailure {
			a.sum.Failures++
		} else {
			a.sum.Instances++
		}
		if a.sum.StoreStatuses == nil {
			a.sum.StoreStatuses = map[dimse.Status]int{}
		}
		a.sum.StoreStatuses[status]++
	case dimse.CCancelRQ:
		// PS3.7 9.3.2.3: C-CANCEL has no response; nothing of ours runs
		// long enough to cancel.
		return data.drain()
	default:
		if err := data.drain(); err != nil {
			return err
		}
		status, comment = dimse.StatusUnrecognizedOperation, fmt.Sprintf("%v is not supported", cmd.CommandField)
	}
	return a.m.writeCommand(ctxID, cmd.Response(status, comment))
}

// store hands one C-STORE to the handler and chooses the status. A
// handler error, a panic or a data set cut short never gives success.
func (c *conn) store(ctx context.Context, a *assoc, pc acceptedContext, cmd *dimse.Command, data *dataReader, log *slog.Logger) (status dimse.Status, comment string) {
	if !cmd.HasDataSet() {
		return dimse.StatusCannotUnderstand, "C-STORE-RQ without a data set"
	}
	if strings.TrimRight(cmd.AffectedSOPClassUID, "\x00 ") != pc.abstract {
		return dimse.StatusSOPClassNotSupported, "SOP class differs from the presentation context"
	}
	req := &StoreRequest{
		CallingAETitle:    a.calling,
		CalledAETitle:     a.called,
		RemoteAddr:        c.nc.RemoteAddr(),
		SOPClassUID:       cmd.AffectedSOPClassUID,
		SOPInstanceUID:    cmd.AffectedSOPInstanceUID,
		TransferSyntaxUID: pc.ts,
		MessageID:         cmd.MessageID,
		Priority:          cmd.Priority,
		Data:              data,
	}
	err := func() (err error) {
		defer func() {
			if r := recover(); r != nil {
				log.Error("store handler panicked", "panic", r, "stack", string(debug.Stack()))
				err = dimse.NewStatusError(dimse.StatusProcessingFailure, "internal error in the storage handler", fmt.Errorf("scp: handler panic: %v", r))
			}
		}()
		return c.srv.Handler.HandleStore(ctx, req)
	}()
	if err == nil && data.err != nil && data.err != io.EOF {
		// The handler ignored a failed read: never report success.
		err = data.err
	}
	status, comment = dimse.StatusOf(err)
	if status.Class() == dimse.ClassSuccess && err != nil {
		status = dimse.StatusProcessingFailure
	}
	return status, comment
}

// abort sends A-ABORT (PS3.8 9.3.8) and closes the connection. Errors are
// ignored: the association is over either way.
func (c *conn) abort(m *msgConn, reason pdu.AbortReason) {
	src := pdu.AbortSourceServiceProvider
	if reason == pdu.AbortReasonNotSpecified {
		src = pdu.AbortSourceServiceUser
	}
	m.writePDU(&pdu.Abort{Source: src, Reason: reason})
	c.lingerClose(m, abortLingerLimit)
}

// abortLingerLimit bounds how long we wait for the peer after A-ABORT.
const abortLingerLimit = time.Second

// lingerClose half-closes the connection and waits (at most d) for the
// peer to close its side, so the last PDU we wrote is not lost to a TCP
// reset when unread input is pending (PS3.8 9.1.5 ARTIM, Sta13).
func (c *conn) lingerClose(m *msgConn, d time.Duration) {
	if cw, ok := c.nc.(interface{ CloseWrite() error }); ok {
		cw.CloseWrite()
	}
	c.nc.SetReadDeadline(time.Now().Add(d))
	io.Copy(io.Discard, io.LimitReader(c.nc, maxDrainAfterClose))
	c.nc.Close()
}

// finish logs the association summary: one line per association, with no
// patient data.
func (c *conn) finish(log *slog.Logger, sum AssociationSummary) {
	log.Info("association",
		"result", sum.Result,
		"detail", sum.Detail,
		"instances", sum.Instances,
		"failures", sum.Failures,
		"echoes", sum.Echoes,
		"bytes", sum.Bytes,
		"duration", sum.Duration.Round(time.Millisecond),
	)
	if f := c.srv.OnAssociation; f != nil {
		f(sum)
	}
}
