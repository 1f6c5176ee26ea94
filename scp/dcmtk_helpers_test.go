package scp_test

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"sync"
	"testing"
	"time"

	"dwiaudit/scp/scptest"

	"dwiaudit/audit/synth"
	"dwiaudit/scp"
	"dwiaudit/scp/part10"
)

// Limits of the helpers that drive DCMTK processes.
const (
	// toolTimeout bounds one DCMTK process. Sending a few hundred
	// 128 KiB images over loopback takes about a second; a minute means
	// the process hangs.
	toolTimeout = time.Minute

	// interopPollInterval is how often the helpers look again for a condition
	// they wait for.
	interopPollInterval = 10 * time.Millisecond

	// summaryWaitTimeout bounds the wait for the server to record an
	// association that the peer has already finished: after A-RELEASE-RP
	// the server waits for the peer to close, which a DCMTK tool does as
	// it exits.
	summaryWaitTimeout = 10 * time.Second
)

// toolRun is one finished DCMTK process.
type toolRun struct {
	exitCode int
	output   string // stdout and stderr, interleaved
}

// toolProc is a DCMTK process started by startTool.
type toolProc struct {
	name   string
	args   []string
	cmd    *exec.Cmd
	out    *syncBuffer
	ctx    context.Context
	cancel context.CancelFunc
}

// startTool starts a DCMTK tool with TCP_NODELAY=1. Call wait from the
// test goroutine; the process is killed if the test ends first, and its
// output goes to the test log when the test fails.
func startTool(t testing.TB, name string, args ...string) *toolProc {
	t.Helper()
	path := scptest.NeedDCMTK(t, name)
	ctx, cancel := context.WithTimeout(context.Background(), toolTimeout)
	p := &toolProc{name: name, args: args, out: &syncBuffer{}, ctx: ctx, cancel: cancel}
	p.cmd = exec.CommandContext(ctx, path, args...)
	p.cmd.Env = scptest.DCMTKEnv()
	p.cmd.Stdout, p.cmd.Stderr = p.out, p.out
	if err := p.cmd.Start(); err != nil {
		cancel()
		t.Fatalf("start %s: %v", name, err)
	}
	t.Cleanup(func() {
		cancel()
		if p.cmd.ProcessState == nil {
			p.cmd.Wait()
		}
		if t.Failed() {
			t.Logf("%s %v output:\n%s", name, args, p.out.String())
		}
	})
	return p
}

// wait waits for the process to exit and returns its exit status and
// output.
func (p *toolProc) wait(t testing.TB) toolRun {
	t.Helper()
	err := p.cmd.Wait()
	run := toolRun{output: p.out.String()}
	if p.ctx.Err() == context.DeadlineExceeded {
		t.Fatalf("%s %v did not finish within %v\n%s", p.name, p.args, toolTimeout, run.output)
	}
	switch e := err.(type) {
	case nil:
	case *exec.ExitError:
		run.exitCode = e.ExitCode()
	default:
		t.Fatalf("%s %v: %v\n%s", p.name, p.args, err, run.output)
	}
	return run
}

// runTool runs a DCMTK tool to completion.
func runTool(t testing.TB, name string, args ...string) toolRun {
	t.Helper()
	return startTool(t, name, args...).wait(t)
}

// syncBuffer is a bytes.Buffer safe for a process writing while the test
// reads.
type syncBuffer struct {
	mu  sync.Mutex
	buf bytes.Buffer
}

func (b *syncBuffer) Write(p []byte) (int, error) {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.buf.Write(p)
}

func (b *syncBuffer) String() string {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.buf.String()
}

// serveLoopback serves srv on a free loopback port until the test ends and
// returns the host and port.
func serveLoopback(t testing.TB, srv *scp.Server) (host, port string) {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	served := make(chan error, 1)
	go func() { served <- srv.Serve(l) }()
	t.Cleanup(func() {
		ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
		defer cancel()
		if err := srv.Shutdown(ctx); err != nil {
			t.Errorf("Shutdown: %v", err)
		}
		if err := <-served; err != scp.ErrServerClosed {
			t.Errorf("Serve returned %v, want ErrServerClosed", err)
		}
	})
	host, port, _ = net.SplitHostPort(l.Addr().String())
	return host, port
}

// storeRecorder collects what a Server saw: every data set received, keyed by
// SOP instance UID, and every association summary.
type storeRecorder struct {
	mu        sync.Mutex
	data      map[string][]byte // SOP instance UID -> data set as received
	syntaxes  map[string]string // SOP instance UID -> transfer syntax of its context
	dups      []string          // SOP instance UIDs received more than once
	summaries []scp.AssociationSummary

	// before, if set, runs at the start of every C-STORE (set it before
	// the server starts).
	before func()
}

func newStoreRecorder() *storeRecorder {
	return &storeRecorder{data: map[string][]byte{}, syntaxes: map[string]string{}}
}

// HandleStore keeps the data set in memory.
func (r *storeRecorder) HandleStore(ctx context.Context, req *scp.StoreRequest) error {
	if r.before != nil {
		r.before()
	}
	var buf bytes.Buffer
	if _, err := buf.ReadFrom(req.Data); err != nil {
		return err
	}
	r.mu.Lock()
	defer r.mu.Unlock()
	if _, ok := r.data[req.SOPInstanceUID]; ok {
		r.dups = append(r.dups, req.SOPInstanceUID)
	}
	r.data[req.SOPInstanceUID] = buf.Bytes()
	r.syntaxes[req.SOPInstanceUID] = req.TransferSyntaxUID
	return nil
}

// onAssociation is given to Server.OnAssociation.
func (r *storeRecorder) onAssociation(s scp.AssociationSummary) {
	r.mu.Lock()
	defer r.mu.Unlock()
	r.summaries = append(r.summaries, s)
}

// waitSummaries waits until n associations have been recorded and
// returns them.
func (r *storeRecorder) waitSummaries(t testing.TB, n int) []scp.AssociationSummary {
	t.Helper()
	deadline := time.Now().Add(summaryWaitTimeout)
	for {
		r.mu.Lock()
		got := slices.Clone(r.summaries)
		r.mu.Unlock()
		if len(got) >= n {
			return got
		}
		if time.Now().After(deadline) {
			t.Fatalf("server recorded %d associations after %v, want %d: %+v", len(got), summaryWaitTimeout, n, got)
		}
		time.Sleep(interopPollInterval)
	}
}

// newRecordingServer returns a Server that records into rec and logs to the test.
func newRecordingServer(t testing.TB, rec *storeRecorder) *scp.Server {
	return &scp.Server{
		AETitle:       scp.DefaultAETitle,
		Handler:       rec,
		OnAssociation: rec.onAssociation,
		// Short timeouts: a test that hangs should fail, not wait minutes.
		ARTIMTimeout: 5 * time.Second,
		IdleTimeout:  30 * time.Second,
	}
}

// sentFile is one Part 10 file given to a sender, with the data set it
// holds.
type sentFile struct {
	path    string
	meta    part10.Meta
	dataSet []byte // the file from the data-set offset ReadMeta gives
}

// readSent reads the files under dir (recursively).
func readSent(t testing.TB, dir string) map[string]sentFile {
	t.Helper()
	out := map[string]sentFile{}
	err := filepath.WalkDir(dir, func(path string, d os.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		f, err := readPart10(path)
		if err != nil {
			return err
		}
		out[f.meta.MediaStorageSOPInstanceUID] = f
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return out
}

func readPart10(path string) (sentFile, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return sentFile{}, err
	}
	meta, off, err := part10.ReadMeta(bytes.NewReader(b))
	if err != nil {
		return sentFile{}, fmt.Errorf("%s: %w", path, err)
	}
	return sentFile{path: path, meta: meta, dataSet: b[off:]}, nil
}

// describeDifference describes where two byte strings part, for a failure
// message.
func describeDifference(got, want []byte) string {
	n := min(len(got), len(want))
	for i := range n {
		if got[i] != want[i] {
			return fmt.Sprintf("first difference at byte %d of %d (got %#02x, want %#02x)", i, len(want), got[i], want[i])
		}
	}
	return fmt.Sprintf("got %d bytes, want %d", len(got), len(want))
}

// Synthetic fixtures shared by the tests of this binary: written once,
// removed by TestMain.
const (
	// fixtureSeries folders of fixtureSlices images each, 256×256 16-bit
	// (128 KiB of pixels): 300 images in all, a DWI series' worth.
	fixtureSeries = 4
	fixtureSlices = 75
)

// fixtureSet is the shared synthetic data: root holds one folder per
// series in Explicit VR Little Endian; implicitRoot one series in
// Implicit VR Little Endian.
type fixtureSet struct {
	root         string
	series       []string // folders under root
	implicitRoot string
	err          error
}

// fixtures is created by TestMain and written on first use.
type fixtureCache struct {
	once sync.Once
	dir  string
	set  fixtureSet
}

func (c *fixtureCache) get(t testing.TB) fixtureSet {
	t.Helper()
	c.once.Do(func() { c.set = writeFixtures(c.dir) })
	if c.set.err != nil {
		t.Fatalf("writing synthetic fixtures: %v", c.set.err)
	}
	return c.set
}

func writeFixtures(dir string) fixtureSet {
	set := fixtureSet{root: filepath.Join(dir, "explicit"), implicitRoot: filepath.Join(dir, "implicit")}
	var wg sync.WaitGroup
	errs := make([]error, fixtureSeries+1)
	for i := range fixtureSeries {
		folder := filepath.Join(set.root, fmt.Sprintf("series%d", i+1))
		set.series = append(set.series, folder)
		wg.Go(func() {
			// Different seeds give different UIDs (synth.WriteSeries doc).
			_, errs[i] = synth.WriteSeries(folder, synth.Series{Slices: fixtureSlices, Seed: int64(i + 1), BValues: []float64{0, 1000}})
		})
	}
	wg.Go(func() {
		_, errs[fixtureSeries] = synth.WriteSeries(set.implicitRoot, synth.Series{
			Slices: fixtureSlices, Seed: 100, TransferSyntaxUID: synth.ImplicitVRLittleEndian,
		})
	})
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			set.err = err
		}
	}
	return set
}

// wireTap is a TCP relay between a peer and upstream that keeps every byte
// upstream sent, so a test can check the PDUs our server put on the wire
// without decoding them with our own code.
type wireTap struct {
	host, port string
	done       chan []byte
}

// startWireTap relays the first connection made to it to upstream.
func startWireTap(t testing.TB, upstream string) *wireTap {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { l.Close() })
	tp := &wireTap{done: make(chan []byte, 1)}
	tp.host, tp.port, _ = net.SplitHostPort(l.Addr().String())
	go func() {
		c, err := l.Accept()
		l.Close()
		if err != nil {
			tp.done <- nil
			return
		}
		defer c.Close()
		u, err := net.Dial("tcp", upstream)
		if err != nil {
			tp.done <- nil
			return
		}
		defer u.Close()
		go func() {
			io.Copy(u, c)
			u.(*net.TCPConn).CloseWrite()
		}()
		var got bytes.Buffer
		io.Copy(io.MultiWriter(c, &got), u)
		tp.done <- got.Bytes()
	}()
	return tp
}

// upstreamBytes waits until upstream closed its side and returns all it
// sent.
func (tp *wireTap) upstreamBytes(t testing.TB) []byte {
	t.Helper()
	select {
	case b := <-tp.done:
		return b
	case <-time.After(summaryWaitTimeout):
		t.Fatalf("the relayed connection did not end within %v", summaryWaitTimeout)
		return nil
	}
}

// dcmconvBatch bounds the dcmconv processes run at once.
const dcmconvBatch = 4

// convertedDataSets converts each file to Implicit VR Little Endian with
// DCMTK's dcmconv (+ti) and returns the data sets it wrote, keyed by
// path: what DCMTK's own encoder makes of the file in that syntax.
func convertedDataSets(t testing.TB, paths []string) map[string][]byte {
	t.Helper()
	dir := t.TempDir()
	out := map[string][]byte{}
	for start := 0; start < len(paths); start += dcmconvBatch {
		batch := paths[start:min(start+dcmconvBatch, len(paths))]
		procs := make([]*toolProc, len(batch))
		for i, p := range batch {
			procs[i] = startTool(t, "dcmconv", "+ti", p, filepath.Join(dir, fmt.Sprintf("%d.dcm", start+i)))
		}
		for i, p := range procs {
			if r := p.wait(t); r.exitCode != 0 {
				t.Fatalf("dcmconv +ti %s exited %d:\n%s", batch[i], r.exitCode, r.output)
			}
			f, err := readPart10(filepath.Join(dir, fmt.Sprintf("%d.dcm", start+i)))
			if err != nil {
				t.Fatal(err)
			}
			if f.meta.TransferSyntaxUID != scp.ImplicitVRLittleEndian {
				t.Fatalf("dcmconv +ti wrote %s, want Implicit VR Little Endian", f.meta.TransferSyntaxUID) // DCMTK dcmconv --write-xfer-implicit
			}
			out[batch[i]] = f.dataSet
		}
	}
	return out
}
