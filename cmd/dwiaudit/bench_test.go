package main

// Throughput of the running node against DCMTK's storescp, on the same
// files and with the same client (DCMTK storescu), and the node's peak
// memory while it receives a 1 GiB object. Run with
//
//	go test -run '^$' -bench ServeVsStorescp -benchtime 3x ./cmd/dwiaudit/
//	DWIAUDIT_BIG=1 go test -run BigObject -v ./cmd/dwiaudit/
//
// The node stores durably (fsync of each file and folder, then the index
// commit) before it answers; storescp -od writes files without fsync. The
// benchmark needs the Debian package dcmtk.

import (
	"context"
	"crypto/sha256"
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

	"dwiaudit/audit/synth"
	"dwiaudit/scp"
	"dwiaudit/scp/dimse"
	"dwiaudit/scp/scptest"
)

// Shape of the throughput benchmark.
const (
	// benchImages synthetic MR images of 256 x 256 x 16 bits (128 KiB of
	// pixels each, a clinical DWI slice, common practice) are sent per
	// run: about 50 MB, a second or so of sending here.
	benchImages = 400
	// benchParallel associations, each sending a quarter of the files.
	benchParallel = 4
	// benchPDU is the largest Maximum Length DCMTK accepts (storescp
	// --help: 4096..131072), used by the client and by storescp alike.
	benchPDU = 131072
)

// startStorescpOn runs storescp -od dir on a free port until b ends and
// returns host and port.
func startStorescpOn(b *testing.B, dir string) (string, string) {
	b.Helper()
	path := scptest.NeedDCMTK(b, "storescp")
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		b.Fatal(err)
	}
	port := strconv.Itoa(l.Addr().(*net.TCPAddr).Port)
	l.Close()
	cmd := exec.Command(path, "-aet", "STORESCP", "-od", dir, "-pdu", strconv.Itoa(benchPDU), port)
	cmd.Env = scptest.DCMTKEnv()
	if err := cmd.Start(); err != nil {
		b.Fatal(err)
	}
	exited := make(chan struct{})
	go func() { cmd.Wait(); close(exited) }()
	b.Cleanup(func() { cmd.Process.Kill(); <-exited })
	deadline := time.Now().Add(nodeStartTimeout)
	for {
		c, err := net.Dial("tcp", net.JoinHostPort("127.0.0.1", port))
		if err == nil {
			c.Close()
			return "127.0.0.1", port
		}
		if time.Now().After(deadline) {
			b.Fatalf("storescp does not listen: %v", err)
		}
		time.Sleep(10 * time.Millisecond)
	}
}

// runStorescu sends files with storescu and returns the wall time.
func runStorescu(b *testing.B, storescu, calledAE, host, port string, files []string) time.Duration {
	b.Helper()
	args := append([]string{"-aet", "BENCH", "-aec", calledAE, "-pdu", strconv.Itoa(benchPDU), host, port}, files...)
	cmd := exec.Command(storescu, args...)
	cmd.Env = scptest.DCMTKEnv()
	start := time.Now()
	out, err := cmd.CombinedOutput()
	d := time.Since(start)
	if err != nil {
		b.Fatalf("storescu: %v\n%s", err, out)
	}
	return d
}

// runStorescuParallel sends the files over parallel storescu processes,
// each its share, and returns the wall time of all of them.
func runStorescuParallel(b *testing.B, storescu, calledAE, host, port string, files []string, parallel int) time.Duration {
	b.Helper()
	var wg sync.WaitGroup
	start := time.Now()
	for i := range parallel {
		share := files[i*len(files)/parallel : (i+1)*len(files)/parallel]
		wg.Go(func() { runStorescu(b, storescu, calledAE, host, port, share) })
	}
	wg.Wait()
	return time.Since(start)
}

// countFiles counts regular files under dir.
func countFiles(b *testing.B, dir string) int {
	n := 0
	filepath.WalkDir(dir, func(_ string, d os.DirEntry, err error) error {
		if err == nil && d.Type().IsRegular() {
			n++
		}
		return nil
	})
	return n
}

func BenchmarkServeVsStorescp(b *testing.B) {
	storescu := scptest.NeedDCMTK(b, "storescu")
	scptest.NeedDCMTK(b, "storescp")
	files, err := synth.WriteSeries(b.TempDir(), synth.Series{Slices: benchImages, Seed: 99})
	if err != nil {
		b.Fatal(err)
	}
	var dStorescp, dServe, dServeParallel time.Duration
	b.ResetTimer()
	for range b.N {
		// DCMTK storescp, one association.
		out := b.TempDir()
		host, port := startStorescpOn(b, out)
		dStorescp += runStorescu(b, storescu, "STORESCP", host, port, files)
		if got := countFiles(b, out); got != benchImages {
			b.Fatalf("storescp wrote %d files, want %d", got, benchImages)
		}

		// dwiaudit serve, one association, then four, each on a fresh
		// data folder so that nothing is a duplicate.
		for _, parallel := range []int{1, benchParallel} {
			dir := b.TempDir()
			n := startNode(b, dir)
			host, port, _ := strings.Cut(n.dicomAddr, ":")
			if parallel == 1 {
				dServe += runStorescu(b, storescu, testAE, host, port, files)
			} else {
				dServeParallel += runStorescuParallel(b, storescu, testAE, host, port, files, parallel)
			}
			if code := n.stop(); code != exitOK {
				b.Fatalf("serve exited %d", code)
			}
			if got := countFiles(b, filepath.Join(dir, "instances")); got != benchImages {
				b.Fatalf("serve stored %d files, want %d", got, benchImages)
			}
		}
	}
	b.StopTimer()
	rate := func(d time.Duration) float64 { return float64(benchImages*b.N) / d.Seconds() }
	b.ReportMetric(rate(dStorescp), "storescp_images/s")
	b.ReportMetric(rate(dServe), "serve_images/s")
	b.ReportMetric(rate(dServeParallel), "serve4_images/s")
	b.ReportMetric(rate(dServe)/rate(dStorescp), "ratio_single")    // target >= 1.0
	b.ReportMetric(rate(dServeParallel)/rate(dStorescp), "ratio_4") // target >= 2.0
	b.ReportMetric(0, "ns/op")
}

// Shape of the big-object measurement.
const (
	bigObjectEnv = "DWIAUDIT_BIG"
	// bigFrames frames of 256 x 256 x 16 bits are 1 GiB of pixel data.
	bigFrames = 8192
	// bigRSSTarget is the target for the node's peak resident
	// memory while it receives the object.
	bigRSSTarget = 150 << 20
)

// vmHWM reads the peak resident set size of a process (Linux
// /proc/<pid>/status, field VmHWM, in kB; proc(5)).
func vmHWM(t testing.TB, pid int) int64 {
	t.Helper()
	b, err := os.ReadFile(fmt.Sprintf("/proc/%d/status", pid))
	if err != nil {
		t.Skipf("no /proc/%d/status (not Linux?): %v", pid, err)
	}
	for _, line := range strings.Split(string(b), "\n") {
		if v, ok := strings.CutPrefix(line, "VmHWM:"); ok {
			kb, err := strconv.ParseInt(strings.TrimSpace(strings.TrimSuffix(strings.TrimSpace(v), "kB")), 10, 64)
			if err != nil {
				t.Fatalf("VmHWM %q: %v", v, err)
			}
			return kb << 10
		}
	}
	t.Fatal("no VmHWM in /proc status")
	return 0
}

// TestServeReceivesABigObjectInLittleMemory sends one Enhanced MR Image
// Storage object (PS3.4 B.5, SOP class 1.2.840.10008.5.1.4.1.1.4.1) of
// 1 GiB of pixel data, generated as it is sent, and reads the node's peak
// RSS. It writes 1 GiB, so it runs only with DWIAUDIT_BIG=1.
func TestServeReceivesABigObjectInLittleMemory(t *testing.T) {
	if os.Getenv(bigObjectEnv) != "1" {
		t.Skipf("writes 1 GiB: set %s=1 to run it", bigObjectEnv)
	}
	dir := t.TempDir()
	n := startNode(t, dir)
	before := vmHWM(t, n.cmd.Process.Pid)
	in := testInstance{Study: "2.25.600", Series: "2.25.601", SOP: "2.25.602", Number: 1, Rows: 256, Columns: 256, Frames: bigFrames, Seed: 6}
	start := time.Now()
	ctx := context.Background()
	a, err := dialNode(ctx, n.dicomAddr, "QOH_MR1")
	if err != nil {
		t.Fatal(err)
	}
	rsp, err := a.Store(ctx, in.sopClass(), in.SOP, scp.ExplicitVRLittleEndian, in.reader())
	if err != nil || rsp.Status != dimse.StatusSuccess {
		t.Fatalf("C-STORE: %v %v", rsp.Status, err)
	}
	took := time.Since(start)
	a.Release(ctx)
	peak := vmHWM(t, n.cmd.Process.Pid)
	t.Logf("1 GiB Enhanced MR object stored in %v (%.0f MB/s); node VmHWM %.1f MiB (%.1f MiB before the association)",
		took.Round(time.Millisecond), float64(in.pixelBytes())/1e6/took.Seconds(), float64(peak)/(1<<20), float64(before)/(1<<20))
	if peak > bigRSSTarget {
		t.Errorf("peak RSS %.1f MiB, target under %d MiB", float64(peak)/(1<<20), bigRSSTarget>>20)
	}
	if code := n.stop(); code != exitOK {
		t.Errorf("exit code %d", code)
	}
	st := openStoreReadOnly(t, dir)
	got, err := st.Instance(in.SOP)
	if err != nil {
		t.Fatal(err)
	}
	rc, err := st.OpenInstance(in.SOP)
	if err != nil {
		t.Fatal(err)
	}
	defer rc.Close()
	h := sha256.New()
	if _, err := io.CopyN(io.Discard, rc, got.DataSetOffset); err != nil {
		t.Fatal(err)
	}
	if _, err := io.Copy(h, rc); err != nil {
		t.Fatal(err)
	}
	if [32]byte(h.Sum(nil)) != in.digest() {
		t.Error("the stored data set differs from what was sent")
	}
}
