package scp_test

// Hostile and broken peers over real loopback TCP. After each, a normal
// C-ECHO through scp.Dialer must succeed on the same server: one bad
// connection may cost that connection, never the acceptor. The server's
// logs are checked for recovered panics at cleanup (start in
// assoc_test.go).

import (
	"context"
	"encoding/binary"
	"errors"
	"io"
	"math/rand/v2"
	"net"
	"runtime"
	"testing"
	"time"

	"dwiaudit/scp"
	"dwiaudit/scp/dimse"
	"dwiaudit/scp/pdu"
)

// badInputMaxPDU is the server's Maximum Length in these tests, small so
// that a P-DATA-TF just over it is cheap to send.
const badInputMaxPDU = 16384

func dialRaw(t testing.TB, addr string) *net.TCPConn {
	t.Helper()
	nc, err := net.DialTimeout("tcp", addr, peerTimeout)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { nc.Close() })
	return nc.(*net.TCPConn)
}

// readAllRaw reads what the server sends until it closes.
func readAllRaw(t testing.TB, nc net.Conn) []byte {
	t.Helper()
	nc.SetReadDeadline(time.Now().Add(peerTimeout))
	b, err := io.ReadAll(nc)
	if err != nil {
		t.Fatalf("reading until the server closes: %v (after %d bytes)", err, len(b))
	}
	return b
}

// wantAbort checks that reply is exactly one A-ABORT (PS3.8 9.3.8 Table
// 9-26, a fixed 10 bytes) and returns it.
func wantAbort(t testing.TB, reply []byte) pdu.Abort {
	t.Helper()
	x, err := pdu.Decode(reply)
	if err != nil {
		t.Fatalf("server replied % x, not one PDU: %v", reply, err)
	}
	ab, ok := x.(*pdu.Abort)
	if !ok {
		t.Fatalf("server replied %v, want A-ABORT", x.Type())
	}
	return *ab
}

// echoWorks opens an association with the Dialer, performs C-ECHO and
// releases: the server is still serving.
func echoWorks(t testing.TB, addr string) {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), peerTimeout)
	defer cancel()
	d := &scp.Dialer{CallingAETitle: peerAE, CalledAETitle: serverAE, ARTIMTimeout: peerTimeout, ResponseTimeout: peerTimeout}
	a, err := d.Dial(ctx, addr, []scp.Context{{AbstractSyntax: scp.VerificationSOPClass, TransferSyntaxes: []string{scp.ImplicitVRLittleEndian}}})
	if err != nil {
		t.Fatalf("association after the bad input: %v", err)
	}
	if err := a.Echo(ctx); err != nil {
		t.Fatalf("C-ECHO after the bad input: %v", err)
	}
	if err := a.Release(ctx); err != nil {
		t.Fatalf("release after the bad input: %v", err)
	}
}

func TestBadInput(t *testing.T) {
	got := make(chan stored, 4)
	srv := &scp.Server{
		ARTIMTimeout: shortTimeout,
		IdleTimeout:  300 * time.Millisecond,
		MaxPDULength: badInputMaxPDU,
		Handler:      recordingHandler(got),
	}
	addr, ts := serveTCP(t, srv)
	echoWorks(t, addr)

	cases := []struct {
		name string
		run  func(t *testing.T)
	}{
		{"random bytes of several sizes are dropped with at most an A-ABORT", func(t *testing.T) {
			rnd := rand.New(rand.NewPCG(20240601, 1))
			for _, size := range []int{1, 5, 6, 7, 10, 64, 1000, 70000} {
				for range 3 {
					b := make([]byte, size)
					for i := range b {
						b[i] = byte(rnd.Uint32())
					}
					nc := dialRaw(t, addr)
					nc.SetWriteDeadline(time.Now().Add(peerTimeout))
					if _, err := nc.Write(b); err != nil {
						t.Fatalf("writing %d random bytes: %v", size, err)
					}
					nc.CloseWrite()
					if reply := readAllRaw(t, nc); len(reply) > 0 {
						wantAbort(t, reply)
					}
					nc.Close()
				}
			}
		}},
		{"an HTTP request on the DICOM port gets an A-ABORT for an unrecognized PDU", func(t *testing.T) {
			nc := dialRaw(t, addr)
			nc.Write([]byte("GET / HTTP/1.1\r\nHost: localhost\r\nUser-Agent: probe\r\n\r\n"))
			ab := wantAbort(t, readAllRaw(t, nc))
			// 'G' is no PDU type of PS3.8 9.3.1; Table 9-26: reason 1
			// unrecognized-PDU. PS3.8 9.2.2 Table 9-9 AA-1, the action for
			// a bad PDU in Sta2, says "service-user source"; we send the
			// provider source so the peer learns the reason (our choice).
			if ab.Source != pdu.AbortSourceServiceProvider || ab.Reason != pdu.AbortReasonUnrecognizedPDU {
				t.Errorf("got %v", &ab)
			}
		}},
		{"a PDU header declaring 4 GiB gets an A-ABORT without the server allocating it", func(t *testing.T) {
			for _, typ := range []pdu.Type{pdu.TypeAssociateRQ, pdu.TypePDataTF, pdu.TypeAbort} {
				var before, after runtime.MemStats
				runtime.ReadMemStats(&before)
				nc := dialRaw(t, addr)
				hdr := binary.BigEndian.AppendUint32([]byte{byte(typ), 0}, 0xFFFFFFFF)
				nc.Write(append(hdr, make([]byte, 1024)...))
				// readAllRaw returns at the server's close: the A-ABORT
				// is followed by the end of the connection.
				ab := wantAbort(t, readAllRaw(t, nc))
				runtime.ReadMemStats(&after)
				// PS3.8 9.3.8 Table 9-26: reason 6 invalid-PDU-parameter-value.
				if ab.Source != pdu.AbortSourceServiceProvider || ab.Reason != pdu.AbortReasonInvalidPDUParameterValue {
					t.Errorf("%v: got %v", typ, &ab)
				}
				if grown := after.TotalAlloc - before.TotalAlloc; grown > 64<<20 {
					t.Errorf("%v: %d bytes allocated while refusing the PDU", typ, grown)
				}
			}
		}},
		{"a P-DATA-TF before the association gets an A-ABORT for an unexpected PDU", func(t *testing.T) {
			nc := dialRaw(t, addr)
			b, err := pdu.Encode(&pdu.PDataTF{Items: []pdu.PDV{{ContextID: 1, Command: true, Last: true, Data: encodeCommand(t, dimse.NewCEchoRQ(1))}}})
			if err != nil {
				t.Fatal(err)
			}
			nc.Write(b)
			ab := wantAbort(t, readAllRaw(t, nc))
			// PS3.8 9.2.3: P-DATA-TF in Sta2 leads to AA-1 (from memory);
			// Table 9-26: reason 2 unexpected-PDU. Source: see the HTTP
			// case above.
			if ab.Source != pdu.AbortSourceServiceProvider || ab.Reason != pdu.AbortReasonUnexpectedPDU {
				t.Errorf("got %v", &ab)
			}
		}},
		{"a client that sends nothing is closed when ARTIM expires", func(t *testing.T) {
			nc := dialRaw(t, addr)
			start := time.Now()
			reply := readAllRaw(t, nc)
			elapsed := time.Since(start)
			// PS3.8 9.2.2 Table 9-9 AA-2: close the transport connection,
			// nothing sent. (That ARTIM expiry in Sta2 leads to AA-2 is
			// from memory.)
			if len(reply) != 0 {
				t.Errorf("server sent % x", reply)
			}
			if elapsed < shortTimeout/2 || elapsed > shortTimeout+2*time.Second {
				t.Errorf("closed after %v, ARTIM is %v", elapsed, shortTimeout)
			}
		}},
		{"a client that stops in the middle of a large object is aborted after the idle timeout", func(t *testing.T) {
			p := newPeer(t, dialRaw(t, addr))
			p.associate(plainRQ())
			data := dataSet(512, 512, "2.25.555", 5) // 512 KiB of pixels
			p.sendCommand(storeCtx, dimse.NewCStoreRQ(1, scp.MRImageStorage, "2.25.555", dimse.PriorityMedium))
			const frag = badInputMaxPDU - pdu.PDVOverhead // PS3.8 D.1: PDU-length at most the Maximum Length
			for _, piece := range every(data[:len(data)/2], frag) {
				p.sendPDVs(pdu.PDV{ContextID: storeCtx, Data: piece})
			}
			start := time.Now()
			saw := p.readToEnd()
			if len(saw.aborts) != 1 || !saw.ended() || len(saw.responses) != 0 {
				t.Errorf("peer read %v, end %v; want one A-ABORT and the close", saw.seq, saw.end)
			}
			if e := time.Since(start); e > srv.IdleTimeout+2*time.Second {
				t.Errorf("aborted after %v, idle timeout is %v", e, srv.IdleTimeout)
			}
			if s := waitStored(t, got); !errors.Is(s.err, scp.ErrIncomplete) {
				t.Errorf("handler read error %v, want ErrIncomplete", s.err)
			}
		}},
		{"an A-ASSOCIATE-RQ with 128 presentation contexts gets 128 results", func(t *testing.T) {
			// PS3.8 9.3.2.2 Table 9-13: IDs are odd, 1 to 255, so 128 is
			// the most one association can propose.
			var contexts []pdu.PresentationContextRQ
			abstracts := []string{scp.VerificationSOPClass, scp.MRImageStorage, unknownUID, scp.EnhancedMRImageStorage}
			for i := range 128 {
				contexts = append(contexts, pc(byte(2*i+1), abstracts[i%len(abstracts)], scp.ExplicitVRLittleEndian, scp.ImplicitVRLittleEndian))
			}
			p := newPeer(t, dialRaw(t, addr))
			ac := p.associate(newRQ(contexts...))
			if len(ac.PresentationContexts) != 128 { // PS3.8 7.1.1.14: one result per proposal
				t.Fatalf("%d results", len(ac.PresentationContexts))
			}
			seen := map[byte]bool{}
			for _, r := range ac.PresentationContexts {
				i := int(r.ID-1) / 2
				want := pdu.PCAcceptance
				if abstracts[i%len(abstracts)] == unknownUID {
					want = pdu.PCAbstractSyntaxNotSupported // PS3.8 9.3.3.2 Table 9-18
				}
				if r.Result != want || seen[r.ID] {
					t.Errorf("context %d: result %v (seen before: %v), want %v", r.ID, r.Result, seen[r.ID], want)
				}
				seen[r.ID] = true
			}
			p.echo(1)
			p.release()
		}},
		{"a P-DATA-TF longer than our Maximum Length gets an A-ABORT and the close", func(t *testing.T) {
			p := newPeer(t, dialRaw(t, addr))
			p.associate(plainRQ())
			// PS3.8 D.1: a PDU-length over the advertised maximum is a
			// protocol error.
			data := make([]byte, badInputMaxPDU-pdu.PDVOverhead+1)
			p.sendPDVs(pdu.PDV{ContextID: echoCtx, Command: true, Last: true, Data: data})
			saw := p.readToEnd()
			if len(saw.aborts) != 1 || !saw.ended() {
				t.Fatalf("peer read %v, end %v; want one A-ABORT and the close", saw.seq, saw.end)
			}
			if ab := saw.aborts[0]; ab.Source != pdu.AbortSourceServiceProvider || ab.Reason != pdu.AbortReasonInvalidPDUParameterValue { // Table 9-26
				t.Errorf("got %v", &ab)
			}
		}},
		{"a PDU header declaring 4 GiB inside an association gets an A-ABORT", func(t *testing.T) {
			p := newPeer(t, dialRaw(t, addr))
			p.associate(plainRQ())
			p.write(binary.BigEndian.AppendUint32([]byte{byte(pdu.TypePDataTF), 0}, 0xFFFFFFFF))
			saw := p.readToEnd()
			if len(saw.aborts) != 1 || !saw.ended() || saw.aborts[0].Reason != pdu.AbortReasonInvalidPDUParameterValue { // Table 9-26
				t.Errorf("peer read %v %+v, end %v", saw.seq, saw.aborts, saw.end)
			}
		}},
	}
	for _, c := range cases {
		t.Run(c.name+", and the server still answers C-ECHO", func(t *testing.T) {
			c.run(t)
			echoWorks(t, addr)
		})
	}
	waitFor(t, "the bad connections to be closed", func() bool { return srv.ActiveAssociations() == 0 })
	if n := ts.logs.count("panicked"); n != 0 {
		t.Errorf("%d panics logged", n)
	}
}
