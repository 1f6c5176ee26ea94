package main

// End-to-end tests of `dwiaudit serve` run as a process: the binary is
// built once per test run, started on ":0" ports with a temporary data
// folder, and driven over DICOM and HTTP like a scanner and an operator
// would.

import (
	"bufio"
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"dwiaudit/audit/synth"
	"dwiaudit/audit/web"
	"dwiaudit/scp"
	"dwiaudit/scp/dimse"
	"dwiaudit/scp/part10"
	"dwiaudit/scp/pdu"
	"dwiaudit/scp/scptest"
	"dwiaudit/store"
	"dwiaudit/store/storetest"
)

// Limits of the node harness.
const (
	// nodeStartTimeout bounds the wait for a started node to print its
	// addresses: opening and reconciling a test data folder takes
	// milliseconds, building the binary is done before.
	nodeStartTimeout = 15 * time.Second
	// nodeStopTimeout bounds the wait for a node to exit after a signal.
	nodeStopTimeout = 30 * time.Second
	// testAE is the called AE title of the nodes the tests start.
	testAE = scp.DefaultAETitle
)

// testBinary is the dwiaudit binary built for this test run.
var testBinary struct {
	once sync.Once
	dir  string
	path string
	err  error
}

func TestMain(m *testing.M) {
	code := m.Run()
	if testBinary.dir != "" {
		os.RemoveAll(testBinary.dir)
	}
	os.Exit(code)
}

// dwiauditBinary builds the command once (go build -o) and returns its
// path.
func dwiauditBinary(t testing.TB) string {
	t.Helper()
	b := &testBinary
	b.once.Do(func() {
		b.dir, b.err = os.MkdirTemp("", "dwiaudit-test-bin-")
		if b.err != nil {
			return
		}
		b.path = filepath.Join(b.dir, "dwiaudit")
		out, err := exec.Command("go", "build", "-o", b.path, ".").CombinedOutput()
		if err != nil {
			b.err = fmt.Errorf("go build: %v\n%s", err, out)
		}
	})
	if b.err != nil {
		t.Fatal(b.err)
	}
	return b.path
}

// node is a `dwiaudit serve` process.
type node struct {
	t         testing.TB
	cmd       *exec.Cmd
	dataDir   string
	dicomAddr string // host:port of the DICOM acceptor
	httpURL   string // http://host:port
	stderr    *syncBuffer
	exited    chan struct{} // closed when the process has been waited for
	exitCode  int           // valid after exited; -1 if killed by a signal
}

// startNode starts `dwiaudit serve` on free loopback ports with dataDir
// and the extra arguments, and waits for it to print its addresses.
func startNode(t testing.TB, dataDir string, extra ...string) *node {
	t.Helper()
	args := append([]string{"serve", "--data", dataDir, "--listen", "127.0.0.1:0", "--http", "127.0.0.1:0"}, extra...)
	cmd := exec.Command(dwiauditBinary(t), args...)
	n := &node{t: t, cmd: cmd, dataDir: dataDir, stderr: &syncBuffer{}, exited: make(chan struct{})}
	cmd.Stderr = n.stderr
	stdout, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	addrs := make(chan [2]string, 1)
	go func() {
		var a [2]string
		sc := bufio.NewScanner(stdout)
		for sc.Scan() {
			line := sc.Text()
			if rest, ok := strings.CutPrefix(line, listeningDICOMPrefix); ok {
				a[0], _, _ = strings.Cut(rest, " ")
			}
			if rest, ok := strings.CutPrefix(line, listeningHTTPPrefix); ok {
				a[1] = "http://" + rest
				addrs <- a
			}
		}
		cmd.Wait()
		n.exitCode = cmd.ProcessState.ExitCode()
		close(n.exited)
	}()
	t.Cleanup(func() {
		n.kill()
		if t.Failed() {
			t.Logf("dwiaudit serve %q stderr:\n%s", args, n.stderr.String())
		}
	})
	select {
	case a := <-addrs:
		n.dicomAddr, n.httpURL = a[0], a[1]
	case <-n.exited:
		t.Fatalf("dwiaudit serve exited %d before listening:\n%s", n.exitCode, n.stderr.String())
	case <-time.After(nodeStartTimeout):
		t.Fatalf("dwiaudit serve printed no addresses in %v:\n%s", nodeStartTimeout, n.stderr.String())
	}
	return n
}

// kill sends SIGKILL (if the process still runs) and waits for it.
func (n *node) kill() {
	select {
	case <-n.exited:
		return
	default:
	}
	n.cmd.Process.Kill()
	<-n.exited
}

// stop sends SIGTERM and returns the exit code.
func (n *node) stop() int {
	n.t.Helper()
	n.cmd.Process.Signal(syscall.SIGTERM)
	select {
	case <-n.exited:
		return n.exitCode
	case <-time.After(nodeStopTimeout):
		n.t.Fatalf("dwiaudit serve still running %v after SIGTERM", nodeStopTimeout)
		return -1
	}
}

// waitForLog waits until the node's stderr holds s.
func (n *node) waitForLog(s string, timeout time.Duration) bool {
	deadline := time.Now().Add(timeout)
	for time.Now().Before(deadline) {
		if strings.Contains(n.stderr.String(), s) {
			return true
		}
		time.Sleep(5 * time.Millisecond)
	}
	return false
}

// getJSON GETs url and decodes a JSON body into v, returning the status.
func getJSON(t testing.TB, url string, v any) int {
	t.Helper()
	res, err := http.Get(url)
	if err != nil {
		t.Fatal(err)
	}
	defer res.Body.Close()
	if err := json.NewDecoder(res.Body).Decode(v); err != nil {
		t.Fatalf("GET %s: %v", url, err)
	}
	return res.StatusCode
}

// openStoreReadOnly opens a data folder no server holds, as `dwiaudit
// studies --data` does.
func openStoreReadOnly(t testing.TB, dir string) *store.Store {
	t.Helper()
	st, _ := storetest.Open(t, store.Options{Dir: dir, ReadOnly: true})
	return st
}

// storedDataSet returns the data set bytes of a stored instance: the file
// from the data-set offset its own file meta gives (PS3.10 7.1).
func storedDataSet(t testing.TB, st *store.Store, sop string) []byte {
	t.Helper()
	rc, err := st.OpenInstance(sop)
	if err != nil {
		t.Fatalf("instance %s: %v", sop, err)
	}
	defer rc.Close()
	b, err := io.ReadAll(rc)
	if err != nil {
		t.Fatal(err)
	}
	meta, off, err := part10.ReadMeta(bytes.NewReader(b))
	if err != nil {
		t.Fatalf("instance %s: %v", sop, err)
	}
	if meta.MediaStorageSOPInstanceUID != sop {
		t.Errorf("file of %s names SOP instance %s", sop, meta.MediaStorageSOPInstanceUID)
	}
	return b[off:]
}

// tempFiles lists what is left in the store's temp folder.
func tempFiles(t testing.TB, dataDir string) []string {
	t.Helper()
	entries, err := os.ReadDir(filepath.Join(dataDir, "tmp"))
	if err != nil && !errors.Is(err, os.ErrNotExist) {
		t.Fatal(err)
	}
	var names []string
	for _, e := range entries {
		names = append(names, e.Name())
	}
	return names
}

// instanceFiles counts the files under the store's instances folder.
func instanceFiles(t testing.TB, dataDir string) int {
	t.Helper()
	n := 0
	filepath.WalkDir(filepath.Join(dataDir, "instances"), func(path string, d os.DirEntry, err error) error {
		if err == nil && !d.IsDir() {
			n++
		}
		return nil
	})
	return n
}

// testInstance describes a synthetic MR data set the tests build by hand
// (mrDataSet), so that thousands of distinct instances cost no files.
type testInstance struct {
	Study, Series, SOP string
	Number             int
	Rows, Columns      int
	Frames             int // 0: a classic MR image; else an Enhanced MR object with this many frames
	Seed               uint64
}

// sopClass is the instance's storage SOP class (PS3.4 B.5).
func (in testInstance) sopClass() string {
	if in.Frames > 0 {
		return scp.EnhancedMRImageStorage
	}
	return scp.MRImageStorage
}

// pixelBytes is the length of the pixel data: 16 bits allocated.
func (in testInstance) pixelBytes() int64 {
	return int64(in.Rows) * int64(in.Columns) * 2 * int64(max(in.Frames, 1))
}

// exLE appends one Explicit VR Little Endian element (PS3.5 7.1.2).
func exLE(b []byte, group, elem uint16, vr string, value []byte) []byte {
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

// padded pads a value to even length (PS3.5 7.1.1: NUL for UI, space
// otherwise).
func padded(s string, uid bool) []byte {
	b := []byte(s)
	if len(b)%2 == 1 {
		if uid {
			return append(b, 0)
		}
		return append(b, ' ')
	}
	return b
}

func us(v uint16) []byte { return binary.LittleEndian.AppendUint16(nil, v) }

// header returns the data set up to and including the Pixel Data element
// header; the pixel values follow (pixelReader).
func (in testInstance) header() []byte {
	s := func(v string) []byte { return padded(v, false) }
	u := func(v string) []byte { return padded(v, true) }
	var b []byte
	b = exLE(b, 0x0008, 0x0016, "UI", u(in.sopClass()))
	b = exLE(b, 0x0008, 0x0018, "UI", u(in.SOP))
	b = exLE(b, 0x0008, 0x0020, "DA", s(synth.StudyDate))
	b = exLE(b, 0x0008, 0x0030, "TM", s(synth.StudyTime))
	b = exLE(b, 0x0008, 0x0050, "SH", s(synth.AccessionNumber))
	b = exLE(b, 0x0008, 0x0060, "CS", s("MR"))
	b = exLE(b, 0x0008, 0x0070, "LO", s(synth.Manufacturer))
	b = exLE(b, 0x0008, 0x0080, "LO", s(synth.InstitutionName))
	b = exLE(b, 0x0008, 0x1010, "SH", s(synth.StationName))
	b = exLE(b, 0x0008, 0x103E, "LO", s("DWI hand made"))
	b = exLE(b, 0x0010, 0x0010, "PN", s(synth.PatientName))
	b = exLE(b, 0x0010, 0x0020, "LO", s(synth.PatientID))
	b = exLE(b, 0x0020, 0x000D, "UI", u(in.Study))
	b = exLE(b, 0x0020, 0x000E, "UI", u(in.Series))
	b = exLE(b, 0x0020, 0x0011, "IS", s("1"))
	b = exLE(b, 0x0020, 0x0013, "IS", s(fmt.Sprint(in.Number)))
	b = exLE(b, 0x0028, 0x0002, "US", us(1))
	b = exLE(b, 0x0028, 0x0004, "CS", s("MONOCHROME2"))
	if in.Frames > 0 {
		b = exLE(b, 0x0028, 0x0008, "IS", s(fmt.Sprint(in.Frames))) // Number of Frames
	}
	b = exLE(b, 0x0028, 0x0010, "US", us(uint16(in.Rows)))
	b = exLE(b, 0x0028, 0x0011, "US", us(uint16(in.Columns)))
	b = exLE(b, 0x0028, 0x0100, "US", us(16))
	b = exLE(b, 0x0028, 0x0101, "US", us(12))
	b = exLE(b, 0x0028, 0x0102, "US", us(11))
	b = exLE(b, 0x0028, 0x0103, "US", us(0))
	// Pixel Data (7FE0,0010) OW, its value streamed after this header.
	b = binary.LittleEndian.AppendUint16(b, 0x7FE0)
	b = binary.LittleEndian.AppendUint16(b, 0x0010)
	b = append(b, "OW"...)
	b = append(b, 0, 0)
	return binary.LittleEndian.AppendUint32(b, uint32(in.pixelBytes()))
}

// pixelReader streams the pixel values: a deterministic 12-bit pattern
// from the seed, generated as it is read, so that a 1 GiB object never
// sits in memory.
type pixelReader struct {
	left     int64 // bytes not yet generated; even
	state    uint64
	buf      [8192]byte
	off, end int // buf[off:end] is generated but not yet read
}

func (r *pixelReader) Read(p []byte) (int, error) {
	if r.off == r.end {
		if r.left == 0 {
			return 0, io.EOF
		}
		k := int(min(int64(len(r.buf)), r.left))
		for i := 0; i+1 < k; i += 2 {
			r.state = r.state*6364136223846793005 + 1442695040888963407 // Knuth's MMIX LCG (common practice)
			binary.LittleEndian.PutUint16(r.buf[i:], uint16(r.state>>52)&0x0FFF)
		}
		r.off, r.end = 0, k
		r.left -= int64(k)
	}
	n := copy(p, r.buf[r.off:r.end])
	r.off += n
	return n, nil
}

// reader streams the whole data set.
func (in testInstance) reader() io.Reader {
	return io.MultiReader(bytes.NewReader(in.header()), &pixelReader{left: in.pixelBytes(), state: in.Seed})
}

// bytes returns the whole data set (for small instances).
func (in testInstance) bytes() []byte {
	b, err := io.ReadAll(in.reader())
	if err != nil {
		panic(err)
	}
	return b
}

// digest is the SHA-256 of the data set.
func (in testInstance) digest() [32]byte {
	h := sha256.New()
	io.Copy(h, in.reader())
	var d [32]byte
	h.Sum(d[:0])
	return d
}

// storeContexts are the presentation contexts the tests propose.
var storeContexts = []scp.Context{
	{AbstractSyntax: scp.MRImageStorage, TransferSyntaxes: []string{scp.ExplicitVRLittleEndian}},
	{AbstractSyntax: scp.EnhancedMRImageStorage, TransferSyntaxes: []string{scp.ExplicitVRLittleEndian}},
	{AbstractSyntax: scp.VerificationSOPClass, TransferSyntaxes: []string{scp.ImplicitVRLittleEndian}},
}

// dialNode opens an association to a node as callingAE.
func dialNode(ctx context.Context, addr, callingAE string) (*scp.Association, error) {
	d := &scp.Dialer{CallingAETitle: callingAE, CalledAETitle: testAE}
	return d.Dial(ctx, addr, storeContexts)
}

// storeOne sends one instance on a new association and releases it.
// The release error is returned: a node stopping aborts the association
// once the C-STORE is answered.
func storeOne(t testing.TB, addr, callingAE string, in testInstance, data io.Reader) (scp.StoreResponse, error) {
	t.Helper()
	ctx := context.Background()
	a, err := dialNode(ctx, addr, callingAE)
	if err != nil {
		t.Fatal(err)
	}
	rsp, err := a.Store(ctx, in.sopClass(), in.SOP, scp.ExplicitVRLittleEndian, data)
	if err != nil {
		a.Abort()
		t.Fatalf("C-STORE of %s: %v", in.SOP, err)
	}
	return rsp, a.Release(ctx)
}

// signalAfter is a reader that passes data through and, once after bytes
// have been read, calls hook before going on.
type signalAfter struct {
	r     io.Reader
	after int64
	read  int64
	hook  func()
	done  bool
}

func (s *signalAfter) Read(p []byte) (int, error) {
	if !s.done && s.read >= s.after {
		s.done = true
		s.hook()
	}
	n, err := s.r.Read(p)
	s.read += int64(n)
	return n, err
}

func TestServeFinishesAStoreInFlightOnSIGTERM(t *testing.T) {
	dir := t.TempDir()
	n := startNode(t, dir)
	// 64 MiB of pixels: a C-STORE that takes long enough to be caught
	// in flight.
	in := testInstance{Study: "2.25.100", Series: "2.25.101", SOP: "2.25.102", Number: 1, Rows: 512, Columns: 512, Frames: 128, Seed: 3}
	data := &signalAfter{r: in.reader(), after: 8 << 20, hook: func() {
		n.cmd.Process.Signal(syscall.SIGTERM)
		// Go on only once the node has begun to stop, so that the rest
		// of the object arrives during the shutdown.
		if !n.waitForLog("stopping: signal received", 10*time.Second) {
			t.Error("the node did not log that it is stopping")
		}
	}}
	rsp, _ := storeOne(t, n.dicomAddr, "QOH_MR1", in, data) // the stopping node aborts after answering
	if rsp.Status != dimse.StatusSuccess {
		t.Errorf("C-STORE status %v (%s), want success", rsp.Status, rsp.ErrorComment)
	}
	// After the store, no new association is accepted.
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	if a, err := dialNode(ctx, n.dicomAddr, "QOH_MR1"); err == nil {
		a.Abort()
		t.Error("a new association was accepted during shutdown")
	}
	select {
	case <-n.exited:
	case <-time.After(nodeStopTimeout):
		t.Fatal("the node did not exit after the store in flight finished")
	}
	if n.exitCode != exitOK {
		t.Errorf("exit code %d after SIGTERM, want %d", n.exitCode, exitOK)
	}
	st := openStoreReadOnly(t, dir)
	if got, want := sha256.Sum256(storedDataSet(t, st, in.SOP)), in.digest(); got != want {
		t.Error("the stored data set differs from what was sent")
	}
	if left := tempFiles(t, dir); len(left) != 0 {
		t.Errorf("temp files left: %v", left)
	}
}

func TestServeRefusesStoresBelowTheDiskFloorWithA700(t *testing.T) {
	dir := t.TempDir()
	cfg := filepath.Join(t.TempDir(), "floor.yaml")
	// A floor no test machine has free: every C-STORE must be refused.
	if err := os.WriteFile(cfg, []byte("limits:\n  disk_floor: 1000000TiB\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	n := startNode(t, dir, "--config", cfg)
	in := testInstance{Study: "2.25.200", Series: "2.25.201", SOP: "2.25.202", Number: 1, Rows: 64, Columns: 64, Seed: 1}
	rsp, err := storeOne(t, n.dicomAddr, "QOH_MR1", in, in.reader())
	if err != nil {
		t.Errorf("release: %v", err)
	}
	// PS3.4 B.2.3 Table B.2-1: A7xx Refused: Out of Resources.
	if rsp.Status != dimse.StatusOutOfResources {
		t.Errorf("C-STORE status %v, want %v", rsp.Status, dimse.StatusOutOfResources)
	}
	if code := n.stop(); code != exitOK {
		t.Errorf("exit code %d", code)
	}
	if got := instanceFiles(t, dir); got != 0 {
		t.Errorf("%d instance files after a refused store, want none", got)
	}
	if left := tempFiles(t, dir); len(left) != 0 {
		t.Errorf("temp files left: %v", left)
	}
	st := openStoreReadOnly(t, dir)
	if _, err := st.Instance(in.SOP); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("Instance after a refused store: %v, want ErrNotFound", err)
	}
}

func TestServeEnforcesPeersAndTheirNetworks(t *testing.T) {
	dir := t.TempDir()
	cfg := filepath.Join(t.TempDir(), "peers.yaml")
	conf := `peers:
  - {ae_title: QOH_MR1, scanner: qoh-mr1-1.5t, networks: ["10.99.0.0/16"]}
  - {ae_title: QOH_MR2, scanner: qoh-mr2-3t, networks: ["127.0.0.0/8"]}
`
	if err := os.WriteFile(cfg, []byte(conf), 0o644); err != nil {
		t.Fatal(err)
	}
	n := startNode(t, dir, "--config", cfg)
	ctx := context.Background()
	tests := []struct {
		name    string
		calling string
	}{
		{"a peer from outside its networks is rejected", "QOH_MR1"},
		{"an AE title that is no peer is rejected", "QOH_MR9"},
	}
	for _, tt := range tests {
		t.Run(tt.name+" as an unknown calling AE title", func(t *testing.T) {
			a, err := dialNode(ctx, n.dicomAddr, tt.calling)
			var rj *scp.RejectError
			if !errors.As(err, &rj) {
				if a != nil {
					a.Abort()
				}
				t.Fatalf("Dial = %v, want a rejection", err)
			}
			// PS3.8 9.3.4 Table 9-21: source 1 (service user), reason 3,
			// calling AE title not recognized.
			if rj.RJ.Source != pdu.SourceServiceUser || rj.RJ.Reason != pdu.ReasonCallingAENotRecognized {
				t.Errorf("rejection %s, want calling AE title not recognized", rj.RJ.Describe())
			}
		})
	}
	t.Run("a peer inside its networks stores under its scanner label", func(t *testing.T) {
		in := testInstance{Study: "2.25.300", Series: "2.25.301", SOP: "2.25.302", Number: 1, Rows: 32, Columns: 32, Seed: 2}
		if rsp, err := storeOne(t, n.dicomAddr, "QOH_MR2", in, in.reader()); err != nil || rsp.Status != dimse.StatusSuccess {
			t.Fatalf("status %v, release %v", rsp.Status, err)
		}
		var got web.StudiesResponse
		getJSON(t, n.httpURL+"/api/v1/studies", &got)
		if len(got.Studies) != 1 || len(got.Studies[0].Series) != 1 || got.Studies[0].Series[0].Scanner != "qoh-mr2-3t" {
			t.Errorf("studies %+v", got)
		}
	})
}

func TestServeHoldsItsDataFolder(t *testing.T) {
	dir := t.TempDir()
	n := startNode(t, dir)
	var health web.HealthBody
	if code := getJSON(t, n.httpURL+"/readyz", &health); code != http.StatusOK || health.Status != "ready" {
		t.Errorf("readyz %d %+v", code, health)
	}
	t.Run("a second serve on the same folder exits 1", func(t *testing.T) {
		r := runCLI(t, "serve", "--data", dir, "--listen", "127.0.0.1:0", "--http", "127.0.0.1:0")
		if r.code != exitFailure || !strings.Contains(r.stderr, "is held by another dwiaudit process") {
			t.Errorf("exit %d, stderr %q", r.code, r.stderr)
		}
	})
	t.Run("studies --data on the folder says to ask the server", func(t *testing.T) {
		r := runCLI(t, "studies", "--data", dir)
		if r.code != exitFailure || !strings.Contains(r.stderr, "a running dwiaudit serve holds the data folder") || !strings.Contains(r.stderr, "--server") {
			t.Errorf("exit %d, stderr %q", r.code, r.stderr)
		}
	})
	if code := n.stop(); code != exitOK {
		t.Errorf("exit code %d after SIGTERM", code)
	}
}

// sentSeries is what the interop test sent: a series and its instances.
type sentSeries struct {
	study, series string
	instances     []string
}

// wantStudies is the study -> series -> instance count that was sent.
func wantStudies(sent []sentSeries) map[string]map[string]int {
	out := map[string]map[string]int{}
	for _, s := range sent {
		if out[s.study] == nil {
			out[s.study] = map[string]int{}
		}
		out[s.study][s.series] += len(s.instances)
	}
	return out
}

// gotStudies is the same for a study list.
func gotStudies(r web.StudiesResponse) map[string]map[string]int {
	out := map[string]map[string]int{}
	for _, st := range r.Studies {
		out[st.StudyInstanceUID] = map[string]int{}
		for _, se := range st.Series {
			out[st.StudyInstanceUID][se.SeriesInstanceUID] = se.Instances
		}
	}
	return out
}

func sameStudies(a, b map[string]map[string]int) bool {
	if len(a) != len(b) {
		return false
	}
	for k, v := range a {
		w, ok := b[k]
		if !ok || len(v) != len(w) {
			return false
		}
		for s, n := range v {
			if w[s] != n {
				return false
			}
		}
	}
	return true
}

func TestStorescuToServeShowsUpInStudiesAndTheAPI(t *testing.T) {
	storescu := scptest.NeedDCMTK(t, "storescu")
	src := t.TempDir()
	var sent []sentSeries
	// Two studies, the first with two series (synth files, written by an
	// independent DICOM writer).
	for i, s := range []synth.Series{
		{StudyInstanceUID: "2.25.7001", SeriesInstanceUID: "2.25.7002", Slices: 12, Rows: 64, Columns: 64, Seed: 21},
		{StudyInstanceUID: "2.25.7001", SeriesInstanceUID: "2.25.7003", Slices: 5, Rows: 64, Columns: 64, Seed: 22},
		{StudyInstanceUID: "2.25.8001", SeriesInstanceUID: "2.25.8002", Slices: 7, Rows: 64, Columns: 64, Seed: 23, TransferSyntaxUID: synth.ImplicitVRLittleEndian},
	} {
		paths, err := synth.WriteSeries(filepath.Join(src, fmt.Sprint(i)), s)
		if err != nil {
			t.Fatal(err)
		}
		ss := sentSeries{study: s.StudyInstanceUID, series: s.SeriesInstanceUID}
		for _, p := range paths {
			m, _, err := part10.ReadMetaFile(p)
			if err != nil {
				t.Fatal(err)
			}
			ss.instances = append(ss.instances, m.MediaStorageSOPInstanceUID)
		}
		sent = append(sent, ss)
	}
	want := wantStudies(sent)

	dir := t.TempDir()
	n := startNode(t, dir)
	host, port, _ := strings.Cut(n.dicomAddr, ":")
	// storescu +sd scans the folder, +r recursively (storescu --help).
	cmd := exec.Command(storescu, "-aet", "QOH_MR1", "-aec", testAE, "+sd", "+r", host, port, src)
	cmd.Env = scptest.DCMTKEnv()
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("storescu: %v\n%s", err, out)
	}

	var api web.StudiesResponse
	if code := getJSON(t, n.httpURL+"/api/v1/studies", &api); code != http.StatusOK {
		t.Fatalf("GET /api/v1/studies: %d", code)
	}
	if got := gotStudies(api); !sameStudies(got, want) {
		t.Errorf("/api/v1/studies shows %v, want %v", got, want)
	}
	today := time.Now().Format(dayLayout)
	var daily web.StudiesResponse
	getJSON(t, n.httpURL+"/api/v1/studies?day="+today, &daily)
	if got := gotStudies(daily); !sameStudies(got, want) {
		t.Errorf("/api/v1/studies?day=%s shows %v, want %v", today, got, want)
	}

	fromServer := runCLI(t, "studies", "--server", n.httpURL, "--format", "json")
	var viaServer web.StudiesResponse
	if fromServer.code != exitOK || json.Unmarshal([]byte(fromServer.stdout), &viaServer) != nil {
		t.Fatalf("studies --server: exit %d", fromServer.code)
	}
	if got := gotStudies(viaServer); !sameStudies(got, want) {
		t.Errorf("studies --server shows %v, want %v", got, want)
	}
	text := runCLI(t, "studies", "--server", n.httpURL)
	for _, s := range sent {
		line := fmt.Sprintf("series %s  #1 MR", s.series)
		if !strings.Contains(text.stdout, "study "+s.study) || !strings.Contains(text.stdout, line) || !strings.Contains(text.stdout, plural(len(s.instances), "instance", "instances")) {
			t.Errorf("studies text output lacks study %s / series %s with %d instances:\n%s", s.study, s.series, len(s.instances), text.stdout)
		}
	}
	if !strings.Contains(text.stdout, "2 studies, 3 series, 24 instances stored") {
		t.Errorf("studies text output lacks the total:\n%s", text.stdout)
	}

	if code := n.stop(); code != exitOK {
		t.Fatalf("exit code %d after SIGTERM", code)
	}
	fromFolder := runCLI(t, "studies", "--data", dir, "--format", "json")
	var viaFolder web.StudiesResponse
	if fromFolder.code != exitOK || json.Unmarshal([]byte(fromFolder.stdout), &viaFolder) != nil {
		t.Fatalf("studies --data: exit %d", fromFolder.code)
	}
	if got := gotStudies(viaFolder); !sameStudies(got, want) {
		t.Errorf("studies --data shows %v, want %v", got, want)
	}
	// Every instance sent is stored, indexed, in its series, with the
	// data set storescu read from the file.
	st := openStoreReadOnly(t, dir)
	for i, s := range sent {
		paths, _ := filepath.Glob(filepath.Join(src, fmt.Sprint(i), "*.dcm"))
		slices.Sort(paths)
		for j, sop := range s.instances {
			got, err := st.Instance(sop)
			if err != nil || got.SeriesInstanceUID != s.series || got.CallingAETitle != "QOH_MR1" {
				t.Errorf("instance %s: %+v, %v", sop, got, err)
				continue
			}
			_, wantDS := dataSetOf(t, paths[j])
			if !bytes.Equal(storedDataSet(t, st, sop), wantDS) {
				t.Errorf("instance %s stored altered", sop)
			}
		}
	}
}

func TestStudiesListsWhatTheNodeStored(t *testing.T) {
	dir := t.TempDir()
	n := startNode(t, dir)
	sent := []sentSeries{{study: "2.25.500", series: "2.25.501"}, {study: "2.25.500", series: "2.25.502"}}
	for i, s := range sent {
		for j := range 2 + i {
			in := testInstance{Study: s.study, Series: s.series, SOP: fmt.Sprintf("%s.%d", s.series, j+1), Number: j + 1, Rows: 32, Columns: 32, Seed: uint64(j)}
			if rsp, err := storeOne(t, n.dicomAddr, "QOH_MR1", in, in.reader()); err != nil || rsp.Status != dimse.StatusSuccess {
				t.Fatalf("store: %v %v", rsp.Status, err)
			}
			sent[i].instances = append(sent[i].instances, in.SOP)
		}
	}
	want := wantStudies(sent)
	today := time.Now().Format(dayLayout)
	other := time.Now().AddDate(0, 0, -3).Format(dayLayout)

	list := func(t *testing.T, args ...string) web.StudiesResponse {
		t.Helper()
		r := runCLI(t, append([]string{"studies", "--format", "json"}, args...)...)
		var got web.StudiesResponse
		if r.code != exitOK || json.Unmarshal([]byte(r.stdout), &got) != nil {
			t.Fatalf("studies %q: exit %d", args, r.code)
		}
		return got
	}
	t.Run("from the server, all studies", func(t *testing.T) {
		if got := gotStudies(list(t, "--server", n.httpURL)); !sameStudies(got, want) {
			t.Errorf("got %v, want %v", got, want)
		}
	})
	t.Run("from the server, received today", func(t *testing.T) {
		if got := gotStudies(list(t, "--server", n.httpURL, "--day", today)); !sameStudies(got, want) {
			t.Errorf("got %v, want %v", got, want)
		}
	})
	t.Run("from the server, another day is empty", func(t *testing.T) {
		if got := list(t, "--server", n.httpURL, "--day", other); len(got.Studies) != 0 {
			t.Errorf("got %v, want nothing", gotStudies(got))
		}
	})
	if code := n.stop(); code != exitOK {
		t.Fatalf("exit code %d", code)
	}
	t.Run("from the folder once the server stopped", func(t *testing.T) {
		if got := gotStudies(list(t, "--data", dir, "--day", today)); !sameStudies(got, want) {
			t.Errorf("got %v, want %v", got, want)
		}
	})
	t.Run("the text form names every study and series with its count", func(t *testing.T) {
		r := runCLI(t, "studies", "--data", dir)
		for _, want := range []string{"study 2.25.500  date 2025-03-14 09:30:00  accession SYNACC0001  2 series, 5 instances",
			"series 2.25.501  #1 MR \"DWI hand made\"  scanner - (QOH_MR1)  2 instances", "series 2.25.502  #1 MR", "3 instances",
			"1 study, 2 series, 5 instances stored"} {
			if !strings.Contains(r.stdout, want) {
				t.Errorf("output lacks %q:\n%s", want, r.stdout)
			}
		}
		if strings.Contains(r.stdout, synth.PatientName) || strings.Contains(r.stdout, synth.PatientID) {
			t.Errorf("output shows a patient identifier:\n%s", r.stdout)
		}
	})
	bad := []struct {
		name string
		args []string
		code int
		want string
	}{
		{"--data and --server together exit 2", []string{"--data", dir, "--server", "http://127.0.0.1:1"}, exitUsage, "not both"},
		{"a day that is not YYYY-MM-DD exits 2", []string{"--data", dir, "--day", "2025-3-4"}, exitUsage, "is not YYYY-MM-DD"},
		{"an unknown format exits 2", []string{"--data", dir, "--format", "xml"}, exitUsage, "use text or json"},
		{"a folder without an index says nothing is stored", []string{"--data", t.TempDir()}, exitFailure, "nothing is stored in"},
		{"a server that does not answer exits 1", []string{"--server", "http://127.0.0.1:1"}, exitFailure, "asking the server"},
	}
	for _, tt := range bad {
		t.Run(tt.name, func(t *testing.T) {
			r := runCLI(t, append([]string{"studies"}, tt.args...)...)
			if r.code != tt.code || !strings.Contains(r.stderr, tt.want) {
				t.Errorf("exit %d, stderr %q; want %d and %q", r.code, r.stderr, tt.code, tt.want)
			}
		})
	}
}

// TestEchoOnDefaultsReachesServeOnDefaults: `dwiaudit echo HOST:PORT`
// with no AE title flags is accepted by `dwiaudit serve` with no
// configuration, because every client command calls the node's own
// default AE title.
func TestEchoOnDefaultsReachesServeOnDefaults(t *testing.T) {
	n := startNode(t, t.TempDir())
	r := runCLI(t, "echo", n.dicomAddr)
	if r.code != exitOK {
		t.Fatalf("echo on defaults exited %d: %s", r.code, r.stderr)
	}
	if want := "(" + scp.DefaultAETitle + ") succeeded"; !strings.Contains(r.stdout, want) {
		t.Errorf("echo printed %q, want it to name the called AE title %q", r.stdout, want)
	}
}

// TestClientCommandsShowTheNodesDefaultAETitle: the help of every client
// command names the called AE title it uses by default, the node's own.
func TestClientCommandsShowTheNodesDefaultAETitle(t *testing.T) {
	for _, cmd := range []string{"echo", "send", "selftest"} {
		t.Run(cmd+" --help names the default called AE title", func(t *testing.T) {
			r := runCLI(t, cmd, "--help")
			want := `default "` + scp.DefaultAETitle + `"`
			i := strings.Index(r.stderr, "-called-ae")
			if i < 0 || !strings.Contains(r.stderr[i:], want) {
				t.Errorf("%s --help does not show -called-ae with %s:\n%s", cmd, want, r.stderr)
			}
		})
	}
	if scp.DefaultCalledAETitle != scp.DefaultAETitle {
		t.Errorf("scp.DefaultCalledAETitle = %q, want the node's default %q", scp.DefaultCalledAETitle, scp.DefaultAETitle)
	}
}
