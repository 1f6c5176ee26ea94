package scp_test

// Throughput of C-STORE over loopback TCP: ours (Dialer and Server) and
// DCMTK's (storescu into storescp --ignore), on the same synthetic MR
// images, 256 x 256 x 16 bits (128 KiB of pixels each). One benchmark
// iteration is one association carrying benchImages images, as a scanner
// sends a series. Run with
//
//	go test -run '^$' -bench . -benchtime 3x ./scp/
//
// The DCMTK benchmarks need the Debian package dcmtk; they fail under
// CI=true without it and skip otherwise.

import (
	"bytes"
	"context"
	"fmt"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"testing"
	"time"

	"dwiaudit/scp/scptest"

	"dwiaudit/scp"
	"dwiaudit/scp/part10"
)

const (
	// benchFiles distinct images are written once; one run sends them
	// benchFileRepeats times in one association, 6000 images (786 MB of
	// data sets), a large DWI study (common practice: 60 slices x 100
	// directions). That makes one DCMTK run last about a second here.
	benchDistinct    = 500
	benchFileRepeats = 12
	benchImages      = benchDistinct * benchFileRepeats

	// benchLoopbackRepeats makes one in-memory run 20000 images, about a
	// second of our sender and receiver.
	benchLoopbackRepeats = 40

	benchRows = 256
	benchCols = 256

	// dcmtkMaxPDU is the largest Maximum Length DCMTK's tools accept
	// (storescp --help: 4096..131072); DCMTK's default is 16384.
	dcmtkMaxPDU = 131072

	// dcmtkStartTimeout bounds the wait for storescp to listen.
	dcmtkStartTimeout = 10 * time.Second
)

// benchDataSets makes n distinct images (distinct SOP instance UIDs and
// pixels).
func benchDataSets(n int) (sets [][]byte, instances []string) {
	for i := range n {
		uid := fmt.Sprintf("2.25.%d", 314159265358979+uint64(i))
		instances = append(instances, uid)
		sets = append(sets, dataSet(benchRows, benchCols, uid, uint64(i)))
	}
	return sets, instances
}

// benchFiles writes the images of benchDataSets as Part 10 files (PS3.10
// 7.1) into a fresh folder. It returns the list of files of one run (each
// file benchFileRepeats times, as repeated arguments or folders) and the
// data-set bytes of one run.
func benchFiles(b *testing.B, n int) (dir string, paths []string, payload int64) {
	b.Helper()
	dir = b.TempDir()
	sets, instances := benchDataSets(n)
	for i, ds := range sets {
		var buf bytes.Buffer
		err := part10.WriteHeader(&buf, part10.Meta{
			MediaStorageSOPClassUID:    scp.MRImageStorage,
			MediaStorageSOPInstanceUID: instances[i],
			TransferSyntaxUID:          scp.ExplicitVRLittleEndian,
		})
		if err != nil {
			b.Fatal(err)
		}
		buf.Write(ds)
		path := filepath.Join(dir, fmt.Sprintf("MR%05d.dcm", i+1))
		if err := os.WriteFile(path, buf.Bytes(), 0o644); err != nil {
			b.Fatal(err)
		}
		paths = append(paths, path)
		payload += int64(len(ds))
	}
	var run []string
	for range benchFileRepeats {
		run = append(run, paths...)
	}
	return dir, run, payload * benchFileRepeats
}

// reportRate adds images/s and MB/s (10^6 bytes, as go test's own MB/s)
// for images and bytes moved in d.
func reportRate(b *testing.B, prefix string, images int, bytes int64, d time.Duration) {
	b.ReportMetric(float64(images)/d.Seconds(), prefix+"images/s")
	b.ReportMetric(float64(bytes)/1e6/d.Seconds(), prefix+"MB/s")
}

// discardServer serves a discarding handler on loopback TCP.
func discardServer(b *testing.B) string {
	addr, _ := serveTCP(b, &scp.Server{Handler: scp.StoreHandlerFunc(discard)})
	return addr
}

func BenchmarkCStoreLoopback(b *testing.B) {
	sets, instances := benchDataSets(benchDistinct)
	payload := int64(0)
	for _, ds := range sets {
		payload += int64(len(ds))
	}
	payload *= benchLoopbackRepeats
	images := benchDistinct * benchLoopbackRepeats
	addr := discardServer(b)
	d := &scp.Dialer{CalledAETitle: serverAE}
	contexts := []scp.Context{{AbstractSyntax: scp.MRImageStorage, TransferSyntaxes: []string{scp.ExplicitVRLittleEndian}}}
	ctx := context.Background()
	b.SetBytes(payload)
	b.ResetTimer()
	for range b.N {
		a, err := d.Dial(ctx, addr, contexts)
		if err != nil {
			b.Fatal(err)
		}
		for i := range images {
			k := i % len(sets)
			rsp, err := a.Store(ctx, scp.MRImageStorage, instances[k], scp.ExplicitVRLittleEndian, bytes.NewReader(sets[k]))
			if err != nil || rsp.Status != 0 {
				b.Fatalf("image %d: %v %v", i, rsp.Status, err)
			}
		}
		if err := a.Release(ctx); err != nil {
			b.Fatal(err)
		}
	}
	b.StopTimer()
	reportRate(b, "", images*b.N, payload*int64(b.N), b.Elapsed())
}

// startDCMTKStorescp runs storescp --ignore with Maximum Length maxPDU on
// a free loopback port until the benchmark ends.
func startDCMTKStorescp(b *testing.B, maxPDU int) string {
	b.Helper()
	path := scptest.NeedDCMTK(b, "storescp")
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		b.Fatal(err)
	}
	port := strconv.Itoa(l.Addr().(*net.TCPAddr).Port)
	l.Close()
	var out bytes.Buffer
	cmd := exec.Command(path, "--ignore", "--max-pdu", strconv.Itoa(maxPDU), port)
	cmd.Env = scptest.DCMTKEnv()
	cmd.Stdout, cmd.Stderr = &out, &out
	if err := cmd.Start(); err != nil {
		b.Fatal(err)
	}
	exited := make(chan error, 1)
	go func() { exited <- cmd.Wait() }()
	b.Cleanup(func() {
		cmd.Process.Kill()
		<-exited
	})
	addr := net.JoinHostPort("127.0.0.1", port)
	deadline := time.Now().Add(dcmtkStartTimeout)
	for {
		nc, err := net.DialTimeout("tcp", addr, time.Second)
		if err == nil {
			nc.Close()
			return addr
		}
		select {
		case err := <-exited:
			b.Fatalf("storescp exited: %v\n%s", err, out.String())
		case <-time.After(10 * time.Millisecond):
		}
		if time.Now().After(deadline) {
			b.Fatalf("storescp did not listen on %s: %v", addr, err)
		}
	}
}

// runStorescu sends files with storescu in one association and returns
// how long the process took, start to exit.
func runStorescu(b *testing.B, addr string, files []string) time.Duration {
	b.Helper()
	path := scptest.NeedDCMTK(b, "storescu")
	host, port, _ := net.SplitHostPort(addr)
	args := append([]string{"-aet", peerAE, "-aec", "STORESCP", "--max-pdu", strconv.Itoa(dcmtkMaxPDU), host, port}, files...)
	cmd := exec.Command(path, args...)
	cmd.Env = scptest.DCMTKEnv()
	start := time.Now()
	out, err := cmd.CombinedOutput()
	d := time.Since(start)
	if err != nil {
		b.Fatalf("storescu: %v\n%s", err, out)
	}
	return d
}

func BenchmarkDCMTKStorescuToStorescp(b *testing.B) {
	for _, maxPDU := range []int{16384, dcmtkMaxPDU} {
		b.Run("storescp-max-pdu="+strconv.Itoa(maxPDU), func(b *testing.B) {
			scptest.NeedDCMTK(b, "storescu")
			addr := startDCMTKStorescp(b, maxPDU)
			_, files, payload := benchFiles(b, benchDistinct)
			b.SetBytes(payload)
			b.ResetTimer()
			var total time.Duration
			for range b.N {
				total += runStorescu(b, addr, files)
			}
			b.StopTimer()
			reportRate(b, "", benchImages*b.N, payload*int64(b.N), total)
		})
	}
}

// BenchmarkOursVsDCMTK sends the same Part 10 files both ways in each
// iteration, interleaved so that both see the same machine load: ours is
// scp.SendFiles into our Server with a discarding handler, theirs is
// storescu into storescp --ignore at DCMTK's largest Maximum Length (its
// fastest setting; see BenchmarkDCMTKStorescuToStorescp). The ratio is
// our throughput over theirs; 1.0 or more means we are at least as fast.
func BenchmarkOursVsDCMTK(b *testing.B) {
	scptest.NeedDCMTK(b, "storescu")
	theirAddr := startDCMTKStorescp(b, dcmtkMaxPDU)
	ourAddr := discardServer(b)
	dir, files, payload := benchFiles(b, benchDistinct)
	dirs := make([]string, benchFileRepeats)
	for i := range dirs {
		dirs[i] = dir // SendFiles sends a folder given twice twice
	}
	opts := scp.SendOptions{Dialer: &scp.Dialer{CalledAETitle: serverAE}, Addr: ourAddr}
	ctx := context.Background()
	b.ResetTimer()
	var ours, theirs time.Duration
	for range b.N {
		start := time.Now()
		sum, err := scp.SendFiles(ctx, opts, dirs)
		ours += time.Since(start)
		if err != nil || sum.Sent != benchImages || sum.Failures != 0 {
			b.Fatalf("SendFiles: %+v, %v", sum, err)
		}
		theirs += runStorescu(b, theirAddr, files)
	}
	b.StopTimer()
	n := benchImages * b.N
	reportRate(b, "ours-", n, payload*int64(b.N), ours)
	reportRate(b, "dcmtk-", n, payload*int64(b.N), theirs)
	b.ReportMetric(theirs.Seconds()/ours.Seconds(), "ratio")
}
