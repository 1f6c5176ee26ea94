package scp_test

// Protocol tests of the acceptor's state machine (assoc.go, server.go). A
// fake peer written here drives raw PDUs through pdu.Encode and pdu.Reader,
// so every byte the server sees is chosen by the test, and every byte it
// answers is decoded and checked. Most tests run over net.Pipe through
// pipeListener; those that need a half-close or a real port use loopback
// TCP. The helpers in this file are shared by fragment_test.go,
// badinput_test.go and bench_test.go.

import (
	"bytes"
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"math/rand/v2"
	"net"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"dwiaudit/scp"
	"dwiaudit/scp/dimse"
	"dwiaudit/scp/pdu"
)

// Test limits. They keep every test to a fraction of a second while
// leaving room for a loaded CI machine.
const (
	// peerTimeout bounds every read and write of the fake peer, so a
	// server that stops answering fails the test instead of hanging it.
	peerTimeout = 3 * time.Second

	// shortTimeout is the ARTIM and idle timeout of servers whose
	// timeouts are under test.
	shortTimeout = 200 * time.Millisecond

	// testMaxPDU is the Maximum Length the fake peer advertises.
	testMaxPDU = 16384

	serverAE = "DWIAUDIT"
	peerAE   = "TESTSCU"
)

// Transfer syntaxes used in negotiation tests that syntax.go has no
// constant for (PS3.6 Table A-1).
const (
	jpegLossless   = "1.2.840.10008.1.2.4.70" // JPEG Lossless, Non-Hierarchical, First-Order Prediction
	ctImageStorage = "1.2.840.10008.5.1.4.1.1.2"
	// unknownUID is a syntactically valid UID that names nothing.
	unknownUID = "1.2.3.4.5.6.7.8.9"
)

// pipeListener is a net.Listener whose connections are net.Pipe ends,
// handed out one per dial.
type pipeListener struct {
	conns  chan net.Conn
	closed chan struct{}
	once   sync.Once
}

func newPipeListener() *pipeListener {
	return &pipeListener{conns: make(chan net.Conn), closed: make(chan struct{})}
}

func (l *pipeListener) Accept() (net.Conn, error) {
	select {
	case c := <-l.conns:
		return c, nil
	case <-l.closed:
		return nil, net.ErrClosed
	}
}

func (l *pipeListener) Close() error {
	l.once.Do(func() { close(l.closed) })
	return nil
}

func (l *pipeListener) Addr() net.Addr { return pipeAddr{} }

// dial gives the server one end of a new pipe and returns the other.
func (l *pipeListener) dial(t testing.TB) net.Conn {
	t.Helper()
	client, server := net.Pipe()
	select {
	case l.conns <- server:
	case <-l.closed:
		t.Fatal("pipe listener closed")
	case <-time.After(peerTimeout):
		t.Fatal("server did not accept the pipe connection")
	}
	return client
}

type pipeAddr struct{}

func (pipeAddr) Network() string { return "pipe" }
func (pipeAddr) String() string  { return "pipe" }

// logSink keeps the records a server logs at warning level or above, so
// tests can see a recovered panic that would otherwise only be logged.
type logSink struct {
	mu   sync.Mutex
	msgs []string
}

func (s *logSink) Enabled(_ context.Context, l slog.Level) bool { return l >= slog.LevelWarn }
func (s *logSink) Handle(_ context.Context, r slog.Record) error {
	s.mu.Lock()
	defer s.mu.Unlock()
	s.msgs = append(s.msgs, r.Message)
	return nil
}
func (s *logSink) WithAttrs([]slog.Attr) slog.Handler { return s }
func (s *logSink) WithGroup(string) slog.Handler      { return s }

func (s *logSink) count(substr string) int {
	s.mu.Lock()
	defer s.mu.Unlock()
	n := 0
	for _, m := range s.msgs {
		if strings.Contains(m, substr) {
			n++
		}
	}
	return n
}

// testServer is a running Server with what the test observes of it.
type testServer struct {
	srv       *scp.Server
	served    chan error // Serve's return value
	summaries chan scp.AssociationSummary
	logs      *logSink
}

// start configures srv for observation and serves l in the background.
// At cleanup the server is closed, Serve must have returned
// ErrServerClosed, and no association goroutine may have panicked.
func start(t testing.TB, srv *scp.Server, l net.Listener) *testServer {
	t.Helper()
	ts := &testServer{srv: srv, served: make(chan error, 1), summaries: make(chan scp.AssociationSummary, 256), logs: &logSink{}}
	if srv.AETitle == "" {
		srv.AETitle = serverAE
	}
	srv.Logger = slog.New(ts.logs)
	srv.OnAssociation = func(s scp.AssociationSummary) {
		select { // OnAssociation must not block
		case ts.summaries <- s:
		default:
		}
	}
	go func() { ts.served <- srv.Serve(l) }()
	t.Cleanup(func() {
		srv.Close()
		select {
		case err := <-ts.served:
			if !errors.Is(err, scp.ErrServerClosed) {
				t.Errorf("Serve returned %v, want ErrServerClosed", err)
			}
		case <-time.After(peerTimeout):
			t.Error("Serve did not return after Close")
		}
		if n := ts.logs.count("association goroutine panicked"); n > 0 {
			t.Errorf("an association goroutine panicked %d times", n)
		}
	})
	return ts
}

func servePipe(t testing.TB, srv *scp.Server) (*pipeListener, *testServer) {
	t.Helper()
	l := newPipeListener()
	return l, start(t, srv, l)
}

func serveTCP(t testing.TB, srv *scp.Server) (string, *testServer) {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	return l.Addr().String(), start(t, srv, l)
}

// summary waits for the summary of the next finished association.
func (ts *testServer) summary(t testing.TB) scp.AssociationSummary {
	t.Helper()
	select {
	case s := <-ts.summaries:
		return s
	case <-time.After(peerTimeout):
		t.Fatal("no association finished")
		return scp.AssociationSummary{}
	}
}

// discard is a handler that reads the data set and keeps nothing.
func discard(_ context.Context, r *scp.StoreRequest) error {
	_, err := io.Copy(io.Discard, r.Data)
	return err
}

// fakePeer is the requestor side of one connection, driven PDU by PDU.
type fakePeer struct {
	t  testing.TB
	nc net.Conn
	r  *pdu.Reader
}

func newPeer(t testing.TB, nc net.Conn) *fakePeer {
	t.Cleanup(func() { nc.Close() })
	return &fakePeer{t: t, nc: nc, r: pdu.NewReader(nc, 0)}
}

func (p *fakePeer) write(b []byte) {
	p.t.Helper()
	p.nc.SetWriteDeadline(time.Now().Add(peerTimeout))
	if _, err := p.nc.Write(b); err != nil {
		p.t.Fatalf("peer write of %d bytes: %v", len(b), err)
	}
}

func (p *fakePeer) send(x pdu.PDU) {
	p.t.Helper()
	b, err := pdu.Encode(x)
	if err != nil {
		p.t.Fatalf("encode %v: %v", x.Type(), err)
	}
	p.write(b)
}

// sendPDVs sends one P-DATA-TF holding pdvs.
func (p *fakePeer) sendPDVs(pdvs ...pdu.PDV) {
	p.t.Helper()
	p.send(&pdu.PDataTF{Items: pdvs})
}

// next reads one PDU. A P-DATA-TF aliases the reader's buffer.
func (p *fakePeer) next() (pdu.PDU, error) {
	p.nc.SetReadDeadline(time.Now().Add(peerTimeout))
	return p.r.Next()
}

// expect reads one PDU and fails the test unless it is a T.
func expect[T pdu.PDU](p *fakePeer) T {
	p.t.Helper()
	x, err := p.next()
	if err != nil {
		var zero T
		p.t.Fatalf("want %T, read failed: %v", zero, err)
	}
	v, ok := x.(T)
	if !ok {
		var zero T
		p.t.Fatalf("want %T, got %v %+v", zero, x.Type(), x)
	}
	return v
}

// associate sends rq and returns the A-ASSOCIATE-AC.
func (p *fakePeer) associate(rq *pdu.AssociateRQ) *pdu.AssociateAC {
	p.t.Helper()
	p.send(rq)
	return expect[*pdu.AssociateAC](p)
}

// sendCommand sends cmd as one command PDV in its own P-DATA-TF.
func (p *fakePeer) sendCommand(ctxID byte, cmd *dimse.Command) {
	p.t.Helper()
	p.sendPDVs(pdu.PDV{ContextID: ctxID, Command: true, Last: true, Data: encodeCommand(p.t, cmd)})
}

// sendStore sends a C-STORE-RQ and its whole data set, each in one PDU.
func (p *fakePeer) sendStore(ctxID byte, msgID uint16, instance string, data []byte) {
	p.t.Helper()
	p.sendCommand(ctxID, dimse.NewCStoreRQ(msgID, scp.MRImageStorage, instance, dimse.PriorityMedium))
	p.sendPDVs(pdu.PDV{ContextID: ctxID, Last: true, Data: data})
}

// response reads the next DIMSE command (its fragments reassembled) and
// fails the test if something else arrives.
func (p *fakePeer) response() *dimse.Command {
	p.t.Helper()
	var buf []byte
	for {
		x, err := p.next()
		if err != nil {
			p.t.Fatalf("waiting for a DIMSE response: %v", err)
		}
		pd, ok := x.(*pdu.PDataTF)
		if !ok {
			p.t.Fatalf("waiting for a DIMSE response, got %v %+v", x.Type(), x)
		}
		for _, v := range pd.Items {
			if !v.Command {
				p.t.Fatalf("data fragment in a response that has no data set")
			}
			buf = append(buf, v.Data...)
			if v.Last {
				cmd, err := dimse.Decode(buf)
				if err != nil {
					p.t.Fatalf("decode response: %v", err)
				}
				return cmd
			}
		}
	}
}

// peerSaw is everything a peer read until the connection ended.
type peerSaw struct {
	responses []*dimse.Command
	aborts    []pdu.Abort
	others    []pdu.Type
	seq       []string // what arrived, in order: command field names, "A-ABORT", PDU types
	end       error    // the read error that ended it (io.EOF for a close)
}

// readToEnd reads until the connection ends or peerTimeout passes, then
// closes the peer's side as a requestor does after A-ABORT (PS3.8 9.2.2
// Table 9-9, AA-3: issue the indication and close the transport).
func (p *fakePeer) readToEnd() peerSaw {
	var saw peerSaw
	var buf []byte
	for {
		x, err := p.next()
		if err != nil {
			saw.end = err
			p.nc.Close()
			return saw
		}
		switch x := x.(type) {
		case *pdu.PDataTF:
			for _, v := range x.Items {
				if !v.Command {
					continue
				}
				buf = append(buf, v.Data...)
				if v.Last {
					if cmd, err := dimse.Decode(buf); err == nil {
						saw.responses = append(saw.responses, cmd)
						saw.seq = append(saw.seq, cmd.CommandField.String())
					}
					buf = nil
				}
			}
		case *pdu.Abort:
			saw.aborts = append(saw.aborts, *x)
			saw.seq = append(saw.seq, x.Type().String())
			if p.stopOnPipe() {
				saw.end = errStoppedAtAbort
				return saw
			}
		default:
			saw.others = append(saw.others, x.Type())
			saw.seq = append(saw.seq, x.Type().String())
			if x.Type() == pdu.TypeReleaseRP && p.stopOnPipe() {
				saw.end = errStoppedAtAbort
				return saw
			}
		}
	}
}

// noStoreSuccess fails the test if any C-STORE-RSP with a success or
// warning status was read: a data set cut short must never be reported
// stored (PS3.4 B.2.3, from memory: success means the SCP stored it).
func (saw peerSaw) noStoreSuccess(t testing.TB) {
	t.Helper()
	for _, r := range saw.responses {
		if r.CommandField == dimse.CStoreRSP && r.Status.Class() != dimse.ClassFailure {
			t.Errorf("peer got C-STORE-RSP %v for an incomplete data set", r.Status)
		}
	}
}

// errStoppedAtAbort ends a pipe peer's reading at the A-ABORT or
// A-RELEASE-RP.
var errStoppedAtAbort = errors.New("peer stopped reading at A-ABORT or A-RELEASE-RP")

// stopOnPipe closes a pipe peer after A-ABORT or A-RELEASE-RP and reports
// whether it did. A pipe cannot carry the server's half-close, and the
// server waits for our close; a requestor closes then anyway (PS3.8 9.2.2
// Tables 9-8 and 9-9: AR-3 and AA-3 close the transport connection).
func (p *fakePeer) stopOnPipe() bool {
	if _, ok := p.nc.(interface{ CloseWrite() error }); ok {
		return false
	}
	p.nc.Close()
	return true
}

// ended reports whether the server ended the connection: it closed it, or
// (on a pipe) sent A-ABORT, rather than the peer's read deadline passing.
func (saw peerSaw) ended() bool {
	return errors.Is(saw.end, errStoppedAtAbort) || errors.Is(saw.end, io.EOF) || errors.Is(saw.end, io.ErrUnexpectedEOF) ||
		errors.Is(saw.end, net.ErrClosed) || errors.Is(saw.end, io.ErrClosedPipe) ||
		strings.Contains(fmt.Sprint(saw.end), "connection reset")
}

func encodeCommand(t testing.TB, cmd *dimse.Command) []byte {
	t.Helper()
	b, err := cmd.Encode()
	if err != nil {
		t.Fatalf("encode %v: %v", cmd.CommandField, err)
	}
	return b
}

// newRQ builds an A-ASSOCIATE-RQ from the fake peer to the server.
func newRQ(contexts ...pdu.PresentationContextRQ) *pdu.AssociateRQ {
	return &pdu.AssociateRQ{
		ProtocolVersion:      pdu.ProtocolVersion1,
		CalledAETitle:        serverAE,
		CallingAETitle:       peerAE,
		ApplicationContext:   pdu.ApplicationContextName,
		PresentationContexts: contexts,
		UserInfo: pdu.UserInformation{
			MaxLength:                 testMaxPDU,
			ImplementationClassUID:    "2.25.1234567890",
			ImplementationVersionName: "FAKEPEER",
		},
	}
}

func pc(id byte, abstract string, ts ...string) pdu.PresentationContextRQ {
	return pdu.PresentationContextRQ{ID: id, AbstractSyntax: abstract, TransferSyntaxes: ts}
}

// Contexts of a plain association: Verification on 1, MR on 3.
const (
	echoCtx  = 1
	storeCtx = 3
)

func plainRQ() *pdu.AssociateRQ {
	return newRQ(
		pc(echoCtx, scp.VerificationSOPClass, scp.ImplicitVRLittleEndian),
		pc(storeCtx, scp.MRImageStorage, scp.ExplicitVRLittleEndian),
	)
}

// associated returns a fake peer over a pipe with an established plain
// association.
func associated(t testing.TB, l *pipeListener) *fakePeer {
	t.Helper()
	p := newPeer(t, l.dial(t))
	ac := p.associate(plainRQ())
	for _, r := range ac.PresentationContexts {
		if r.Result != pdu.PCAcceptance {
			t.Fatalf("context %d not accepted: %v", r.ID, r.Result)
		}
	}
	return p
}

// echo performs one C-ECHO as the fake peer and checks the response
// (PS3.7 9.3.5 Tables 9.3-12 and 9.3-13).
func (p *fakePeer) echo(msgID uint16) {
	p.t.Helper()
	p.sendCommand(echoCtx, dimse.NewCEchoRQ(msgID))
	rsp := p.response()
	if rsp.CommandField != dimse.CEchoRSP { // PS3.7 E.1: C-ECHO-RSP is 8030H
		p.t.Fatalf("got %v, want C-ECHO-RSP", rsp.CommandField)
	}
	if rsp.MessageIDBeingRespondedTo != msgID { // PS3.7 Table 9.3-13
		p.t.Errorf("Message ID Being Responded To = %d, want %d", rsp.MessageIDBeingRespondedTo, msgID)
	}
	if rsp.Status != dimse.StatusSuccess { // PS3.7 Annex C: success is 0000H (from memory)
		p.t.Errorf("C-ECHO status %v, want success", rsp.Status)
	}
	if rsp.AffectedSOPClassUID != scp.VerificationSOPClass { // PS3.7 Table 9.3-13, PS3.4 A.4
		p.t.Errorf("Affected SOP Class UID %q, want Verification", rsp.AffectedSOPClassUID)
	}
}

// release sends A-RELEASE-RQ, expects A-RELEASE-RP (PS3.8 9.2, AR-1 to
// AR-4) and closes the transport as the requestor must (PS3.8 7.2).
func (p *fakePeer) release() {
	p.t.Helper()
	p.send(&pdu.ReleaseRQ{})
	expect[*pdu.ReleaseRP](p)
	p.nc.Close()
}

// uidFor makes a synthetic UID under the UUID root (PS3.5 B.2).
func uidFor(r *rand.Rand) string {
	return "2.25." + strconv.FormatUint(r.Uint64()>>1, 10)
}

// dataSet builds an MR image data set in Explicit VR Little Endian (PS3.5
// 7.1.2, from memory): the attributes a storage peer needs to accept it and a
// rows x cols 16-bit pixel matrix. Patient and site are invented.
func dataSet(rows, cols int, sopInstance string, seed uint64) []byte {
	r := rand.New(rand.NewPCG(seed, 0x5049584c))
	pixels := make([]byte, 2*rows*cols)
	for i := 0; i < len(pixels); i += 8 {
		// Four 12-bit pixels per random word (Bits Stored 12 below).
		var w [8]byte
		binary.LittleEndian.PutUint64(w[:], r.Uint64()&0x0FFF0FFF0FFF0FFF)
		copy(pixels[i:], w[:])
	}
	us := func(v int) []byte { return binary.LittleEndian.AppendUint16(nil, uint16(v)) }
	study := "2.25.1" + strconv.FormatUint(seed, 10)
	var b []byte
	for _, e := range []struct {
		group, elem uint16
		vr          string
		value       []byte
	}{
		{0x0008, 0x0016, "UI", []byte(scp.MRImageStorage)},
		{0x0008, 0x0018, "UI", []byte(sopInstance)},
		{0x0008, 0x0060, "CS", []byte("MR")},
		{0x0008, 0x0080, "LO", []byte("Quellvander Ostmire")},
		{0x0010, 0x0010, "PN", []byte("TEST^PHANTOM")},
		{0x0010, 0x0020, "LO", []byte("PHANTOM01")},
		{0x0020, 0x000D, "UI", []byte(study)},
		{0x0020, 0x000E, "UI", []byte(study + ".1")},
		{0x0028, 0x0002, "US", us(1)},
		{0x0028, 0x0004, "CS", []byte("MONOCHROME2")},
		{0x0028, 0x0010, "US", us(rows)},
		{0x0028, 0x0011, "US", us(cols)},
		{0x0028, 0x0100, "US", us(16)},
		{0x0028, 0x0101, "US", us(12)},
		{0x0028, 0x0102, "US", us(11)},
		{0x0028, 0x0103, "US", us(0)},
		{0x7FE0, 0x0010, "OW", pixels},
	} {
		b = appendElement(b, e.group, e.elem, e.vr, e.value)
	}
	return b
}

// appendElement appends one Explicit VR Little Endian element (PS3.5
// 7.1.2, from memory): OB, OW, SQ, UN and UT have a reserved word and a 32-bit length,
// the rest a 16-bit length. Odd values are padded, UI with NUL and text
// with a space (PS3.5 6.2).
func appendElement(b []byte, group, elem uint16, vr string, value []byte) []byte {
	if len(value)%2 == 1 {
		pad := byte(' ')
		if vr == "UI" {
			pad = 0
		}
		value = append(value[:len(value):len(value)], pad)
	}
	b = binary.LittleEndian.AppendUint16(b, group)
	b = binary.LittleEndian.AppendUint16(b, elem)
	b = append(b, vr...)
	switch vr {
	case "OB", "OW", "SQ", "UN", "UT":
		b = append(b, 0, 0)
		b = binary.LittleEndian.AppendUint32(b, uint32(len(value)))
	default:
		b = binary.LittleEndian.AppendUint16(b, uint16(len(value)))
	}
	return append(b, value...)
}

func TestAssociationNegotiation(t *testing.T) {
	const maxPDU = 65536
	l, _ := servePipe(t, &scp.Server{MaxPDULength: maxPDU, Handler: scp.StoreHandlerFunc(discard)})
	p := newPeer(t, l.dial(t))
	rq := newRQ(
		pc(1, scp.VerificationSOPClass, scp.ImplicitVRLittleEndian),
		pc(3, scp.MRImageStorage, scp.ImplicitVRLittleEndian, scp.ExplicitVRLittleEndian),
		pc(5, scp.MRImageStorage, scp.ExplicitVRLittleEndian, scp.ImplicitVRLittleEndian),
		pc(7, unknownUID, scp.ExplicitVRLittleEndian),
		pc(9, ctImageStorage, scp.ExplicitVRLittleEndian), // a storage class we were not configured for
		pc(11, scp.MRImageStorage, unknownUID),
		pc(13, scp.MRImageStorage, jpegLossless),
		pc(15, scp.MRImageStorage, jpegLossless, scp.ImplicitVRLittleEndian),
	)
	ac := p.associate(rq)

	t.Run("the A-ASSOCIATE-AC answers every proposed context with the right result", func(t *testing.T) {
		// Result values: PS3.8 9.3.3.2 Table 9-18. The transfer syntax
		// preference (Explicit VR LE, then Implicit VR LE, encapsulated
		// last) is our own rule, syntax.go transferSyntaxRank.
		want := []struct {
			id     byte
			result pdu.PCResult
			ts     string // checked only when accepted; Table 9-18: not significant otherwise
		}{
			{1, pdu.PCAcceptance, scp.ImplicitVRLittleEndian},
			{3, pdu.PCAcceptance, scp.ExplicitVRLittleEndian},
			{5, pdu.PCAcceptance, scp.ExplicitVRLittleEndian},
			{7, pdu.PCAbstractSyntaxNotSupported, ""},    // 3
			{9, pdu.PCAbstractSyntaxNotSupported, ""},    // 3
			{11, pdu.PCTransferSyntaxesNotSupported, ""}, // 4
			{13, pdu.PCAcceptance, jpegLossless},
			{15, pdu.PCAcceptance, scp.ImplicitVRLittleEndian},
		}
		got := map[byte]pdu.PresentationContextAC{}
		for _, r := range ac.PresentationContexts {
			got[r.ID] = r
		}
		if len(ac.PresentationContexts) != len(want) { // PS3.8 7.1.1.14: one result per proposed context
			t.Errorf("%d results for %d proposed contexts", len(ac.PresentationContexts), len(want))
		}
		for _, w := range want {
			r, ok := got[w.id]
			switch {
			case !ok:
				t.Errorf("context %d: no result", w.id)
			case r.Result != w.result:
				t.Errorf("context %d: result %v, want %v", w.id, r.Result, w.result)
			case w.result == pdu.PCAcceptance && r.TransferSyntax != w.ts:
				t.Errorf("context %d: transfer syntax %s, want %s", w.id, r.TransferSyntax, w.ts)
			}
		}
	})
	t.Run("the A-ASSOCIATE-AC carries our Maximum Length and implementation identity", func(t *testing.T) {
		if ac.UserInfo.MaxLength != maxPDU { // PS3.8 D.1 Table D.1-1
			t.Errorf("Maximum Length %d, want %d", ac.UserInfo.MaxLength, maxPDU)
		}
		if ac.UserInfo.ImplementationClassUID != scp.ImplementationClassUID { // PS3.7 D.3.3.2, in the AC too (from memory)
			t.Errorf("Implementation Class UID %q, want %q", ac.UserInfo.ImplementationClassUID, scp.ImplementationClassUID)
		}
		if ac.UserInfo.ImplementationVersionName != scp.ImplementationVersionName { // PS3.7 D.3.3.2 (from memory)
			t.Errorf("Implementation Version Name %q", ac.UserInfo.ImplementationVersionName)
		}
		if ac.ProtocolVersion&1 == 0 { // PS3.8 9.3.3 Table 9-17 bytes 7-8
			t.Errorf("protocol version %#x lacks bit 0", ac.ProtocolVersion)
		}
		if ac.ApplicationContext != pdu.ApplicationContextName { // PS3.7 A.2.1
			t.Errorf("application context %q", ac.ApplicationContext)
		}
		// PS3.8 9.3.3 Table 9-17 bytes 11-42: sent as received in the RQ.
		if ac.CalledAETitle != serverAE || ac.CallingAETitle != peerAE {
			t.Errorf("AE titles %q/%q, want %q/%q", ac.CalledAETitle, ac.CallingAETitle, serverAE, peerAE)
		}
	})
	t.Run("a C-ECHO-RQ gets a successful C-ECHO-RSP naming its message ID", func(t *testing.T) {
		p.echo(7)
		p.echo(8)
	})
	t.Run("an A-RELEASE-RQ gets an A-RELEASE-RP", func(t *testing.T) {
		p.release()
	})
}

func TestAssociationRejection(t *testing.T) {
	// Result, source and reason: PS3.8 9.3.4 Table 9-21.
	cases := []struct {
		name    string
		allowed []string // Server.AllowedCallingAETitles
		modify  func(*pdu.AssociateRQ)
		want    pdu.AssociateRJ
	}{
		{
			name:   "a called AE title other than ours is rejected permanently by the service user, reason 7",
			modify: func(rq *pdu.AssociateRQ) { rq.CalledAETitle = "OTHERSCP" },
			want:   pdu.AssociateRJ{Result: 1, Source: 1, Reason: 7},
		},
		{
			name:    "a calling AE title not on the allowed list is rejected permanently by the service user, reason 3",
			allowed: []string{"SCANNER1", "SCANNER2"},
			modify:  func(rq *pdu.AssociateRQ) { rq.CallingAETitle = "INTRUDER" },
			want:    pdu.AssociateRJ{Result: 1, Source: 1, Reason: 3},
		},
		{
			name:   "a wrong application context name is rejected permanently by the service user, reason 2",
			modify: func(rq *pdu.AssociateRQ) { rq.ApplicationContext = "1.2.840.10008.3.1.1.2" },
			want:   pdu.AssociateRJ{Result: 1, Source: 1, Reason: 2},
		},
		{
			// PS3.8 9.3.2 Table 9-11 bytes 7-8: version 1 is bit 0.
			name:   "a protocol version without bit 0 is rejected permanently by the ACSE provider, reason 2",
			modify: func(rq *pdu.AssociateRQ) { rq.ProtocolVersion = 0x0002 },
			want:   pdu.AssociateRJ{Result: 1, Source: 2, Reason: 2},
		},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			srv := &scp.Server{AllowedCallingAETitles: c.allowed, Handler: scp.StoreHandlerFunc(discard)}
			l, ts := servePipe(t, srv)
			p := newPeer(t, l.dial(t))
			rq := plainRQ()
			c.modify(rq)
			p.send(rq)
			rj := expect[*pdu.AssociateRJ](p)
			if *rj != c.want {
				t.Errorf("got %+v (%v), want %+v", *rj, rj, c.want)
			}
			p.nc.Close()
			if s := ts.summary(t); s.Result != "rejected" {
				t.Errorf("summary result %q, want rejected", s.Result)
			}
			if n := srv.ActiveAssociations(); n != 0 {
				t.Errorf("%d associations counted after a rejection", n)
			}
		})
	}
	t.Run("an association over MaxAssociations is rejected transiently by the presentation provider, reason 2", func(t *testing.T) {
		srv := &scp.Server{MaxAssociations: 1, Handler: scp.StoreHandlerFunc(discard)}
		l, _ := servePipe(t, srv)
		first := associated(t, l)
		second := newPeer(t, l.dial(t))
		second.send(plainRQ())
		rj := expect[*pdu.AssociateRJ](second)
		if want := (pdu.AssociateRJ{Result: 2, Source: 3, Reason: 2}); *rj != want {
			t.Errorf("got %+v (%v), want %+v", *rj, rj, want)
		}
		second.nc.Close()
		first.echo(1) // the first association is untouched
		first.release()
		// Once the first is gone, a slot is free again.
		waitFor(t, "the association count to drop", func() bool { return srv.ActiveAssociations() == 0 })
		third := associated(t, l)
		third.echo(1)
		third.release()
	})
}

// waitFor polls cond until it holds or peerTimeout passes.
func waitFor(t testing.TB, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(peerTimeout)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatalf("timed out waiting for %s", what)
		}
		time.Sleep(5 * time.Millisecond)
	}
}

func TestAssociationEnds(t *testing.T) {
	t.Run("a peer's A-ABORT between messages ends the association", func(t *testing.T) {
		l, ts := servePipe(t, &scp.Server{Handler: scp.StoreHandlerFunc(discard)})
		p := associated(t, l)
		p.echo(1)
		p.send(&pdu.Abort{Source: pdu.AbortSourceServiceUser})
		// PS3.8 9.2.2 Table 9-9 AA-3: issue the indication and close the
		// transport connection; nothing is sent back. (That Sta6 plus a
		// received A-ABORT leads to AA-3 is from memory.)
		saw := p.readToEnd()
		if !saw.ended() || len(saw.aborts)+len(saw.responses)+len(saw.others) != 0 {
			t.Errorf("after A-ABORT the peer read %+v, want only the close", saw)
		}
		if s := ts.summary(t); s.Result != "aborted-by-peer" || s.Echoes != 1 {
			t.Errorf("summary %+v, want aborted-by-peer after 1 echo", s)
		}
	})
	t.Run("a second A-ASSOCIATE-RQ in data transfer gets an A-ABORT", func(t *testing.T) {
		l, ts := servePipe(t, &scp.Server{Handler: scp.StoreHandlerFunc(discard)})
		p := associated(t, l)
		p.send(plainRQ())
		ab := expect[*pdu.Abort](p)
		// PS3.8 9.2.3: an A-ASSOCIATE-RQ PDU in Sta6 leads to AA-8, an
		// A-ABORT from the service-provider (from memory); PS3.8 9.3.8
		// Table 9-26: source 2, reason 2 unexpected-PDU.
		if ab.Source != pdu.AbortSourceServiceProvider || ab.Reason != pdu.AbortReasonUnexpectedPDU {
			t.Errorf("got %v, want A-ABORT by service-provider: unexpected-PDU", ab)
		}
		p.nc.Close()
		if s := ts.summary(t); s.Result != "aborted" {
			t.Errorf("summary result %q, want aborted", s.Result)
		}
	})
	t.Run("an A-RELEASE-RP the acceptor never asked for gets an A-ABORT", func(t *testing.T) {
		l, _ := servePipe(t, &scp.Server{Handler: scp.StoreHandlerFunc(discard)})
		p := associated(t, l)
		p.send(&pdu.ReleaseRP{})
		ab := expect[*pdu.Abort](p)
		if ab.Reason != pdu.AbortReasonUnexpectedPDU { // PS3.8 9.3.8 Table 9-26
			t.Errorf("got %v, want unexpected-PDU", ab)
		}
	})
}

func TestShutdown(t *testing.T) {
	// Over loopback TCP: refusing new connections is about a real port.
	// The C-STORE in flight is caught with its handler waiting for the
	// second half of the data set from the network, so a Shutdown that
	// interrupted it would fail its read; then the handler holds on
	// proceed, so Shutdown must wait for it.
	data := dataSet(16, 16, "2.25.42", 1)
	half := len(data) / 2
	entered := make(chan struct{})
	readAll := make(chan error, 1)
	proceed := make(chan struct{})
	srv := &scp.Server{Handler: scp.StoreHandlerFunc(func(ctx context.Context, r *scp.StoreRequest) error {
		if _, err := io.ReadFull(r.Data, make([]byte, half)); err != nil {
			return err
		}
		close(entered)
		rest, err := io.ReadAll(r.Data)
		if err == nil && len(rest) != len(data)-half {
			err = fmt.Errorf("read %d bytes after the first half, want %d", len(rest), len(data)-half)
		}
		readAll <- err
		<-proceed
		return err
	})}
	addr, ts := serveTCP(t, srv)
	dialPeer := func() *fakePeer {
		nc, err := net.Dial("tcp", addr)
		if err != nil {
			t.Fatal(err)
		}
		p := newPeer(t, nc)
		p.associate(plainRQ())
		return p
	}
	idle := dialPeer()
	busy := dialPeer()
	idle.echo(1)
	busy.sendCommand(storeCtx, dimse.NewCStoreRQ(9, scp.MRImageStorage, "2.25.42", dimse.PriorityMedium))
	busy.sendPDVs(pdu.PDV{ContextID: storeCtx, Data: data[:half]})
	<-entered

	shutdownDone := make(chan error, 1)
	go func() {
		ctx, cancel := context.WithTimeout(context.Background(), 2*peerTimeout)
		defer cancel()
		shutdownDone <- srv.Shutdown(ctx)
	}()

	t.Run("an idle association is aborted at once", func(t *testing.T) {
		saw := idle.readToEnd()
		if len(saw.aborts) != 1 || !saw.ended() {
			t.Errorf("idle peer read %+v, want one A-ABORT and the close", saw)
		}
	})
	t.Run("new connections are refused", func(t *testing.T) {
		waitFor(t, "the listener to close", func() bool {
			nc, err := net.DialTimeout("tcp", addr, time.Second)
			if err == nil {
				nc.Close()
			}
			return err != nil
		})
	})
	t.Run("Shutdown waits for the C-STORE in flight", func(t *testing.T) {
		select {
		case err := <-shutdownDone:
			t.Fatalf("Shutdown returned %v while a C-STORE was in flight", err)
		case <-time.After(50 * time.Millisecond):
		}
	})
	t.Run("the C-STORE in flight goes on reading its data set", func(t *testing.T) {
		busy.sendPDVs(pdu.PDV{ContextID: storeCtx, Last: true, Data: data[half:]})
		select {
		case err := <-readAll:
			if err != nil {
				t.Errorf("handler: %v", err)
			}
		case <-time.After(peerTimeout):
			t.Fatal("handler did not finish reading")
		}
		select {
		case err := <-shutdownDone:
			t.Fatalf("Shutdown returned %v while the handler ran", err)
		case <-time.After(20 * time.Millisecond):
		}
	})
	close(proceed)
	t.Run("the C-STORE in flight gets its C-STORE-RSP before the A-ABORT", func(t *testing.T) {
		saw := busy.readToEnd()
		if len(saw.responses) != 1 || saw.responses[0].CommandField != dimse.CStoreRSP ||
			saw.responses[0].Status != dimse.StatusSuccess || saw.responses[0].MessageIDBeingRespondedTo != 9 {
			t.Errorf("busy peer got responses %+v, want one successful C-STORE-RSP to message 9", saw.responses)
		}
		if got := strings.Join(saw.seq, ", "); got != "C-STORE-RSP, A-ABORT" || !saw.ended() {
			t.Errorf("busy peer read %q, end %v; want the C-STORE-RSP, one A-ABORT, then the close", got, saw.end)
		}
	})
	t.Run("Shutdown returns once every association is gone", func(t *testing.T) {
		select {
		case err := <-shutdownDone:
			if err != nil {
				t.Errorf("Shutdown: %v", err)
			}
		case <-time.After(peerTimeout):
			t.Fatal("Shutdown did not return")
		}
	})
	t.Run("Serve returns ErrServerClosed", func(t *testing.T) {
		select {
		case err := <-ts.served:
			if !errors.Is(err, scp.ErrServerClosed) {
				t.Errorf("Serve returned %v", err)
			}
			ts.served <- err // for the cleanup's check
		case <-time.After(peerTimeout):
			t.Fatal("Serve did not return")
		}
		l, err := net.Listen("tcp", "127.0.0.1:0")
		if err != nil {
			t.Fatal(err)
		}
		if err := srv.Serve(l); !errors.Is(err, scp.ErrServerClosed) {
			t.Errorf("Serve after Shutdown returned %v", err)
		}
	})
	for _, want := range []string{"shutdown", "shutdown"} {
		if s := ts.summary(t); s.Result != want {
			t.Errorf("summary result %q, want %q", s.Result, want)
		}
	}
}

func TestDialerToServerOverTCP(t *testing.T) {
	// Our requestor against our acceptor, with a small Maximum Length on
	// both sides so every data set spans many P-DATA-TF PDUs.
	const maxPDU = scp.MinPDULength
	got := make(chan stored, 1)
	addr, ts := serveTCP(t, &scp.Server{MaxPDULength: maxPDU, Handler: recordingHandler(got)})
	ctx := context.Background()
	d := &scp.Dialer{CallingAETitle: peerAE, CalledAETitle: serverAE, MaxPDULength: maxPDU, ARTIMTimeout: peerTimeout, ResponseTimeout: peerTimeout}
	a, err := d.Dial(ctx, addr, []scp.Context{
		{AbstractSyntax: scp.VerificationSOPClass, TransferSyntaxes: []string{scp.ImplicitVRLittleEndian}},
		{AbstractSyntax: scp.MRImageStorage, TransferSyntaxes: []string{scp.ImplicitVRLittleEndian, scp.ExplicitVRLittleEndian}},
	})
	if err != nil {
		t.Fatal(err)
	}
	if !a.Accepted(scp.MRImageStorage, scp.ExplicitVRLittleEndian) || a.PeerMaxPDULength() != maxPDU {
		t.Fatalf("MR in Explicit VR LE accepted: %v, peer maximum %d", a.Accepted(scp.MRImageStorage, scp.ExplicitVRLittleEndian), a.PeerMaxPDULength())
	}
	t.Run("C-ECHO succeeds", func(t *testing.T) {
		if err := a.Echo(ctx); err != nil {
			t.Fatal(err)
		}
	})
	// PS3.8 D.1: a P-DATA-TF carries at most Maximum Length bytes, so one
	// PDV at most that less its 6-byte header (Table 9-23).
	frag := maxPDU - pdu.PDVOverhead
	var total int64
	for _, size := range []int{0, 2, frag - 1, frag, frag + 1, 3 * frag, 1600 << 10} {
		t.Run(fmt.Sprintf("a C-STORE of %d bytes arrives byte for byte", size), func(t *testing.T) {
			data := make([]byte, size)
			rnd := rand.New(rand.NewPCG(uint64(size), 9))
			for i := range data {
				data[i] = byte(rnd.Uint32())
			}
			instance := "2.25." + strconv.Itoa(1000+size)
			rsp, err := a.Store(ctx, scp.MRImageStorage, instance, scp.ExplicitVRLittleEndian, bytes.NewReader(data))
			if err != nil {
				t.Fatal(err)
			}
			if rsp.Status != dimse.StatusSuccess { // PS3.4 B.2.3
				t.Errorf("status %v %q", rsp.Status, rsp.ErrorComment)
			}
			s := waitStored(t, got)
			if s.err != nil || !bytes.Equal(s.data, data) || s.instance != instance {
				t.Errorf("handler got %d bytes (err %v) of instance %q, want %d of %q", len(s.data), s.err, s.instance, size, instance)
			}
			total += int64(size)
		})
	}
	t.Run("A-RELEASE completes and the server counts what it received", func(t *testing.T) {
		if err := a.Release(ctx); err != nil {
			t.Fatal(err)
		}
		s := ts.summary(t)
		if s.Result != "released" || s.Instances != 7 || s.Echoes != 1 || s.Bytes != total {
			t.Errorf("summary %+v, want released with 7 instances, 1 echo, %d bytes", s, total)
		}
	})
}

func TestDIMSERequests(t *testing.T) {
	data := dataSet(8, 8, "2.25.77", 4)
	// A C-FIND-RQ (PS3.7 9.3.2.1, from memory) with an identifier.
	find := &dimse.Command{CommandField: dimse.CFindRQ, AffectedSOPClassUID: "1.2.840.10008.5.1.4.1.2.2.1", MessageID: 4, CommandDataSetType: dimse.DataSetPresent}
	cases := []struct {
		name       string
		send       func(p *fakePeer)
		wantField  dimse.CommandField
		wantStatus dimse.Status
	}{
		{
			// PS3.7 C.5: 0122H SOP class not supported.
			name: "a C-STORE-RQ whose SOP class differs from its context's gets SOP class not supported",
			send: func(p *fakePeer) {
				p.sendCommand(storeCtx, dimse.NewCStoreRQ(4, ctImageStorage, "2.25.77", dimse.PriorityMedium))
				p.sendPDVs(pdu.PDV{ContextID: storeCtx, Last: true, Data: data})
			},
			wantField:  dimse.CStoreRSP,
			wantStatus: dimse.StatusSOPClassNotSupported,
		},
		{
			name:       "a C-ECHO-RQ on the storage context gets SOP class not supported",
			send:       func(p *fakePeer) { p.sendCommand(storeCtx, dimse.NewCEchoRQ(4)) },
			wantField:  dimse.CEchoRSP,
			wantStatus: dimse.StatusSOPClassNotSupported,
		},
		{
			// PS3.7 C.5: 0211H unrecognized operation.
			name: "a C-FIND-RQ gets unrecognized operation and its identifier is skipped",
			send: func(p *fakePeer) {
				p.sendCommand(echoCtx, find)
				p.sendPDVs(pdu.PDV{ContextID: echoCtx, Last: true, Data: data[:16]})
			},
			wantField:  dimse.CFindRSP,
			wantStatus: dimse.StatusUnrecognizedOperation,
		},
	}
	for _, c := range cases {
		t.Run(c.name+", and the association goes on", func(t *testing.T) {
			l, _ := servePipe(t, &scp.Server{Handler: scp.StoreHandlerFunc(discard)})
			p := associated(t, l)
			c.send(p)
			rsp := p.response()
			if rsp.CommandField != c.wantField || rsp.Status != c.wantStatus || rsp.MessageIDBeingRespondedTo != 4 {
				t.Errorf("got %v %v for message %d, want %v %v for 4", rsp.CommandField, rsp.Status, rsp.MessageIDBeingRespondedTo, c.wantField, c.wantStatus)
			}
			p.echo(5)
			p.release()
		})
	}

	aborts := []struct {
		name  string
		send  func(p *fakePeer)
		abort pdu.Abort
	}{
		{
			// PS3.8 9.3.8 Table 9-26: reason 6 invalid-PDU-parameter-value.
			name:  "a command on a presentation context that was never accepted gets an A-ABORT",
			send:  func(p *fakePeer) { p.sendCommand(5, dimse.NewCEchoRQ(1)) },
			abort: pdu.Abort{Source: pdu.AbortSourceServiceProvider, Reason: pdu.AbortReasonInvalidPDUParameterValue},
		},
		{
			// PS3.8 9.3.8 Table 9-26: reason 5 unexpected-PDU-parameter.
			name:  "a data fragment before any command gets an A-ABORT",
			send:  func(p *fakePeer) { p.sendPDVs(pdu.PDV{ContextID: storeCtx, Last: true, Data: data}) },
			abort: pdu.Abort{Source: pdu.AbortSourceServiceProvider, Reason: pdu.AbortReasonUnexpectedPDUParameter},
		},
		{
			name:  "a command set that is not one gets an A-ABORT",
			send:  func(p *fakePeer) { p.sendPDVs(pdu.PDV{ContextID: echoCtx, Command: true, Last: true, Data: data[:40]}) },
			abort: pdu.Abort{Source: pdu.AbortSourceServiceProvider, Reason: pdu.AbortReasonInvalidPDUParameterValue},
		},
	}
	for _, c := range aborts {
		t.Run(c.name, func(t *testing.T) {
			l, _ := servePipe(t, &scp.Server{Handler: scp.StoreHandlerFunc(discard)})
			p := associated(t, l)
			c.send(p)
			saw := p.readToEnd()
			if len(saw.aborts) != 1 || saw.aborts[0] != c.abort || len(saw.responses) != 0 {
				t.Errorf("peer read %v %+v, want only %v", saw.seq, saw.aborts, c.abort.String())
			}
		})
	}
}
