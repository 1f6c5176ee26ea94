package main

// The crash test: `dwiaudit serve` receives from several associations at
// once while the test kills it with SIGKILL at random moments, round
// after round on the same data folder. A node that answered success must
// have the instance, byte for byte, whatever moment the kill came.

import (
	"bytes"
	"context"
	"fmt"
	"math/rand/v2"
	"os"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"dwiaudit/audit/web"
	"dwiaudit/scp"
	"dwiaudit/scp/dimse"
)

// Shape of the crash test. Twelve rounds of up to 600 ms of sending keep
// it around ten seconds here.
const (
	crashRounds  = 12
	crashWorkers = 4 // parallel associations, as a scanner and a PACS route at once
	// crashMinKill and crashMaxKill bound the moment of the kill after
	// the senders start: from inside the first C-STOREs to well into a
	// steady stream.
	crashMinKill = 20 * time.Millisecond
	crashMaxKill = 600 * time.Millisecond
	// crashStoreTimeout bounds one C-STORE: a killed node closes the
	// socket at once, so this only catches a hang.
	crashStoreTimeout = 30 * time.Second
	// crashSeedEnv replays a run: the seed is logged.
	crashSeedEnv = "DWIAUDIT_CRASH_SEED"
)

// crashInstance is the i-th instance a worker sends in a round. Sizes
// vary from 2 KiB to 128 KiB of pixels so that kills land inside
// fragments, between them, and around commits.
func crashInstance(round, worker, i int) testInstance {
	side := 32 * (1 + (i*5+worker)%8)
	return testInstance{
		Study:   fmt.Sprintf("2.25.9%03d", round+1),
		Series:  fmt.Sprintf("2.25.9%03d.%d", round+1, worker+1),
		SOP:     fmt.Sprintf("2.25.9%03d.%d.%d", round+1, worker+1, i+1),
		Number:  i + 1,
		Rows:    side,
		Columns: side,
		Seed:    uint64(round<<32 | worker<<20 | i),
	}
}

// crashOutcome is what the senders saw in one round.
type crashOutcome struct {
	mu       sync.Mutex
	acked    []testInstance       // answered success
	statuses map[dimse.Status]int // other statuses answered
	noAnswer int                  // C-STOREs cut off by the kill
	noDial   int                  // associations that did not open
}

func TestCrashKeepsEveryAcknowledgedInstance(t *testing.T) {
	seed := uint64(time.Now().UnixNano())
	if s := os.Getenv(crashSeedEnv); s != "" {
		v, err := strconv.ParseUint(s, 10, 64)
		if err != nil {
			t.Fatalf("%s=%q: %v", crashSeedEnv, s, err)
		}
		seed = v
	}
	t.Logf("seed %d (replay with %s=%d)", seed, crashSeedEnv, seed)
	rnd := rand.New(rand.NewPCG(seed, 0x4b494c4c)) // "KILL"

	dir := t.TempDir()
	var acked []testInstance
	start := time.Now()
	for round := range crashRounds {
		n := startNode(t, dir)
		n.waitForLog(`msg="data folder open"`, time.Second)
		reconciled := logLine(n.stderr.String(), `msg="data folder open"`)
		killAfter := crashMinKill + time.Duration(rnd.Int64N(int64(crashMaxKill-crashMinKill)))
		out := &crashOutcome{statuses: map[dimse.Status]int{}}
		var senders sync.WaitGroup
		for w := range crashWorkers {
			senders.Go(func() { crashSend(n.dicomAddr, round, w, out) })
		}
		time.Sleep(killAfter)
		n.kill()
		senders.Wait()
		acked = append(acked, out.acked...)
		t.Logf("round %2d: killed after %3d ms: %3d acknowledged, %d cut off, %d refused %v, %d associations not opened; at start: %s",
			round+1, killAfter.Milliseconds(), len(out.acked), out.noAnswer, sum(out.statuses), out.statuses, out.noDial, reconciled)
	}

	// A last, clean run: the restart reconciles what the last kill left,
	// and the API must list every acknowledged instance.
	n := startNode(t, dir)
	n.waitForLog(`msg="data folder open"`, time.Second)
	t.Logf("final start: %s", logLine(n.stderr.String(), `msg="data folder open"`))
	var api web.StudiesResponse
	getJSON(t, n.httpURL+"/api/v1/studies", &api)
	listed := map[string]int{}
	for _, st := range api.Studies {
		for _, se := range st.Series {
			listed[se.SeriesInstanceUID] = se.Instances
		}
	}
	wantAtLeast := map[string]int{}
	for _, in := range acked {
		wantAtLeast[in.Series]++
	}
	for series, n := range wantAtLeast {
		if listed[series] < n {
			t.Errorf("series %s: the API lists %d instances, %d were acknowledged", series, listed[series], n)
		}
	}
	if code := n.stop(); code != exitOK {
		t.Errorf("final run exited %d after SIGTERM", code)
	}
	if left := tempFiles(t, dir); len(left) != 0 {
		t.Errorf("temp files left after a clean restart and stop: %v", left)
	}

	st := openStoreReadOnly(t, dir) // the index opens without error
	bad := 0
	for _, in := range acked {
		got, err := st.Instance(in.SOP)
		if err != nil {
			t.Errorf("acknowledged instance %s is not indexed: %v", in.SOP, err)
			bad++
		} else if got.SeriesInstanceUID != in.Series || got.StudyInstanceUID != in.Study || got.Missing {
			t.Errorf("acknowledged instance %s indexed as %+v", in.SOP, got)
			bad++
		} else if !bytes.Equal(storedDataSet(t, st, in.SOP), in.bytes()) {
			t.Errorf("acknowledged instance %s is stored altered", in.SOP)
			bad++
		}
		if bad == 10 {
			t.Fatal("giving up after 10 bad instances")
		}
	}
	t.Logf("%d rounds in %v: %d instances acknowledged, all present, byte-identical and indexed; %d files in the data folder",
		crashRounds, time.Since(start).Round(time.Millisecond), len(acked), instanceFiles(t, dir))
}

// crashSend sends instances on one association until the node dies.
func crashSend(addr string, round, worker int, out *crashOutcome) {
	ctx := context.Background()
	a, err := dialNode(ctx, addr, fmt.Sprintf("QOH_MR%d", worker+1))
	if err != nil {
		out.mu.Lock()
		out.noDial++
		out.mu.Unlock()
		return
	}
	defer a.Abort()
	for i := 0; ; i++ {
		in := crashInstance(round, worker, i)
		sctx, cancel := context.WithTimeout(ctx, crashStoreTimeout)
		rsp, err := a.Store(sctx, in.sopClass(), in.SOP, scp.ExplicitVRLittleEndian, in.reader())
		cancel()
		out.mu.Lock()
		switch {
		case err != nil:
			out.noAnswer++
		case rsp.Status == dimse.StatusSuccess:
			out.acked = append(out.acked, in)
		default:
			out.statuses[rsp.Status]++
		}
		out.mu.Unlock()
		if err != nil {
			return
		}
	}
}

func sum(m map[dimse.Status]int) int {
	n := 0
	for _, v := range m {
		n += v
	}
	return n
}

// logLine returns the key=value part of the first log line holding s.
func logLine(log, s string) string {
	for _, line := range strings.Split(log, "\n") {
		if strings.Contains(line, s) {
			_, rest, _ := strings.Cut(line, s)
			return strings.TrimSpace(strings.ReplaceAll(rest, "component=store ", ""))
		}
	}
	return "(no line)"
}
