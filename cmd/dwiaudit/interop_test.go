package main

// Interoperability of `dwiaudit send` and `dwiaudit echo` with DCMTK's
// storescp, an acceptor independent of ours.

import (
	"bytes"
	"context"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"dwiaudit/scp/scptest"

	"dwiaudit/audit/synth"
	"dwiaudit/scp/part10"
)

// Limits of the helpers that drive storescp.
const (
	// portWaitTimeout bounds the wait for storescp to listen.
	portWaitTimeout = 10 * time.Second
	// portPollInterval is how often waitForPort tries to connect.
	portPollInterval = 10 * time.Millisecond
)

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

// startStorescp starts DCMTK's storescp with args on a free loopback port,
// waits until it accepts connections and returns its address. It runs
// with TCP_NODELAY=1: Debian's DCMTK otherwise leaves Nagle's algorithm on
// and each C-STORE waits about 40 ms for a delayed ACK (common practice).
// It is killed when the test ends; its output goes to the test log when
// the test fails.
func startStorescp(t testing.TB, args ...string) string {
	t.Helper()
	path := scptest.NeedDCMTK(t, "storescp")
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	port := l.Addr().(*net.TCPAddr).Port
	l.Close()

	ctx, cancel := context.WithCancel(context.Background())
	cmd := exec.CommandContext(ctx, path, append(args, strconv.Itoa(port))...)
	cmd.Env = scptest.DCMTKEnv()
	out := &syncBuffer{}
	cmd.Stdout, cmd.Stderr = out, out
	if err := cmd.Start(); err != nil {
		cancel()
		t.Fatalf("start storescp: %v", err)
	}
	exited := make(chan struct{})
	go func() { cmd.Wait(); close(exited) }()
	t.Cleanup(func() {
		cancel()
		<-exited
		if t.Failed() {
			t.Logf("storescp %v output:\n%s", args, out.String())
		}
	})

	addr := net.JoinHostPort("127.0.0.1", strconv.Itoa(port))
	deadline := time.Now().Add(portWaitTimeout)
	for {
		c, err := net.DialTimeout("tcp", addr, time.Second)
		if err == nil {
			c.Close()
			return addr
		}
		select {
		case <-exited:
			t.Fatalf("storescp exited before listening on %s", addr)
		default:
		}
		if time.Now().After(deadline) {
			t.Fatalf("storescp does not listen on %s after %v: %v", addr, portWaitTimeout, err)
		}
		time.Sleep(portPollInterval)
	}
}

// dataSetOf reads a Part 10 file and returns its meta information and the
// bytes from the data-set offset part10.ReadMeta gives.
func dataSetOf(t testing.TB, path string) (part10.Meta, []byte) {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	meta, off, err := part10.ReadMeta(bytes.NewReader(b))
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	return meta, b[off:]
}

// Size of the series sent to storescp: a DWI series' worth of 256×256
// 16-bit images, 128 KiB of pixels each.
const interopSlices = 300

func TestSendToStorescpDeliversEveryDataSetUnchanged(t *testing.T) {
	scptest.NeedDCMTK(t, "storescp")
	src := t.TempDir()
	paths, err := synth.WriteSeries(src, synth.Series{Slices: interopSlices, Seed: 11})
	if err != nil {
		t.Fatal(err)
	}
	type sent struct {
		path    string
		meta    part10.Meta
		dataSet []byte
	}
	byUID := map[string]sent{}
	for _, p := range paths {
		meta, ds := dataSetOf(t, p)
		byUID[meta.MediaStorageSOPInstanceUID] = sent{p, meta, ds}
	}

	tests := []struct {
		name     string
		storescp []string // options besides -aet, -od and +B
		send     []string // options of dwiaudit send besides --to, --called-ae and --quiet
	}{
		{
			name: "one association to storescp's default 16 KiB PDUs",
			send: []string{"--parallel", "1"},
		},
		{
			name: "one association with 4 KiB PDUs both ways",
			// DCMTK storescp --help: -pdu 4096..131072.
			storescp: []string{"-pdu", "4096"},
			send:     []string{"--parallel", "1", "--max-pdu", "4096"},
		},
		{
			name: "four associations to a forking storescp with 128 KiB PDUs",
			// --fork: a child process per association (DCMTK storescp
			// --help), so the four associations really run at once.
			storescp: []string{"--fork", "-pdu", "131072"},
			send:     []string{"--parallel", "4"},
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			out := t.TempDir()
			// +B writes the data set exactly as received (DCMTK storescp
			// --help, bit preserving mode), so the files show what went
			// over the wire and not DCMTK's re-encoding of it.
			addr := startStorescp(t, append([]string{"-aet", "STORESCP", "-od", out, "+B"}, tt.storescp...)...)

			args := append([]string{"send", "--to", addr, "--called-ae", "STORESCP", "--quiet"}, tt.send...)
			r := runCLI(t, append(args, src)...)
			if r.code != exitOK {
				t.Fatalf("exit code %d, want %d", r.code, exitOK)
			}
			if got, want := summaryLine(r.stdout), "sent 300, warnings 0, failures 0, not DICOM 0 ("; !strings.HasPrefix(got, want) {
				t.Errorf("summary %q, want it to start %q", got, want)
			}

			entries, err := os.ReadDir(out)
			if err != nil {
				t.Fatal(err)
			}
			if len(entries) != interopSlices {
				t.Errorf("storescp wrote %d files, want %d", len(entries), interopSlices)
			}
			seen := map[string]bool{}
			bad := 0
			for _, e := range entries {
				meta, ds := dataSetOf(t, filepath.Join(out, e.Name()))
				uid := meta.MediaStorageSOPInstanceUID
				want, ok := byUID[uid]
				switch {
				case !ok:
					t.Errorf("storescp wrote %s for SOP instance %s, which was not sent", e.Name(), uid)
				case seen[uid]:
					t.Errorf("storescp wrote SOP instance %s twice", uid)
				case e.Name() != "MR."+uid:
					// DCMTK storescp -uf (default): modality prefix and
					// SOP Instance UID (storescp man page, observed).
					t.Errorf("storescp named %s's file %s, want MR.%s", want.path, e.Name(), uid)
				case meta.TransferSyntaxUID != want.meta.TransferSyntaxUID || meta.MediaStorageSOPClassUID != want.meta.MediaStorageSOPClassUID:
					t.Errorf("%s arrived as %s in %s, want %s in %s", want.path, meta.MediaStorageSOPClassUID, meta.TransferSyntaxUID, want.meta.MediaStorageSOPClassUID, want.meta.TransferSyntaxUID)
				case !bytes.Equal(ds, want.dataSet):
					t.Errorf("%s arrived altered: %s", want.path, firstDifference(ds, want.dataSet))
				default:
					seen[uid] = true
					continue
				}
				seen[uid] = true
				if bad++; bad == 10 {
					t.Fatal("giving up after 10 bad files")
				}
			}
		})
	}
}

// firstDifference describes where two byte strings part.
func firstDifference(got, want []byte) string {
	for i := range min(len(got), len(want)) {
		if got[i] != want[i] {
			return "first difference at byte " + strconv.Itoa(i) + " of " + strconv.Itoa(len(want))
		}
	}
	return "got " + strconv.Itoa(len(got)) + " bytes, want " + strconv.Itoa(len(want))
}

func TestEchoToStorescpSucceeds(t *testing.T) {
	addr := startStorescp(t, "-aet", "STORESCP")
	r := runCLI(t, "echo", "--called-ae", "STORESCP", addr)
	if r.code != exitOK {
		t.Errorf("exit code %d, want %d", r.code, exitOK)
	}
	if want := "C-ECHO to " + addr + " (STORESCP) succeeded in "; !strings.HasPrefix(r.stdout, want) {
		t.Errorf("stdout %q, want it to start %q", r.stdout, want)
	}
}

// TestEchoWithWrongCalledAEPrintsTheRejection uses our own acceptor:
// storescp answers whatever called AE title it is given (it has no option
// to check it besides a configuration file, storescp --help), so it cannot
// produce this rejection.
func TestEchoWithWrongCalledAEPrintsTheRejection(t *testing.T) {
	addr := startServer(t, &storeCounter{})
	r := runCLI(t, "echo", "--called-ae", "WRONG", addr)
	if r.code != exitFailure {
		t.Errorf("exit code %d, want %d", r.code, exitFailure)
	}
	// PS3.8 9.3.4 Table 9-21: reason 7 of the service user is
	// called-AE-title-not-recognized.
	if want := "association rejected: called AE title not recognized\n"; r.stderr != want {
		t.Errorf("stderr %q, want exactly %q", r.stderr, want)
	}
	if r.stdout != "" {
		t.Errorf("stdout %q, want nothing", r.stdout)
	}
}
