package main

import (
	"bytes"
	"context"
	"net"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"dwiaudit/audit/synth"
	"dwiaudit/scp"
	"dwiaudit/scp/dimse"
)

// cliRun is the outcome of one in-process run of the command.
type cliRun struct {
	code           int
	stdout, stderr string
}

// runCLI runs dwiaudit with args in-process, as main would, with stderr
// not a terminal (so no progress bar).
func runCLI(t testing.TB, args ...string) cliRun {
	t.Helper()
	var stdout, stderr bytes.Buffer
	env := &cliEnv{stdout: &stdout, stderr: &stderr}
	code := run(t.Context(), env, args)
	r := cliRun{code: code, stdout: stdout.String(), stderr: stderr.String()}
	t.Cleanup(func() {
		if t.Failed() {
			t.Logf("dwiaudit %q exited %d\nstdout:\n%s\nstderr:\n%s", args, r.code, r.stdout, r.stderr)
		}
	})
	return r
}

func TestHelpExitsZeroAndPrintsUsage(t *testing.T) {
	tests := []struct {
		name       string
		args       []string
		wantCode   int
		wantStderr []string
	}{
		{"no arguments print the usage and exit 2", nil, exitUsage, []string{"Usage: dwiaudit <command> [flags]"}},
		{"--help prints the usage with every command", []string{"--help"}, exitOK, []string{"Usage: dwiaudit <command> [flags]", "  echo ", "  send "}},
		{"-h prints the usage", []string{"-h"}, exitOK, []string{"Usage: dwiaudit <command> [flags]"}},
		{"help prints the usage", []string{"help"}, exitOK, []string{"Usage: dwiaudit <command> [flags]"}},
	}
	// A flag each command's usage must list.
	someFlag := map[string]string{"echo": "-calling-ae", "send": "-calling-ae", "serve": "-config", "studies": "-server", "phantom": "-case", "check": "-fail-on", "report": "-format", "demo": "-exit", "selftest": "-server", "hash-password": "-cost"}
	for _, c := range commands() {
		if someFlag[c.name] == "" {
			t.Errorf("command %q has no entry in someFlag", c.name)
		}
		for _, flag := range []string{"--help", "-h"} {
			tests = append(tests, struct {
				name       string
				args       []string
				wantCode   int
				wantStderr []string
			}{
				name:       c.name + " " + flag + " prints the command's usage and flags",
				args:       []string{c.name, flag},
				wantCode:   exitOK,
				wantStderr: []string{"Usage: dwiaudit " + c.name + " ", "Flags:", someFlag[c.name]},
			})
		}
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			r := runCLI(t, tt.args...)
			if r.code != tt.wantCode {
				t.Errorf("exit code %d, want %d", r.code, tt.wantCode)
			}
			for _, s := range tt.wantStderr {
				if !strings.Contains(r.stderr, s) {
					t.Errorf("stderr lacks %q", s)
				}
			}
			if r.stdout != "" {
				t.Errorf("stdout %q, want nothing: usage goes to stderr", r.stdout)
			}
		})
	}
}

func TestBadInvocationsExitTwo(t *testing.T) {
	tests := []struct {
		name       string
		args       []string
		wantStderr string
	}{
		{"an unknown command exits 2 and names it", []string{"frobnicate"}, `dwiaudit: unknown command "frobnicate"`},
		{"an unknown flag exits 2", []string{"send", "--no-such-flag", "x"}, "flag provided but not defined: -no-such-flag"}, // Go package flag's message
		{"echo without an address exits 2", []string{"echo"}, "dwiaudit echo: want exactly one HOST:PORT"},
		{"send without paths exits 2", []string{"send"}, "dwiaudit send: name at least one file or folder"},
		{"send with --parallel 0 exits 2", []string{"send", "--parallel", "0", "x"}, "--parallel must be 1..64"},
		{"send with a maximum PDU below 4096 exits 2", []string{"send", "--max-pdu", "1024", "x"}, "--max-pdu must be 4096.."},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			r := runCLI(t, tt.args...)
			if r.code != exitUsage {
				t.Errorf("exit code %d, want %d", r.code, exitUsage)
			}
			if !strings.Contains(r.stderr, tt.wantStderr) {
				t.Errorf("stderr lacks %q", tt.wantStderr)
			}
		})
	}
}

// storeCounter is a StoreHandler that counts data sets received, reading
// each to the end, and answers with err.
type storeCounter struct {
	err error

	mu   sync.Mutex
	uids map[string]int
}

func (h *storeCounter) HandleStore(ctx context.Context, req *scp.StoreRequest) error {
	var buf bytes.Buffer
	if _, err := buf.ReadFrom(req.Data); err != nil {
		return err
	}
	h.mu.Lock()
	defer h.mu.Unlock()
	if h.uids == nil {
		h.uids = map[string]int{}
	}
	h.uids[req.SOPInstanceUID]++
	return h.err
}

func (h *storeCounter) received() int {
	h.mu.Lock()
	defer h.mu.Unlock()
	return len(h.uids)
}

// startServer serves an acceptor with handler h on a free loopback port
// until the test ends and returns its address.
func startServer(t testing.TB, h scp.StoreHandler) string {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	srv := &scp.Server{AETitle: scp.DefaultAETitle, Handler: h, ARTIMTimeout: 5 * time.Second}
	served := make(chan error, 1)
	go func() { served <- srv.Serve(l) }()
	t.Cleanup(func() {
		ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
		defer cancel()
		if err := srv.Shutdown(ctx); err != nil {
			t.Errorf("Shutdown: %v", err)
		}
		<-served
	})
	return l.Addr().String()
}

// smallSeriesSlices is the size of the series the CLI tests send: enough
// to count, small enough to write in milliseconds.
const smallSeriesSlices = 3

// writeSmallSeries writes a small synthetic series into dir.
func writeSmallSeries(t testing.TB, dir string) []string {
	t.Helper()
	paths, err := synth.WriteSeries(dir, synth.Series{Rows: 32, Columns: 32, Slices: smallSeriesSlices, Seed: 7})
	if err != nil {
		t.Fatal(err)
	}
	return paths
}

// summaryLine is the first line send prints to stdout.
func summaryLine(stdout string) string {
	line, _, _ := strings.Cut(stdout, "\n")
	return line
}

func TestSendCountsNonDICOMFilesAsSkippedAndSendsTheRest(t *testing.T) {
	dir := t.TempDir()
	writeSmallSeries(t, dir)
	if err := os.WriteFile(filepath.Join(dir, "notes.txt"), []byte("scanner notes, not DICOM\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	h := &storeCounter{}
	addr := startServer(t, h)

	r := runCLI(t, "send", "--to", addr, "--called-ae", scp.DefaultAETitle, dir)
	if r.code != exitOK {
		t.Errorf("exit code %d, want %d", r.code, exitOK)
	}
	if got, want := summaryLine(r.stdout), "sent 3, warnings 0, failures 0, not DICOM 1 ("; !strings.HasPrefix(got, want) {
		t.Errorf("summary %q, want it to start %q", got, want)
	}
	if h.received() != smallSeriesSlices {
		t.Errorf("server received %d SOP instances, want %d", h.received(), smallSeriesSlices)
	}
}

func TestSendToAPortWithoutListenerFailsEveryFile(t *testing.T) {
	dir := t.TempDir()
	paths := writeSmallSeries(t, dir)
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	addr := l.Addr().String()
	l.Close() // nothing listens there now

	r := runCLI(t, "send", "--to", addr, "--called-ae", scp.DefaultAETitle, dir)
	if r.code != exitFailure {
		t.Errorf("exit code %d, want %d", r.code, exitFailure)
	}
	if got, want := summaryLine(r.stdout), "sent 0, warnings 0, failures 3, not DICOM 0 ("; !strings.HasPrefix(got, want) {
		t.Errorf("summary %q, want it to start %q", got, want)
	}
	for _, p := range paths {
		if want := "  failed " + p + ": scp: connect to " + addr; !strings.Contains(r.stdout, want) {
			t.Errorf("summary lacks the failure line %q", want)
		}
	}
}

func TestSendReportsTheFailureStatusTheServerAnswered(t *testing.T) {
	dir := t.TempDir()
	paths := writeSmallSeries(t, dir)
	h := &storeCounter{err: dimse.NewStatusError(dimse.StatusOutOfResources, "disk full", nil)}
	addr := startServer(t, h)

	r := runCLI(t, "send", "--to", addr, "--called-ae", scp.DefaultAETitle, dir)
	if r.code != exitFailure {
		t.Errorf("exit code %d, want %d", r.code, exitFailure)
	}
	lines := strings.Split(r.stdout, "\n")
	if got, want := lines[0], "sent 0, warnings 0, failures 3, not DICOM 0 ("; !strings.HasPrefix(got, want) {
		t.Errorf("summary %q, want it to start %q", got, want)
	}
	// A700 is "Refused: Out of Resources" for C-STORE (PS3.4 B.2.3,
	// Table B.2-1, from memory).
	if want := "  status 0xA700 (out of resources): 3"; len(lines) < 2 || lines[1] != want {
		t.Errorf("second summary line %q, want %q", lines[1:], want)
	}
	for _, p := range paths {
		if want := "  failed " + p + ": status 0xA700 (out of resources): disk full\n"; !strings.Contains(r.stdout, want) {
			t.Errorf("summary lacks the failure line %q", want)
		}
	}
	if h.received() != smallSeriesSlices {
		t.Errorf("server received %d SOP instances, want %d: a failure status must not stop the send", h.received(), smallSeriesSlices)
	}
}
