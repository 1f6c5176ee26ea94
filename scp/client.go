package scp

import (
	"context"
	"errors"
	"fmt"
	"io"
	"net"
	"os"
	"strings"
	"time"

	"dwiaudit/scp/dimse"
	"dwiaudit/scp/part10"
	"dwiaudit/scp/pdu"
)

// Requestor defaults.
const (
	DefaultCallingAETitle = "DWIAUDIT"
	DefaultCalledAETitle  = DefaultAETitle // the node's own default, so echo and send reach a node on defaults

	// defaultResponseTimeout bounds the wait for a DIMSE response after
	// the request was sent: a peer that stores to a slow disk may take a
	// few seconds, a minute means it is stuck.
	defaultResponseTimeout = time.Minute

	// defaultDialTimeout bounds the TCP connect.
	defaultDialTimeout = 10 * time.Second

	// maxProposedContexts is the number of presentation context IDs
	// available: odd integers 1..255 (PS3.8 9.3.2.2).
	maxProposedContexts = 128
)

// Context is one proposed presentation context: an abstract syntax (SOP
// class) and the transfer syntaxes we can send it in.
type Context struct {
	AbstractSyntax   string
	TransferSyntaxes []string
}

// Dialer opens associations as requestor (SCU). The zero value uses the
// defaults above.
type Dialer struct {
	CallingAETitle  string
	CalledAETitle   string
	MaxPDULength    uint32        // the Maximum Length we advertise; 0 means DefaultMaxPDULength
	DialTimeout     time.Duration // TCP connect
	ARTIMTimeout    time.Duration // wait for A-ASSOCIATE-AC/RJ and A-RELEASE-RP
	ResponseTimeout time.Duration // wait for each DIMSE response
	WriteTimeout    time.Duration
}

func (d *Dialer) calling() string {
	if d.CallingAETitle == "" {
		return DefaultCallingAETitle
	}
	return d.CallingAETitle
}

func (d *Dialer) called() string {
	if d.CalledAETitle == "" {
		return DefaultCalledAETitle
	}
	return d.CalledAETitle
}

func (d *Dialer) maxPDU() uint32 {
	if d.MaxPDULength == 0 {
		return DefaultMaxPDULength
	}
	return d.MaxPDULength
}

// Association is an association we requested. It is not safe for
// concurrent use: one DIMSE operation at a time, as negotiated.
type Association struct {
	m   *msgConn
	d   *Dialer
	ac  *pdu.AssociateAC
	ctx map[contextKey]byte // accepted contexts
	// verification is the accepted Verification context, if any.
	verification byte
	msgID        uint16
	err          error // sticky: set once the association is unusable
}

type contextKey struct{ abstract, ts string }

// Dial connects to addr and negotiates an association proposing
// contexts. A rejection is returned as *RejectError.
func (d *Dialer) Dial(ctx context.Context, addr string, contexts []Context) (*Association, error) {
	if len(contexts) == 0 {
		return nil, errors.New("scp: no presentation contexts to propose")
	}
	if len(contexts) > maxProposedContexts {
		return nil, fmt.Errorf("scp: %d presentation contexts proposed, at most %d fit in one association", len(contexts), maxProposedContexts)
	}
	if err := errors.Join(ValidateAETitle(d.calling()), ValidateAETitle(d.called())); err != nil {
		return nil, fmt.Errorf("scp: %w", err)
	}
	rq := &pdu.AssociateRQ{
		ProtocolVersion:    pdu.ProtocolVersion1,
		CalledAETitle:      d.called(),
		CallingAETitle:     d.calling(),
		ApplicationContext: pdu.ApplicationContextName,
		UserInfo: pdu.UserInformation{
			MaxLength:                 d.maxPDU(),
			ImplementationClassUID:    ImplementationClassUID,
			ImplementationVersionName: ImplementationVersionName,
		},
	}
	for i, c := range contexts {
		rq.PresentationContexts = append(rq.PresentationContexts, pdu.PresentationContextRQ{
			ID: byte(2*i + 1), AbstractSyntax: c.AbstractSyntax, TransferSyntaxes: c.TransferSyntaxes,
		})
	}

	nd := net.Dialer{Timeout: orDefault(d.DialTimeout, defaultDialTimeout)}
	nc, err := nd.DialContext(ctx, "tcp", addr)
	if err != nil {
		return nil, fmt.Errorf("scp: connect to %s: %w", addr, err)
	}
	if tc, ok := nc.(*net.TCPConn); ok {
		tc.SetNoDelay(true)
	}
	stop := context.AfterFunc(ctx, func() { nc.SetDeadline(time.Now()) })
	defer stop()

	m := newMsgConn(nc, d.maxPDU(), orDefault(d.ARTIMTimeout, DefaultARTIMTimeout), orDefault(d.WriteTimeout, DefaultWriteTimeout))
	if err := m.writePDU(rq); err != nil {
		nc.Close()
		return nil, fmt.Errorf("scp: send A-ASSOCIATE-RQ: %w", err)
	}
	p, err := m.readPDU()
	if err != nil {
		nc.Close()
		if ctx.Err() != nil {
			return nil, ctx.Err()
		}
		return nil, fmt.Errorf("scp: waiting for A-ASSOCIATE-AC: %w", err)
	}
	switch p := p.(type) {
	case *pdu.AssociateAC:
		a := &Association{m: m, d: d, ac: p, ctx: map[contextKey]byte{}}
		for _, pc := range p.PresentationContexts {
			if pc.Result != pdu.PCAcceptance || pc.ID%2 == 0 || int(pc.ID/2) >= len(contexts) {
				continue
			}
			prop := contexts[pc.ID/2]
			a.ctx[contextKey{prop.AbstractSyntax, strings.TrimRight(pc.TransferSyntax, "\x00 ")}] = pc.ID
			if prop.AbstractSyntax == VerificationSOPClass && a.verification == 0 {
				a.verification = pc.ID
			}
		}
		m.peerMax = p.UserInfo.MaxLength
		m.idleTimeout = orDefault(d.ResponseTimeout, defaultResponseTimeout)
		return a, nil
	case *pdu.AssociateRJ:
		nc.Close()
		return nil, &RejectError{RJ: *p}
	case *pdu.Abort:
		nc.Close()
		return nil, &abortError{Abort: *p}
	default:
		m.writePDU(&pdu.Abort{Source: pdu.AbortSourceServiceProvider, Reason: pdu.AbortReasonUnexpectedPDU})
		nc.Close()
		return nil, protocolErrorf(pdu.AbortReasonUnexpectedPDU, "answered A-ASSOCIATE-RQ with %v", p.Type())
	}
}

// PeerMaxPDULength is the Maximum Length the acceptor advertised (0 means
// no limit).
func (a *Association) PeerMaxPDULength() uint32 { return a.m.peerMax }

// Accepted reports whether a context for abstract syntax and transfer
// syntax ts was accepted.
func (a *Association) Accepted(abstract, ts string) bool {
	_, ok := a.ctx[contextKey{abstract, ts}]
	return ok
}

// acceptedContexts returns how many proposed contexts were accepted.
func (a *Association) acceptedContexts() int { return len(a.ctx) }

func (a *Association) nextMsgID() uint16 {
	a.msgID++
	if a.msgID == 0 {
		a.msgID = 1
	}
	return a.msgID
}

// Echo performs C-ECHO (PS3.7 9.1.5). A non-success status is returned as
// *dimse.StatusError.
func (a *Association) Echo(ctx context.Context) error {
	if a.err != nil {
		return a.err
	}
	if a.verification == 0 {
		return fmt.Errorf("%w for Verification", errNoContext)
	}
	rsp, err := a.roundTrip(ctx, a.verification, dimse.NewCEchoRQ(a.nextMsgID()), nil)
	if err != nil {
		return err
	}
	if rsp.Status != dimse.StatusSuccess {
		return dimse.NewStatusError(rsp.Status, rsp.ErrorComment, nil)
	}
	return nil
}

// StoreResponse is the outcome of one C-STORE as the acceptor answered.
type StoreResponse struct {
	Status       dimse.Status
	ErrorComment string
}

// Store sends one data set (without file meta) in transfer syntax ts and
// returns the acceptor's response. An error means no response arrived:
// the association is then unusable.
func (a *Association) Store(ctx context.Context, sopClass, sopInstance, ts string, data io.Reader) (StoreResponse, error) {
	if a.err != nil {
		return StoreResponse{}, a.err
	}
	id, ok := a.ctx[contextKey{sopClass, ts}]
	if !ok {
		return StoreResponse{}, fmt.Errorf("%w for SOP class %s in transfer syntax %s", errNoContext, sopClass, ts)
	}
	rq := dimse.NewCStoreRQ(a.nextMsgID(), sopClass, sopInstance, dimse.PriorityMedium)
	rsp, err := a.roundTrip(ctx, id, rq, data)
	if err != nil {
		return StoreResponse{}, err
	}
	return StoreResponse{Status: rsp.Status, ErrorComment: rsp.ErrorComment}, nil
}

// StoreFile sends a Part 10 file: its data set, in the transfer syntax
// its file meta names.
func (a *Association) StoreFile(ctx context.Context, path string) (StoreResponse, error) {
	meta, off, err := part10.ReadMetaFile(path)
	if err != nil {
		return StoreResponse{}, err
	}
	return a.storeFile(ctx, path, meta, off)
}

func (a *Association) storeFile(ctx context.Context, path string, meta part10.Meta, off int64) (StoreResponse, error) {
	f, err := os.Open(path)
	if err != nil {
		return StoreResponse{}, err
	}
	defer f.Close()
	if _, err := f.Seek(off, io.SeekStart); err != nil {
		return StoreResponse{}, err
	}
	return a.Store(ctx, meta.MediaStorageSOPClassUID, meta.MediaStorageSOPInstanceUID, meta.TransferSyntaxUID, f)
}

// roundTrip sends a request (and its data set) and reads the response.
func (a *Association) roundTrip(ctx context.Context, ctxID byte, rq *dimse.Command, data io.Reader) (*dimse.Command, error) {
	stop := context.AfterFunc(ctx, func() { a.m.nc.SetDeadline(time.Now()) })
	defer stop()
	fail := func(err error) (*dimse.Command, error) {
		if ctx.Err() != nil {
			err = ctx.Err()
		}
		a.fail(err)
		return nil, a.err
	}
	if data != nil {
		rq.CommandDataSetType = dimse.DataSetPresent
	}
	if err := a.m.writeCommand(ctxID, rq); err != nil {
		return fail(a.peerAbortOr(err))
	}
	if data != nil {
		if _, err := a.m.writeData(ctxID, data); err != nil {
			return fail(a.peerAbortOr(err))
		}
	}
	for {
		rid, rsp, ctrl, err := a.m.readCommand(nil)
		if err != nil {
			if p, ok := a.m.pending.(*pdu.Abort); ok {
				err = &abortError{Abort: *p}
			}
			return fail(err)
		}
		if ctrl != nil {
			if p, ok := ctrl.(*pdu.Abort); ok {
				return fail(&abortError{Abort: *p})
			}
			a.abort(pdu.AbortReasonUnexpectedPDU)
			return fail(protocolErrorf(pdu.AbortReasonUnexpectedPDU, "unexpected %v while waiting for a response", ctrl.Type()))
		}
		if rsp.HasDataSet() {
			d := &dataReader{m: a.m, ctxID: rid}
			if err := d.drain(); err != nil {
				return fail(err)
			}
		}
		if rsp.CommandField != rq.CommandField|0x8000 || rsp.MessageIDBeingRespondedTo != rq.MessageID {
			a.abort(pdu.AbortReasonUnexpectedPDUParameter)
			return fail(protocolErrorf(pdu.AbortReasonUnexpectedPDUParameter,
				"got %v for message %d, expected the response to %v %d", rsp.CommandField, rsp.MessageIDBeingRespondedTo, rq.CommandField, rq.MessageID))
		}
		return rsp, nil
	}
}

// peerAbortOr returns the peer's A-ABORT if one is waiting after a failed
// write (the acceptor aborted while we sent), else err.
func (a *Association) peerAbortOr(err error) error {
	a.m.nc.SetReadDeadline(time.Now().Add(100 * time.Millisecond))
	for range 64 {
		p, rerr := a.m.r.Next()
		if rerr != nil {
			break
		}
		if ab, ok := p.(*pdu.Abort); ok {
			return &abortError{Abort: *ab}
		}
	}
	return err
}

func (a *Association) fail(err error) {
	if a.err == nil {
		a.err = err
		a.m.nc.Close()
	}
}

func (a *Association) abort(reason pdu.AbortReason) {
	a.m.writePDU(&pdu.Abort{Source: pdu.AbortSourceServiceProvider, Reason: reason})
}

// Release ends the association with A-RELEASE-RQ and waits for
// A-RELEASE-RP (PS3.8 7.2).
func (a *Association) Release(ctx context.Context) error {
	if a.err != nil {
		return a.err
	}
	defer a.fail(errAssociationClosed)
	stop := context.AfterFunc(ctx, func() { a.m.nc.SetDeadline(time.Now()) })
	defer stop()
	if err := a.m.writePDU(&pdu.ReleaseRQ{}); err != nil {
		return fmt.Errorf("scp: send A-RELEASE-RQ: %w", err)
	}
	a.m.idleTimeout = orDefault(a.d.ARTIMTimeout, DefaultARTIMTimeout)
	for {
		p, err := a.m.readPDU()
		if err != nil {
			return fmt.Errorf("scp: waiting for A-RELEASE-RP: %w", err)
		}
		switch p := p.(type) {
		case *pdu.ReleaseRP:
			return nil
		case *pdu.Abort:
			return &abortError{Abort: *p}
		case *pdu.PDataTF:
			// PS3.8 9.2 allows P-DATA to arrive before the release
			// answer; nothing is outstanding, so it is dropped.
		case *pdu.ReleaseRQ:
			// Release collision (PS3.8 7.2.2): as requestor we answer
			// and then wait for our own A-RELEASE-RP.
			if err := a.m.writePDU(&pdu.ReleaseRP{}); err != nil {
				return err
			}
		default:
			return protocolErrorf(pdu.AbortReasonUnexpectedPDU, "unexpected %v while releasing", p.Type())
		}
	}
}

// Abort sends A-ABORT (source service-user) and closes the connection.
func (a *Association) Abort() error {
	if a.err != nil {
		return nil
	}
	err := a.m.writePDU(&pdu.Abort{Source: pdu.AbortSourceServiceUser, Reason: pdu.AbortReasonNotSpecified})
	a.fail(errAssociationClosed)
	return err
}

// Close releases the association if it is still usable, else closes it.
func (a *Association) Close() error {
	if a.err != nil {
		return nil
	}
	ctx, cancel := context.WithTimeout(context.Background(), orDefault(a.d.ARTIMTimeout, DefaultARTIMTimeout))
	defer cancel()
	return a.Release(ctx)
}
