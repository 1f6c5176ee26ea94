package scp_test

// Reassembly of DIMSE messages from P-DATA-TF fragments (message.go): the
// peer may cut a command set and a data set into PDVs of any size and pack
// PDVs into PDUs in any grouping (PS3.8 9.3.5, E.2), and the handler must
// see exactly the bytes sent. Also what the handler and the peer see when
// a data set is cut short, and how handler results become statuses.

import (
	"bytes"
	"context"
	"encoding/binary"
	"errors"
	"io"
	"math/rand/v2"
	"net"
	"strings"
	"testing"
	"time"

	"dwiaudit/scp"
	"dwiaudit/scp/dimse"
	"dwiaudit/scp/pdu"
)

// stored is what a recording handler saw of one C-STORE.
type stored struct {
	instance, sopClass, ts string
	msgID                  uint16
	data                   []byte
	err                    error // from reading Data
}

// recordingHandler reads each data set whole and reports it on ch; it
// returns the read error, so a failed read is a failed store.
func recordingHandler(ch chan<- stored) scp.StoreHandlerFunc {
	return func(_ context.Context, r *scp.StoreRequest) error {
		b, err := io.ReadAll(r.Data)
		ch <- stored{instance: r.SOPInstanceUID, sopClass: r.SOPClassUID, ts: r.TransferSyntaxUID, msgID: r.MessageID, data: b, err: err}
		return err
	}
}

func waitStored(t testing.TB, ch <-chan stored) stored {
	t.Helper()
	select {
	case s := <-ch:
		return s
	case <-time.After(peerTimeout):
		t.Fatal("the handler was not called")
		return stored{}
	}
}

// cut splits b at the given offsets (ascending, inside b).
func cut(b []byte, offsets ...int) [][]byte {
	var out [][]byte
	prev := 0
	for _, o := range offsets {
		out = append(out, b[prev:o])
		prev = o
	}
	return append(out, b[prev:])
}

// every splits b into pieces of n bytes (the last may be shorter).
func every(b []byte, n int) [][]byte {
	var offs []int
	for o := n; o < len(b); o += n {
		offs = append(offs, o)
	}
	return cut(b, offs...)
}

// pdvs makes the PDVs of one message part from its pieces; the last piece
// carries the last-fragment bit (PS3.8 E.2).
func pdvs(ctxID byte, command bool, pieces [][]byte) []pdu.PDV {
	out := make([]pdu.PDV, len(pieces))
	for i, p := range pieces {
		out[i] = pdu.PDV{ContextID: ctxID, Command: command, Last: i == len(pieces)-1, Data: p}
	}
	return out
}

// onePerPDU puts each PDV in a P-DATA-TF of its own.
func onePerPDU(v []pdu.PDV) [][]pdu.PDV {
	out := make([][]pdu.PDV, len(v))
	for i := range v {
		out[i] = v[i : i+1]
	}
	return out
}

// elementHeaderCuts returns offsets that fall inside the element headers
// of an Explicit VR Little Endian data set (PS3.5 7.1.2): after the
// group, inside the VR and inside the value length of every element.
func elementHeaderCuts(ds []byte) []int {
	var offs []int
	for o := 0; o+8 <= len(ds); {
		vr := string(ds[o+4 : o+6])
		hdr, vl := 8, int(binary.LittleEndian.Uint16(ds[o+6:]))
		if vr == "OB" || vr == "OW" || vr == "SQ" || vr == "UN" || vr == "UT" {
			hdr, vl = 12, int(binary.LittleEndian.Uint32(ds[o+8:]))
		}
		if o > 0 {
			offs = append(offs, o)
		}
		offs = append(offs, o+2, o+5, o+hdr-1)
		o += hdr + vl
	}
	return offs
}

func TestFragmentReassembly(t *testing.T) {
	const instance = "2.25.100200300"
	data := dataSet(32, 32, instance, 7)
	cmd := encodeCommand(t, dimse.NewCStoreRQ(5, scp.MRImageStorage, instance, dimse.PriorityMedium))
	n := len(cmd)
	rnd := rand.New(rand.NewPCG(1, 2))
	randomCuts := func(b []byte) [][]byte {
		var offs []int
		for o := 1 + rnd.IntN(300); o < len(b); o += 1 + rnd.IntN(300) {
			offs = append(offs, o)
		}
		return cut(b, offs...)
	}

	cases := []struct {
		name string
		pdus [][]pdu.PDV
	}{
		{
			name: "command and data set in one P-DATA-TF are both read",
			pdus: [][]pdu.PDV{{
				{ContextID: storeCtx, Command: true, Last: true, Data: cmd},
				{ContextID: storeCtx, Last: true, Data: data},
			}},
		},
		{
			name: "a command cut into one-byte PDVs, one PDU each, is reassembled",
			pdus: append(onePerPDU(pdvs(storeCtx, true, every(cmd, 1))), pdvs(storeCtx, false, [][]byte{data})),
		},
		{
			name: "a command cut into one-byte PDVs, all in one PDU, is reassembled",
			pdus: [][]pdu.PDV{pdvs(storeCtx, true, every(cmd, 1)), pdvs(storeCtx, false, [][]byte{data})},
		},
		{
			name: "a data set cut into one-byte PDVs, one PDU each, is reassembled",
			pdus: append([][]pdu.PDV{pdvs(storeCtx, true, [][]byte{cmd})}, onePerPDU(pdvs(storeCtx, false, every(data, 1)))...),
		},
		{
			name: "a PDU holding the last command fragment and the first data fragments is split correctly",
			pdus: [][]pdu.PDV{
				{{ContextID: storeCtx, Command: true, Data: cmd[:n-10]}},
				{
					{ContextID: storeCtx, Command: true, Last: true, Data: cmd[n-10:]},
					{ContextID: storeCtx, Data: data[:5]},
					{ContextID: storeCtx, Data: data[5:100]},
				},
				{{ContextID: storeCtx, Last: true, Data: data[100:]}},
			},
		},
		{
			name: "element headers cut across fragments arrive intact",
			pdus: append([][]pdu.PDV{pdvs(storeCtx, true, [][]byte{cmd})}, onePerPDU(pdvs(storeCtx, false, cut(data, elementHeaderCuts(data)...)))...),
		},
		{
			name: "thousands of PDVs in one PDU are read in order",
			pdus: [][]pdu.PDV{pdvs(storeCtx, true, [][]byte{cmd}), pdvs(storeCtx, false, every(data, 1))},
		},
		{
			name: "PDVs of seeded random sizes in PDUs of seeded random grouping are reassembled",
			pdus: func() [][]pdu.PDV {
				all := append(pdvs(storeCtx, true, every(cmd, 1+rnd.IntN(40))), pdvs(storeCtx, false, randomCuts(data))...)
				var out [][]pdu.PDV
				for len(all) > 0 {
					k := min(len(all), 1+rnd.IntN(8))
					out, all = append(out, all[:k]), all[k:]
				}
				return out
			}(),
		},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			got := make(chan stored, 1)
			l, ts := servePipe(t, &scp.Server{Handler: recordingHandler(got)})
			p := associated(t, l)
			for _, items := range c.pdus {
				p.sendPDVs(items...)
			}
			s := waitStored(t, got)
			if s.err != nil {
				t.Fatalf("handler read failed: %v", s.err)
			}
			if !bytes.Equal(s.data, data) {
				t.Errorf("handler got %d bytes, want the %d sent (first difference at %d)", len(s.data), len(data), firstDiff(s.data, data))
			}
			if s.instance != instance || s.sopClass != scp.MRImageStorage || s.ts != scp.ExplicitVRLittleEndian || s.msgID != 5 {
				t.Errorf("handler got instance %q class %q ts %q message %d", s.instance, s.sopClass, s.ts, s.msgID)
			}
			rsp := p.response()
			// PS3.7 9.3.1.2 Table 9.3-2: C-STORE-RSP names the request's
			// message ID and SOP instance; PS3.4 B.2.3: 0000H success.
			if rsp.CommandField != dimse.CStoreRSP || rsp.Status != dimse.StatusSuccess ||
				rsp.MessageIDBeingRespondedTo != 5 || rsp.AffectedSOPInstanceUID != instance {
				t.Errorf("response %+v", rsp)
			}
			p.release()
			if sum := ts.summary(t); sum.Bytes != int64(len(data)) || sum.Instances != 1 {
				t.Errorf("summary counts %d bytes and %d instances, want %d and 1", sum.Bytes, sum.Instances, len(data))
			}
		})
	}
}

func firstDiff(a, b []byte) int {
	for i := range min(len(a), len(b)) {
		if a[i] != b[i] {
			return i
		}
	}
	return min(len(a), len(b))
}

func TestIncompleteDataSet(t *testing.T) {
	const instance = "2.25.424242"
	data := dataSet(64, 64, instance, 3)
	half := len(data) / 2
	cases := []struct {
		name string
		tcp  bool // needs a half-close, which net.Pipe lacks
		stop func(p *fakePeer)
		// abort is the A-ABORT the peer must read, nil for none.
		abort *pdu.Abort
	}{
		{
			name: "the peer aborts in the middle of the data set",
			stop: func(p *fakePeer) { p.send(&pdu.Abort{Source: pdu.AbortSourceServiceUser}) },
		},
		{
			// The idle timeout is our own limit (server.go); the server
			// aborts as a service-user, source 0, reason 0 (PS3.8 9.3.8
			// Table 9-26: the reason is not significant then).
			name:  "the peer goes silent past the idle timeout",
			stop:  func(p *fakePeer) {},
			abort: &pdu.Abort{Source: pdu.AbortSourceServiceUser, Reason: pdu.AbortReasonNotSpecified},
		},
		{
			// PS3.8 9.2.2 Table 9-8: a release is indicated and answered
			// (AR-2, AR-4); the message it cut short is still incomplete.
			name: "the peer releases in the middle of the data set",
			stop: func(p *fakePeer) { p.send(&pdu.ReleaseRQ{}) },
		},
		{
			name: "the peer closes the connection",
			tcp:  true,
			stop: func(p *fakePeer) { p.nc.(*net.TCPConn).CloseWrite() },
		},
	}
	for _, c := range cases {
		t.Run(c.name+": the handler sees ErrIncomplete and no success goes out", func(t *testing.T) {
			got := make(chan stored, 1)
			srv := &scp.Server{IdleTimeout: shortTimeout, Handler: recordingHandler(got)}
			var p *fakePeer
			if c.tcp {
				addr, _ := serveTCP(t, srv)
				nc, err := net.Dial("tcp", addr)
				if err != nil {
					t.Fatal(err)
				}
				p = newPeer(t, nc)
				p.associate(plainRQ())
			} else {
				l, _ := servePipe(t, srv)
				p = associated(t, l)
			}
			p.sendCommand(storeCtx, dimse.NewCStoreRQ(1, scp.MRImageStorage, instance, dimse.PriorityMedium))
			p.sendPDVs(pdu.PDV{ContextID: storeCtx, Data: data[:half]})
			c.stop(p)
			s := waitStored(t, got)
			if !errors.Is(s.err, scp.ErrIncomplete) {
				t.Errorf("handler read error %v, want one wrapping ErrIncomplete", s.err)
			}
			if len(s.data) > half {
				t.Errorf("handler read %d bytes of the %d sent", len(s.data), half)
			}
			saw := p.readToEnd()
			saw.noStoreSuccess(t)
			if len(saw.responses) != 0 {
				t.Errorf("peer got responses %+v, want none", saw.responses)
			}
			switch {
			case c.abort == nil && len(saw.aborts) != 0:
				t.Errorf("peer got %+v, want no A-ABORT", saw.aborts)
			case c.abort != nil && (len(saw.aborts) != 1 || saw.aborts[0] != *c.abort):
				t.Errorf("peer got %+v, want %v", saw.aborts, c.abort)
			}
			if !saw.ended() {
				t.Errorf("connection not closed by the server: %v", saw.end)
			}
		})
	}
}

func TestHandlerOutcome(t *testing.T) {
	data := dataSet(16, 16, "2.25.7", 9)
	longText := "disk quota of the research archive exceeded while writing the object for series 4 of 12"

	statusCases := []struct {
		name        string
		handler     scp.StoreHandlerFunc
		wantStatus  dimse.Status
		wantComment string
	}{
		{
			// PS3.7 C.5: 0110H processing failure; Error Comment is LO,
			// at most 64 characters (PS3.5 6.2 Table 6.2-1).
			name: "a handler error gives processing failure with the error text cut to 64 characters",
			handler: func(_ context.Context, r *scp.StoreRequest) error {
				io.Copy(io.Discard, r.Data)
				return errors.New(longText)
			},
			wantStatus:  dimse.StatusProcessingFailure,
			wantComment: longText[:64],
		},
		{
			// PS3.4 B.2.3 Table B.2-1: A7xx refused, out of resources.
			name: "a handler StatusError chooses the status and comment",
			handler: func(_ context.Context, r *scp.StoreRequest) error {
				return dimse.NewStatusError(dimse.StatusOutOfResources, "store full", nil)
			},
			wantStatus:  dimse.StatusOutOfResources,
			wantComment: "store full",
		},
		{
			// PS3.7 C.5: 0110H processing failure.
			name: "a handler panic gives processing failure",
			handler: func(_ context.Context, r *scp.StoreRequest) error {
				panic("handler bug")
			},
			wantStatus: dimse.StatusProcessingFailure,
		},
		{
			name: "a handler that reads part of the data set and returns nil gives success",
			handler: func(_ context.Context, r *scp.StoreRequest) error {
				_, err := io.ReadFull(r.Data, make([]byte, 10))
				return err
			},
			wantStatus: dimse.StatusSuccess,
		},
	}
	for _, c := range statusCases {
		t.Run(c.name+", and the association goes on", func(t *testing.T) {
			first := true
			got := make(chan stored, 1)
			record := recordingHandler(got)
			srv := &scp.Server{Handler: scp.StoreHandlerFunc(func(ctx context.Context, r *scp.StoreRequest) error {
				if first {
					first = false
					return c.handler(ctx, r)
				}
				return record(ctx, r)
			})}
			l, ts := servePipe(t, srv)
			p := associated(t, l)
			p.sendStore(storeCtx, 1, "2.25.7", data)
			rsp := p.response()
			if rsp.CommandField != dimse.CStoreRSP || rsp.Status != c.wantStatus || rsp.MessageIDBeingRespondedTo != 1 {
				t.Errorf("got %v status %v for message %d, want C-STORE-RSP %v for 1", rsp.CommandField, rsp.Status, rsp.MessageIDBeingRespondedTo, c.wantStatus)
			}
			if len(rsp.ErrorComment) > dimse.MaxCommentLen { // PS3.5 6.2 Table 6.2-1, LO
				t.Errorf("Error Comment of %d characters", len(rsp.ErrorComment))
			}
			if c.wantComment != "" && rsp.ErrorComment != strings.TrimSpace(c.wantComment) {
				t.Errorf("Error Comment %q, want %q", rsp.ErrorComment, c.wantComment)
			}
			// The same association serves the next messages: whatever the
			// first handler left unread was drained.
			p.echo(2)
			second := dataSet(8, 8, "2.25.8", 10)
			p.sendStore(storeCtx, 3, "2.25.8", second)
			if s := waitStored(t, got); s.err != nil || !bytes.Equal(s.data, second) {
				t.Errorf("second C-STORE: handler got %d bytes, err %v", len(s.data), s.err)
			}
			if rsp := p.response(); rsp.Status != dimse.StatusSuccess || rsp.MessageIDBeingRespondedTo != 3 {
				t.Errorf("second C-STORE: response %v to %d", rsp.Status, rsp.MessageIDBeingRespondedTo)
			}
			p.release()
			ts.summary(t)
			// And a new association works too.
			q := associated(t, l)
			q.echo(1)
			q.release()
		})
	}

	t.Run("a handler panic is logged and the server keeps serving", func(t *testing.T) {
		l, ts := servePipe(t, &scp.Server{Handler: scp.StoreHandlerFunc(func(context.Context, *scp.StoreRequest) error { panic("handler bug") })})
		for i := range 3 {
			p := associated(t, l)
			p.sendStore(storeCtx, uint16(i+1), "2.25.9", data)
			if rsp := p.response(); rsp.Status != dimse.StatusProcessingFailure { // PS3.7 C.5
				t.Errorf("association %d: status %v", i, rsp.Status)
			}
			p.release()
		}
		if n := ts.logs.count("store handler panicked"); n != 3 {
			t.Errorf("%d panics logged, want 3", n)
		}
	})

	nilAfterFailure := []struct {
		name  string
		spoil func(p *fakePeer)
		abort pdu.Abort
	}{
		{
			// PS3.8 9.3.8 Table 9-26: reason 5 unexpected-PDU-parameter.
			name: "a command fragment inside the data set",
			spoil: func(p *fakePeer) {
				p.sendPDVs(pdu.PDV{ContextID: storeCtx, Command: true, Last: true, Data: encodeCommand(p.t, dimse.NewCEchoRQ(2))})
			},
			abort: pdu.Abort{Source: pdu.AbortSourceServiceProvider, Reason: pdu.AbortReasonUnexpectedPDUParameter},
		},
		{
			name: "a data fragment on another presentation context",
			spoil: func(p *fakePeer) {
				p.sendPDVs(pdu.PDV{ContextID: echoCtx, Last: true, Data: []byte{0, 0}})
			},
			abort: pdu.Abort{Source: pdu.AbortSourceServiceProvider, Reason: pdu.AbortReasonUnexpectedPDUParameter},
		},
		{
			name:  "silence past the idle timeout",
			spoil: func(p *fakePeer) {},
			abort: pdu.Abort{Source: pdu.AbortSourceServiceUser},
		},
	}
	for _, c := range nilAfterFailure {
		t.Run("a handler returning nil after a failed read never gives success: "+c.name, func(t *testing.T) {
			readErr := make(chan error, 1)
			l, _ := servePipe(t, &scp.Server{IdleTimeout: shortTimeout, Handler: scp.StoreHandlerFunc(func(_ context.Context, r *scp.StoreRequest) error {
				_, err := io.ReadAll(r.Data)
				readErr <- err
				return nil // ignores the failure
			})})
			p := associated(t, l)
			p.sendCommand(storeCtx, dimse.NewCStoreRQ(1, scp.MRImageStorage, "2.25.10", dimse.PriorityMedium))
			p.sendPDVs(pdu.PDV{ContextID: storeCtx, Data: data[:len(data)/2]})
			c.spoil(p)
			select {
			case err := <-readErr:
				if !errors.Is(err, scp.ErrIncomplete) {
					t.Errorf("handler read error %v, want ErrIncomplete", err)
				}
			case <-time.After(peerTimeout):
				t.Fatal("handler never returned")
			}
			saw := p.readToEnd()
			saw.noStoreSuccess(t)
			if len(saw.aborts) != 1 || saw.aborts[0] != c.abort {
				t.Errorf("peer read %v, want %v", saw.seq, c.abort.String())
			}
		})
	}
}
