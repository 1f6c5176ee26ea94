package pdu

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"dwiaudit/internal/testtool"
	"dwiaudit/scp/scptest"
)

// The tests in this file put a recording proxy between DCMTK's echoscu or
// storescu and DCMTK's storescp. The proxy reads each direction with our
// Reader, so every PDU the two exchange passes through Next, and forwards
// the exact bytes it read. With -update (`go test ./scp/pdu -update`) the
// captured PDUs are written to testdata/ as fuzz and regression seeds (see
// testdata/README).

// capturedPDU is one PDU seen by the proxy.
type capturedPDU struct {
	dir string // "rq" from the SCU, "rp" from the SCP
	raw []byte
	p   PDU // decoded by the proxy's Reader; a P-DATA-TF is decoded again from raw
}

type recorder struct {
	mu   sync.Mutex
	pdus []capturedPDU
}

func (r *recorder) add(c capturedPDU) {
	r.mu.Lock()
	defer r.mu.Unlock()
	r.pdus = append(r.pdus, c)
}

func (r *recorder) all() []capturedPDU {
	r.mu.Lock()
	defer r.mu.Unlock()
	return append([]capturedPDU(nil), r.pdus...)
}

// relay reads PDUs from src with a Reader, records each with its raw bytes
// and forwards the bytes to dst. It returns nil at a clean end of stream.
func relay(dir string, src io.Reader, dst io.Writer, rec *recorder) error {
	var raw bytes.Buffer
	rd := NewReader(io.TeeReader(src, &raw), 0)
	for {
		raw.Reset()
		p, err := rd.Next()
		if err == io.EOF {
			return nil
		}
		if err != nil {
			// Forward what was read, so the peer sees what we saw.
			_, _ = dst.Write(raw.Bytes())
			return fmt.Errorf("%s: %w", dir, err)
		}
		b := bytes.Clone(raw.Bytes())
		if p.Type() == TypePDataTF {
			// The Reader's P-DATA-TF is only valid until the next Next.
			if p, err = Decode(b); err != nil {
				return fmt.Errorf("%s: decoding captured P-DATA-TF again: %w", dir, err)
			}
		}
		rec.add(capturedPDU{dir: dir, raw: b, p: p})
		if _, err := dst.Write(b); err != nil {
			return fmt.Errorf("%s: forwarding: %w", dir, err)
		}
	}
}

// proxy accepts one connection on ln, connects it to upstream and relays
// both directions until both end.
func proxy(ln net.Listener, upstream string, rec *recorder) error {
	down, err := ln.Accept()
	if err != nil {
		return err
	}
	defer down.Close()
	up, err := net.Dial("tcp", upstream)
	if err != nil {
		return err
	}
	defer up.Close()
	errs := make(chan error, 2)
	pipe := func(dir string, src, dst net.Conn) {
		err := relay(dir, src, dst, rec)
		// Pass the end of stream on, or tear both down after an error.
		if tc, ok := dst.(*net.TCPConn); ok && err == nil {
			_ = tc.CloseWrite()
		} else {
			_ = dst.Close()
			_ = src.Close()
		}
		errs <- err
	}
	go pipe("rq", down, up)
	go pipe("rp", up, down)
	err1, err2 := <-errs, <-errs
	return errors.Join(err1, err2)
}

func freePort(t *testing.T) int {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer ln.Close()
	return ln.Addr().(*net.TCPAddr).Port
}

// startStorescp runs storescp on a free port until the test ends and
// returns its address.
func startStorescp(t *testing.T, extra ...string) string {
	t.Helper()
	bin := scptest.NeedDCMTK(t, "storescp")
	port := freePort(t)
	ctx, cancel := context.WithCancel(context.Background())
	args := append([]string{"-aet", "DWIPEER", "-od", t.TempDir(), "--ignore"}, extra...)
	args = append(args, strconv.Itoa(port))
	cmd := exec.CommandContext(ctx, bin, args...)
	cmd.Env = scptest.DCMTKEnv()
	var logs bytes.Buffer
	cmd.Stdout, cmd.Stderr = &logs, &logs
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		cancel()
		_ = cmd.Wait()
		if t.Failed() {
			t.Logf("storescp output:\n%s", logs.String())
		}
	})
	addr := net.JoinHostPort("127.0.0.1", strconv.Itoa(port))
	deadline := time.Now().Add(5 * time.Second)
	for {
		c, err := net.DialTimeout("tcp", addr, 100*time.Millisecond)
		if err == nil {
			c.Close() // storescp logs the empty connection and goes on
			return addr
		}
		if time.Now().After(deadline) {
			t.Fatalf("storescp did not listen on %s: %v", addr, err)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// runThroughProxy runs the DCMTK SCU tool with args (host and port are
// appended, then tail) against upstream through a recording proxy and
// returns what the proxy saw.
func runThroughProxy(t *testing.T, upstream, tool string, args []string, tail ...string) []capturedPDU {
	t.Helper()
	bin := scptest.NeedDCMTK(t, tool)
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer ln.Close()
	rec := &recorder{}
	proxyErr := make(chan error, 1)
	go func() { proxyErr <- proxy(ln, upstream, rec) }()

	port := strconv.Itoa(ln.Addr().(*net.TCPAddr).Port)
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
	defer cancel()
	cmd := exec.CommandContext(ctx, bin, append(append(args, "127.0.0.1", port), tail...)...)
	cmd.Env = scptest.DCMTKEnv()
	out, runErr := cmd.CombinedOutput()
	select {
	case err := <-proxyErr:
		if err != nil {
			t.Errorf("proxy: %v", err)
		}
	case <-time.After(10 * time.Second):
		t.Errorf("proxy did not finish")
	}
	// A refused association makes the SCU exit non-zero; the caller checks
	// the PDUs instead.
	t.Logf("%s exit: %v\n%s", tool, runErr, out)
	return rec.all()
}

// checkCapture checks the captured PDU types and, for every PDU, that our
// encoder reproduces DCMTK's bytes exactly, then saves the PDUs as seeds
// when asked to.
func checkCapture(t *testing.T, name string, got []capturedPDU, want []Type) {
	t.Helper()
	var types []Type
	for _, c := range got {
		types = append(types, c.p.Type())
	}
	if fmt.Sprint(types) != fmt.Sprint(want) {
		t.Fatalf("PDU sequence %v, want %v", types, want)
	}
	for i, c := range got {
		enc, err := Encode(c.p)
		if err != nil {
			t.Errorf("PDU %d %s: re-encoding: %v", i, c.p.Type(), err)
			continue
		}
		want := c.raw
		if c.p.Type() == TypeAssociateRQ {
			want = zeroPCReservedBytes(t, c.raw)
		}
		if !bytes.Equal(enc, want) { // DCMTK wire bytes, captured
			t.Errorf("PDU %d %s: our encoding differs from DCMTK's\nDCMTK: %x\nours:  %x", i, c.p.Type(), c.raw, enc)
		}
	}
	if testtool.Update() {
		have := map[[32]byte]string{}
		entries, err := os.ReadDir("testdata")
		if err != nil {
			t.Fatal(err)
		}
		for _, e := range entries {
			if b, err := os.ReadFile(filepath.Join("testdata", e.Name())); err == nil {
				have[sha256.Sum256(b)] = e.Name()
			}
		}
		for i, c := range got {
			sum := sha256.Sum256(c.raw)
			if name, dup := have[sum]; dup {
				t.Logf("PDU %d is already testdata/%s", i, name)
				continue
			}
			file := fmt.Sprintf("dcmtk-%s-%02d-%s-%s.pdu", name, i, c.dir, strings.ToLower(c.p.Type().String()))
			have[sum] = file
			if err := os.WriteFile(filepath.Join("testdata", file), c.raw, 0o644); err != nil {
				t.Fatal(err)
			}
			t.Logf("wrote testdata/%s (%d bytes, sha256 %s)", file, len(c.raw), hex.EncodeToString(sum[:8]))
		}
	}
}

// zeroPCReservedBytes returns a copy of an A-ASSOCIATE-RQ with the three
// reserved bytes of every presentation context item set to 00H. DCMTK sends
// FFH in the second of them (PS3.8 9.3.2.2 Table 9-13 byte 7: "shall be sent
// with a value 00H but not tested to this value when received"), the one
// place where its bytes and ours differ.
func zeroPCReservedBytes(t *testing.T, raw []byte) []byte {
	t.Helper()
	b := bytes.Clone(raw)
	for off := headerLength + associateFixedLength; off+4 <= len(b); {
		l := int(b[off+2])<<8 | int(b[off+3])
		if b[off] == itemPresentationCtxRQ && l >= 4 {
			b[off+5], b[off+6], b[off+7] = 0, 0, 0 // Table 9-13 bytes 6-8
		}
		off += 4 + l
	}
	return b
}

func TestDCMTKExchangesDecodeAndReencodeByteForByte(t *testing.T) {
	scp := startStorescp(t)
	const calling = "QUELLVANDER-MR1" // invented AE title

	t.Run("echoscu verification with release gives RQ AC two P-DATA and release", func(t *testing.T) {
		got := runThroughProxy(t, scp, "echoscu", []string{"-aet", calling, "-aec", "DWIAUDIT"})
		checkCapture(t, "echo", got, []Type{TypeAssociateRQ, TypeAssociateAC, TypePDataTF, TypePDataTF, TypeReleaseRQ, TypeReleaseRP})
		rq := got[0].p.(*AssociateRQ)
		if rq.CalledAETitle != "DWIAUDIT" || rq.CallingAETitle != calling { // echoscu -aec/-aet arguments
			t.Errorf("AE titles %q %q", rq.CalledAETitle, rq.CallingAETitle)
		}
		if rq.ApplicationContext != ApplicationContextName { // PS3.7 A.2.1
			t.Errorf("application context %q", rq.ApplicationContext)
		}
		if len(rq.PresentationContexts) != 1 || rq.PresentationContexts[0].AbstractSyntax != "1.2.840.10008.1.1" { // Verification SOP Class, PS3.4 A.4 (from memory)
			t.Errorf("presentation contexts %+v", rq.PresentationContexts)
		}
		if rq.UserInfo.MaxLength != 16384 { // echoscu --help: "-pdu ... (default: 16384)"
			t.Errorf("max length %d", rq.UserInfo.MaxLength)
		}
		if err := checkUID(rq.UserInfo.ImplementationClassUID); err != nil {
			t.Errorf("implementation class UID: %v", err)
		}
		ac := got[1].p.(*AssociateAC)
		if len(ac.PresentationContexts) != 1 || ac.PresentationContexts[0].Result != PCAcceptance {
			t.Errorf("AC presentation contexts %+v", ac.PresentationContexts)
		}
		for _, i := range []int{2, 3} {
			pd := got[i].p.(*PDataTF)
			if len(pd.Items) != 1 || !pd.Items[0].Command || !pd.Items[0].Last { // C-ECHO has a command set only, PS3.7 9.3.5
				t.Errorf("P-DATA %d items %+v", i, pd.Items)
			}
		}
	})

	t.Run("echoscu with --abort ends with an A-ABORT from the service-user", func(t *testing.T) {
		got := runThroughProxy(t, scp, "echoscu", []string{"-aet", calling, "-aec", "DWIAUDIT", "--abort"})
		checkCapture(t, "abort", got, []Type{TypeAssociateRQ, TypeAssociateAC, TypePDataTF, TypePDataTF, TypeAbort})
		if a := got[4].p.(*Abort); a.Source != AbortSourceServiceUser { // echoscu --help: "abort association instead of releasing it"
			t.Errorf("abort %v", a)
		}
	})

	t.Run("echoscu proposing 128 contexts of 38 transfer syntaxes fits MaxAssociatePDULength", func(t *testing.T) {
		got := runThroughProxy(t, scp, "echoscu", []string{"-aet", calling, "-aec", "DWIAUDIT", "-ppc", "128", "-pts", "38"})
		checkCapture(t, "echo128", got, []Type{TypeAssociateRQ, TypeAssociateAC, TypePDataTF, TypePDataTF, TypeReleaseRQ, TypeReleaseRP})
		rq := got[0].p.(*AssociateRQ)
		if len(rq.PresentationContexts) != 128 || len(rq.PresentationContexts[127].TransferSyntaxes) != 38 { // echoscu -ppc 128 -pts 38
			t.Errorf("%d contexts", len(rq.PresentationContexts))
		}
		if len(got[0].raw) > maxAssociatePDULength/2 {
			t.Errorf("RQ of %d bytes; the MaxAssociatePDULength comment says about half of the limit", len(got[0].raw))
		}
		t.Logf("A-ASSOCIATE-RQ of 128 contexts x 38 transfer syntaxes: %d bytes", len(got[0].raw))
	})

	t.Run("storescu with user identity sends sub-item 58H", func(t *testing.T) {
		scptest.NeedDCMTK(t, "dump2dcm")
		file := syntheticMRFile(t)
		got := runThroughProxy(t, scp, "storescu",
			[]string{"-aet", calling, "-aec", "DWIAUDIT", "--user", "quellvander-tech", "--password", "not-a-secret"}, file)
		checkCapture(t, "store", got, []Type{TypeAssociateRQ, TypeAssociateAC, TypePDataTF, TypePDataTF, TypePDataTF, TypeReleaseRQ, TypeReleaseRP})
		id := got[0].p.(*AssociateRQ).UserInfo.UserIdentity
		if id == nil || id.Type != userIdentityUsernamePasscode || string(id.Primary) != "quellvander-tech" || string(id.Secondary) != "not-a-secret" { // storescu --user/--password, PS3.7 Table D.3-14 type 2
			t.Errorf("user identity %+v", id)
		}
	})

	t.Run("storescp --refuse answers with an A-ASSOCIATE-RJ", func(t *testing.T) {
		refusing := startStorescp(t, "--refuse")
		got := runThroughProxy(t, refusing, "echoscu", []string{"-aet", calling, "-aec", "DWIAUDIT"})
		checkCapture(t, "refused", got, []Type{TypeAssociateRQ, TypeAssociateRJ})
		t.Logf("storescp --refuse: %v", got[1].p)
	})
}

// syntheticMRFile writes a small synthetic MR image with dump2dcm and
// returns its path. Every value is invented; the UIDs are under 2.25 (UUID
// derived, PS3.5 B.2), so no root needs registering.
func syntheticMRFile(t *testing.T) string {
	t.Helper()
	dir := t.TempDir()
	dump := `(0002,0010) UI =LittleEndianExplicit
(0008,0016) UI =MRImageStorage
(0008,0018) UI [2.25.318279541893652376240130117283140127871]
(0008,0060) CS [MR]
(0008,0080) LO [Quellvander Ostmire]
(0010,0010) PN [TEST^PHANTOM]
(0010,0020) LO [PHANTOM-0001]
(0018,0087) DS [3]
(0018,9087) FD 1000
(0020,000d) UI [2.25.318279541893652376240130117283140127872]
(0020,000e) UI [2.25.318279541893652376240130117283140127873]
(0028,0002) US 1
(0028,0004) CS [MONOCHROME2]
(0028,0010) US 2
(0028,0011) US 2
(0028,0100) US 16
(0028,0101) US 12
(0028,0102) US 11
(0028,0103) US 0
(7fe0,0010) OW 0000\0001\0002\0003
`
	in := filepath.Join(dir, "mr.dump")
	out := filepath.Join(dir, "mr.dcm")
	if err := os.WriteFile(in, []byte(dump), 0o644); err != nil {
		t.Fatal(err)
	}
	if b, err := exec.Command("dump2dcm", in, out).CombinedOutput(); err != nil {
		t.Fatalf("dump2dcm: %v\n%s", err, b)
	}
	return out
}
