package scp_test

// Interoperability of the acceptor with DCMTK's requestors: echoscu for
// association negotiation and rejection, storescu for C-STORE of whole
// series. DCMTK is a DICOM implementation independent of ours, so these
// tests catch misreadings of PS3.8 and PS3.7 that our own round trips
// cannot.

import (
	"bytes"
	"fmt"
	"maps"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"sync/atomic"
	"testing"
	"time"

	"dwiaudit/scp/scptest"

	"dwiaudit/scp"
)

// fixtures is the synthetic data shared by the tests of this binary,
// written on first use and removed by TestMain. It is the one package
// variable of the tests: writing 300 images once instead of per test
// keeps the suite fast.
var fixtures fixtureCache

func TestMain(m *testing.M) {
	dir, err := os.MkdirTemp("", "scp-interop-")
	if err != nil {
		fmt.Fprintln(os.Stderr, "scp tests:", err)
		os.Exit(1)
	}
	fixtures.dir = dir
	code := m.Run()
	os.RemoveAll(dir)
	os.Exit(code)
}

// rjPDU is an A-ASSOCIATE-RJ as it must appear on the wire: type 03H, a
// reserved byte, PDU length 4, a reserved byte, then result, source and
// reason/diag. (PS3.8 9.3.4 Table 9-21; the same layout as pynetdicom's
// A_ASSOCIATE_RJ documentation quotes).
func rjPDU(result, source, reason byte) []byte {
	return []byte{0x03, 0x00, 0x00, 0x00, 0x00, 0x04, 0x00, result, source, reason}
}

// pduTypeAssociateAC is the first byte of an A-ASSOCIATE-AC (PS3.8 9.3.3
// Table 9-17, from memory).
const pduTypeAssociateAC = 0x02

func TestEchoscuNegotiatesWithServer(t *testing.T) {
	scptest.NeedDCMTK(t, "echoscu")
	tests := []struct {
		name    string
		allowed []string // Server.AllowedCallingAETitles
		args    []string // echoscu options before host and port

		wantSuccess bool
		wantOutput  []string // lines echoscu prints (-v)
		wantRJ      []byte   // the A-ASSOCIATE-RJ on the wire, nil when accepted
		wantResult  string   // AssociationSummary.Result
		wantDetail  string   // AssociationSummary.Detail
	}{
		{
			name:        "echoscu calling our AE title gets a C-ECHO answered with success",
			args:        []string{"-v", "-aec", scp.DefaultAETitle},
			wantSuccess: true,
			wantOutput: []string{
				"I: Association Accepted",             // DCMTK 3.6.7 echoscu -v output, observed
				"I: Received Echo Response (Success)", // DCMTK 3.6.7 echoscu -v output, observed
			},
			wantResult: "released",
		},
		{
			name: "a wrong called AE title is rejected permanently by the service user with reason 7",
			args: []string{"-v", "-aec", "WRONG"},
			wantOutput: []string{
				"F: Association Rejected:",                            // DCMTK 3.6.7 echoscu -v output, observed
				"F: Result: Rejected Permanent, Source: Service User", // DCMTK 3.6.7 echoscu -v output, observed
				"F: Reason: Called AE Title Not Recognized",           // DCMTK 3.6.7 echoscu -v output, observed
			},
			// PS3.8 9.3.4 Table 9-21: result 1 rejected-permanent, source
			// 1 DICOM UL service-user, reason 7 called-AE-title-not-recognized.
			wantRJ:     rjPDU(1, 1, 7),
			wantResult: "rejected",
			wantDetail: "called AE title not recognized",
		},
		{
			name:    "a calling AE title outside the allowed list is rejected with reason 3",
			allowed: []string{"MODALITY1"},
			args:    []string{"-v", "-aec", scp.DefaultAETitle, "-aet", "ECHOSCU"},
			wantOutput: []string{
				"F: Result: Rejected Permanent, Source: Service User", // DCMTK 3.6.7 echoscu -v output, observed
				"F: Reason: Calling AE Title Not Recognized",          // DCMTK 3.6.7 echoscu -v output, observed
			},
			// PS3.8 9.3.4 Table 9-21: reason 3 calling-AE-title-not-recognized.
			wantRJ:     rjPDU(1, 1, 3),
			wantResult: "rejected",
			wantDetail: "calling AE title not recognized",
		},
		{
			name:        "a calling AE title in the allowed list is accepted",
			allowed:     []string{"MODALITY1", "ECHOSCU"},
			args:        []string{"-v", "-aec", scp.DefaultAETitle, "-aet", "ECHOSCU"},
			wantSuccess: true,
			wantOutput:  []string{"I: Received Echo Response (Success)"}, // DCMTK 3.6.7 echoscu -v output, observed
			wantResult:  "released",
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			rec := newStoreRecorder()
			srv := newRecordingServer(t, rec)
			srv.AllowedCallingAETitles = tt.allowed
			host, port := serveLoopback(t, srv)
			tp := startWireTap(t, host+":"+port)

			run := runTool(t, "echoscu", append(tt.args, tp.host, tp.port)...)
			onWire := tp.upstreamBytes(t)

			// DCMTK echoscu exits 0 only when the C-ECHO succeeded (its
			// man page, EXIT CODES); 3.6.7 exits 1 after a rejection.
			if gotSuccess := run.exitCode == 0; gotSuccess != tt.wantSuccess {
				t.Errorf("echoscu exited %d, want success %v", run.exitCode, tt.wantSuccess)
			}
			for _, line := range tt.wantOutput {
				if !strings.Contains(run.output, line) {
					t.Errorf("echoscu output lacks %q", line)
				}
			}
			if tt.wantRJ != nil {
				if !bytes.Equal(onWire, tt.wantRJ) {
					t.Errorf("server sent % x, want exactly the A-ASSOCIATE-RJ % x", onWire, tt.wantRJ)
				}
			} else if len(onWire) == 0 || onWire[0] != pduTypeAssociateAC {
				t.Errorf("server's first PDU starts % .1x, want A-ASSOCIATE-AC (type 02H)", onWire)
			}

			sums := rec.waitSummaries(t, 1)
			if len(sums) != 1 {
				t.Fatalf("server recorded %d associations, want 1: %+v", len(sums), sums)
			}
			if s := sums[0]; s.Result != tt.wantResult || s.Detail != tt.wantDetail {
				t.Errorf("server recorded result %q detail %q, want %q %q", s.Result, s.Detail, tt.wantResult, tt.wantDetail)
			}
			if tt.wantSuccess && sums[0].Echoes != 1 {
				t.Errorf("server counted %d C-ECHOs, want 1", sums[0].Echoes)
			}
		})
	}
}

func TestEchoscuIsRejectedTransientWhenAssociationsAreUsedUp(t *testing.T) {
	scptest.NeedDCMTK(t, "echoscu")
	rec := newStoreRecorder()
	srv := newRecordingServer(t, rec)
	srv.MaxAssociations = 1
	host, port := serveLoopback(t, srv)
	addr := host + ":" + port

	ctx := t.Context()
	d := &scp.Dialer{CalledAETitle: scp.DefaultAETitle, CallingAETitle: "HOLDER"}
	verification := []scp.Context{{AbstractSyntax: scp.VerificationSOPClass, TransferSyntaxes: []string{scp.ImplicitVRLittleEndian}}}
	held, err := d.Dial(ctx, addr, verification)
	if err != nil {
		t.Fatalf("Dial: %v", err)
	}

	tp := startWireTap(t, addr)
	run := runTool(t, "echoscu", "-v", "-aec", scp.DefaultAETitle, tp.host, tp.port)
	if run.exitCode == 0 {
		t.Errorf("echoscu exited 0 while the only association slot was taken") // DCMTK echoscu man page, EXIT CODES
	}
	for _, line := range []string{
		"F: Result: Rejected Transient, Source: Service Provider (Presentation Related)", // DCMTK 3.6.7 echoscu -v output, observed
		"F: Reason: Local Limit Exceeded",                                                // DCMTK 3.6.7 echoscu -v output, observed
	} {
		if !strings.Contains(run.output, line) {
			t.Errorf("echoscu output lacks %q", line)
		}
	}
	// PS3.8 9.3.4 Table 9-21: result 2 rejected-transient, source 3 DICOM
	// UL service-provider (presentation related function), reason 2
	// local-limit-exceeded.
	if got, want := tp.upstreamBytes(t), rjPDU(2, 3, 2); !bytes.Equal(got, want) {
		t.Errorf("server sent % x, want exactly the A-ASSOCIATE-RJ % x", got, want)
	}
	sums := rec.waitSummaries(t, 1)
	if s := sums[0]; s.Result != "rejected" || s.Detail != "local limit exceeded" || s.CallingAE != "ECHOSCU" {
		t.Errorf("server recorded %+v, want echoscu's association rejected for local limit exceeded", s)
	}

	// The held association is unharmed, and releasing it frees the slot.
	if err := held.Echo(ctx); err != nil {
		t.Errorf("C-ECHO on the held association: %v", err)
	}
	if err := held.Release(ctx); err != nil {
		t.Fatalf("Release: %v", err)
	}
	rec.waitSummaries(t, 2)
	pollUntil(t, "the association slot is free", func() bool { return srv.ActiveAssociations() == 0 })
	if run := runTool(t, "echoscu", "-aec", scp.DefaultAETitle, host, port); run.exitCode != 0 {
		t.Errorf("echoscu after the slot was freed exited %d:\n%s", run.exitCode, run.output)
	}
}

// pollUntil polls cond until it holds or summaryWaitTimeout passes.
func pollUntil(t testing.TB, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(summaryWaitTimeout)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatalf("timed out after %v waiting until %s", summaryWaitTimeout, what)
		}
		time.Sleep(interopPollInterval)
	}
}

// wantInstance is what the server must have received for one SOP instance.
type wantInstance struct {
	path    string
	ts      string // transfer syntax of the presentation context
	dataSet []byte
}

// expectAsStored expects every file under dirs to arrive exactly as its
// data set is stored, in its own transfer syntax.
func expectAsStored(t testing.TB, dirs ...string) map[string]wantInstance {
	t.Helper()
	want := map[string]wantInstance{}
	for _, dir := range dirs {
		for uid, f := range readSent(t, dir) {
			want[uid] = wantInstance{path: f.path, ts: f.meta.TransferSyntaxUID, dataSet: f.dataSet}
		}
	}
	return want
}

// checkReceived compares what rec holds with want, byte for byte.
func checkReceived(t testing.TB, rec *storeRecorder, want map[string]wantInstance) {
	t.Helper()
	rec.mu.Lock()
	defer rec.mu.Unlock()
	if len(rec.dups) > 0 {
		t.Errorf("%d SOP instances were received more than once, e.g. %s", len(rec.dups), rec.dups[0])
	}
	if len(rec.data) != len(want) {
		t.Errorf("received %d SOP instances, want %d", len(rec.data), len(want))
	}
	bad := 0
	for _, uid := range slices.Sorted(maps.Keys(want)) {
		w := want[uid]
		got, ok := rec.data[uid]
		switch {
		case !ok:
			t.Errorf("%s (SOP instance %s) was not received", w.path, uid)
		case rec.syntaxes[uid] != w.ts:
			t.Errorf("%s arrived in transfer syntax %s, want %s", w.path, rec.syntaxes[uid], w.ts)
		case !bytes.Equal(got, w.dataSet):
			t.Errorf("%s arrived altered: %s", w.path, describeDifference(got, w.dataSet))
		default:
			continue
		}
		if bad++; bad == 10 {
			t.Fatal("giving up after 10 bad instances")
		}
	}
}

// totalBytes is the size of all expected data sets.
func totalBytes(want map[string]wantInstance) int64 {
	var n int64
	for _, w := range want {
		n += int64(len(w.dataSet))
	}
	return n
}

// TestStorescuSendsFolderInOneAssociation compares each received data set
// with the file's. storescu sends the data set it parsed, re-encoded by
// DCMTK, not the file's bytes; the synthetic files are encoded the way
// DCMTK encodes (explicit lengths, no group lengths, elements in order),
// so in the file's own transfer syntax the bytes must be the same.
func TestStorescuSendsFolderInOneAssociation(t *testing.T) {
	scptest.NeedDCMTK(t, "storescu")
	fx := fixtures.get(t)
	explicitSample := fixtureSample(t, fx.series[0], explicitSampleSize)
	tests := []struct {
		name   string
		args   []string // storescu options besides the AE title and +sd +r
		inputs []string
		want   func(t *testing.T) map[string]wantInstance
	}{
		{
			name:   "300 images in 4 KiB PDUs both ways arrive byte for byte",
			args:   []string{"--max-pdu", "4096", "--max-send-pdu", "4096"}, // DCMTK storescu --help: 4096..131072
			inputs: []string{fx.root},
			want:   func(t *testing.T) map[string]wantInstance { return expectAsStored(t, fx.root) },
		},
		{
			name:   "300 images in 128 KiB PDUs arrive byte for byte",
			args:   []string{"--max-pdu", "131072"},
			inputs: []string{fx.root},
			want:   func(t *testing.T) map[string]wantInstance { return expectAsStored(t, fx.root) },
		},
		{
			// storescu -xi proposes Implicit VR Little Endian only (DCMTK
			// storescu --help). Implicit VR files go out unchanged;
			// explicit VR files are converted by storescu, which DCMTK
			// does for uncompressed syntaxes, so those are compared with
			// what DCMTK's dcmconv +ti makes of the same file. A few
			// explicit files suffice: dcmconv takes one file per run.
			name:   "proposing implicit VR only sends implicit files unchanged and converts explicit ones as dcmconv does",
			args:   []string{"-xi"},
			inputs: append([]string{fx.implicitRoot}, explicitSample...),
			want: func(t *testing.T) map[string]wantInstance {
				want := expectAsStored(t, fx.implicitRoot)
				converted := convertedDataSets(t, explicitSample)
				for _, path := range explicitSample {
					f, err := readPart10(path)
					if err != nil {
						t.Fatal(err)
					}
					want[f.meta.MediaStorageSOPInstanceUID] = wantInstance{path: path, ts: scp.ImplicitVRLittleEndian, dataSet: converted[path]}
				}
				return want
			},
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			want := tt.want(t)
			rec := newStoreRecorder()
			host, port := serveLoopback(t, newRecordingServer(t, rec))

			// +sd scans the folders, +r recurses into them (DCMTK storescu
			// --help); one storescu run is one association.
			args := append([]string{"-aec", scp.DefaultAETitle, "+sd", "+r"}, tt.args...)
			args = append(append(args, host, port), tt.inputs...)
			run := runTool(t, "storescu", args...)
			if run.exitCode != 0 {
				t.Fatalf("storescu exited %d", run.exitCode) // DCMTK storescu exits 0 when every C-STORE succeeded (observed with 3.6.7)
			}

			sums := rec.waitSummaries(t, 1)
			if len(sums) != 1 {
				t.Fatalf("server recorded %d associations, want 1: %+v", len(sums), sums)
			}
			s := sums[0]
			if s.Result != "released" || s.Instances != len(want) || s.Failures != 0 {
				t.Errorf("association ended %q with %d instances and %d failures, want released with %d and 0", s.Result, s.Instances, s.Failures, len(want))
			}
			if s.Bytes != totalBytes(want) {
				t.Errorf("server counted %d data-set bytes, want %d", s.Bytes, totalBytes(want))
			}
			checkReceived(t, rec, want)
		})
	}
}

// explicitSampleSize is how many explicit VR files the implicit-only
// case sends along with the implicit VR series.
const explicitSampleSize = 10

// fixtureSample returns the paths of the first n files in dir.
func fixtureSample(t testing.TB, dir string, n int) []string {
	t.Helper()
	entries, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	if len(entries) < n {
		t.Fatalf("%s holds %d files, want at least %d", dir, len(entries), n)
	}
	var paths []string
	for _, e := range entries[:n] {
		paths = append(paths, filepath.Join(dir, e.Name()))
	}
	return paths
}

// concurrentSenders is the number of storescu processes sending at once.
const concurrentSenders = 4

func TestFourStorescuProcessesAtOnce(t *testing.T) {
	scptest.NeedDCMTK(t, "storescu")
	fx := fixtures.get(t)
	if len(fx.series) != concurrentSenders {
		t.Fatalf("fixtures hold %d series, want one per sender (%d)", len(fx.series), concurrentSenders)
	}
	want := expectAsStored(t, fx.root)

	rec := newStoreRecorder()
	srv := newRecordingServer(t, rec)
	// Hold the first C-STORE of each association until all four
	// associations are established, so the senders overlap for certain
	// instead of by luck of scheduling.
	var allUp atomic.Bool
	rec.before = func() {
		deadline := time.Now().Add(summaryWaitTimeout)
		for !allUp.Load() && time.Now().Before(deadline) {
			if srv.ActiveAssociations() == concurrentSenders {
				allUp.Store(true)
				return
			}
			time.Sleep(time.Millisecond)
		}
	}
	host, port := serveLoopback(t, srv)

	procs := make([]*toolProc, concurrentSenders)
	for i, dir := range fx.series {
		procs[i] = startTool(t, "storescu", "-aec", scp.DefaultAETitle, "-aet", fmt.Sprintf("SENDER%d", i+1), "+sd", "+r", host, port, dir)
	}
	for i, p := range procs {
		if run := p.wait(t); run.exitCode != 0 {
			t.Errorf("storescu %d exited %d", i+1, run.exitCode) // DCMTK storescu exits 0 when every C-STORE succeeded (observed with 3.6.7)
		}
	}
	if !allUp.Load() {
		t.Errorf("the %d associations were never established at the same time", concurrentSenders)
	}

	sums := rec.waitSummaries(t, concurrentSenders)
	callers := map[string]bool{}
	for _, s := range sums {
		callers[s.CallingAE] = true
		if s.Result != "released" || s.Instances != fixtureSlices || s.Failures != 0 {
			t.Errorf("association from %s ended %q with %d instances and %d failures, want released with %d and 0", s.CallingAE, s.Result, s.Instances, s.Failures, fixtureSlices)
		}
	}
	if len(sums) != concurrentSenders || len(callers) != concurrentSenders {
		t.Errorf("server recorded %d associations from %d callers, want %d from %d", len(sums), len(callers), concurrentSenders, concurrentSenders)
	}
	checkReceived(t, rec, want)
}
