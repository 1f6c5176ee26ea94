package dimse

import (
	"bytes"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"dwiaudit/scp/scptest"
)

// dcmtkCases are command sets cross-checked against DCMTK. lines are in
// dcmdump's notation ("(gggg,eeee) VR value"), which is also what
// dump2dcm reads, so one list serves both directions.
func dcmtkCases() []struct {
	name  string
	cmd   *Command
	lines []string
} {
	moveSub := NewCStoreRQ(7, mrImageStorage, testInstance, PriorityHigh)
	moveSub.MoveOriginatorAETitle = "OSTMIRE_QR1"
	moveSub.MoveOriginatorMessageID = 3
	store := NewCStoreRQ(7, mrImageStorage, testInstance, PriorityMedium)
	failed := store.Response(StatusCannotUnderstand, "b-value missing on frame 3")
	failed.OffendingElements = []uint32{0x00189087}
	return []struct {
		name  string
		cmd   *Command
		lines []string
	}{
		{"a C-ECHO-RQ", NewCEchoRQ(1), []string{
			"(0000,0000) UL 56",
			"(0000,0002) UI [1.2.840.10008.1.1]",
			"(0000,0100) US 48",
			"(0000,0110) US 1",
			"(0000,0800) US 257",
		}},
		{"a C-ECHO-RSP", NewCEchoRQ(1).Response(StatusSuccess, ""), []string{
			"(0000,0000) UL 66",
			"(0000,0002) UI [1.2.840.10008.1.1]",
			"(0000,0100) US 32816",
			"(0000,0120) US 1",
			"(0000,0800) US 257",
			"(0000,0900) US 0",
		}},
		{"a C-STORE-RQ from a C-MOVE", moveSub, []string{
			"(0000,0000) UL 148",
			"(0000,0002) UI [" + mrImageStorage + "]",
			"(0000,0100) US 1",
			"(0000,0110) US 7",
			"(0000,0700) US 1",
			"(0000,0800) US 1",
			"(0000,1000) UI [" + testInstance + "]",
			"(0000,1030) AE [OSTMIRE_QR1]",
			"(0000,1031) US 3",
		}},
		{"a C-STORE-RSP with status, offending element and comment", failed, []string{
			"(0000,0000) UL 164",
			"(0000,0002) UI [" + mrImageStorage + "]",
			"(0000,0100) US 32769",
			"(0000,0120) US 7",
			"(0000,0800) US 257",
			"(0000,0900) US 49152",
			"(0000,0901) AT (0018,9087)",
			"(0000,0902) LO [b-value missing on frame 3]",
			"(0000,1000) UI [" + testInstance + "]",
		}},
	}
}

func TestDCMTKDumpReadsOurCommandSets(t *testing.T) {
	dcmdump := scptest.NeedDCMTK(t, "dcmdump")
	// One element line of dcmdump's output, e.g.
	// "(0000,0002) UI [1.2.3]     #   6, 1 AffectedSOPClassUID".
	dumpLine := regexp.MustCompile(`^(\([0-9a-f]{4},[0-9a-f]{4}\) [A-Z]{2} .*?)\s+#\s*(\d+), \d+ \S+$`)
	for _, tt := range dcmtkCases() {
		t.Run("dcmdump reads "+tt.name+" as we meant it", func(t *testing.T) {
			t.Parallel()
			file := filepath.Join(t.TempDir(), "command.raw")
			b := mustEncode(tt.cmd)
			if err := os.WriteFile(file, b, 0o600); err != nil {
				t.Fatal(err)
			}
			// -f: a bare data set, no file meta; -ti: Implicit VR Little
			// Endian (PS3.7 6.3.1); -Un: UIDs as numbers; +L: whole values.
			cmd := exec.Command(dcmdump, "-f", "-ti", "-Un", "+L", file)
			var stdout, stderr bytes.Buffer
			cmd.Stdout, cmd.Stderr = &stdout, &stderr
			if err := cmd.Run(); err != nil {
				t.Fatalf("dcmdump: %v\n%s", err, stderr.String())
			}
			if stderr.Len() != 0 {
				t.Errorf("dcmdump warned: %s", stderr.String()) // DCMTK dcmdump output: no parser warnings
			}
			var got []string
			total := 0
			for line := range strings.Lines(stdout.String()) {
				m := dumpLine.FindStringSubmatch(strings.TrimSpace(line))
				if m == nil {
					continue // "# Dicom-Data-Set" header lines
				}
				got = append(got, m[1])
				if !strings.HasPrefix(m[1], "(0000,0000)") {
					n, _ := strconv.Atoi(m[2])
					total += 8 + n
				}
			}
			if strings.Join(got, "\n") != strings.Join(tt.lines, "\n") {
				t.Errorf("DCMTK dcmdump output\n got:\n%s\nwant:\n%s", strings.Join(got, "\n"), strings.Join(tt.lines, "\n")) // DCMTK dcmdump output
			}
			if want := "(0000,0000) UL " + strconv.Itoa(total); len(got) == 0 || got[0] != want {
				t.Errorf("group length line %q, but dcmdump's element lengths add up to %d", got, total) // DCMTK dcmdump output: element lengths
			}
		})
	}
}

func TestDCMTKWritesTheSameBytes(t *testing.T) {
	dump2dcm := scptest.NeedDCMTK(t, "dump2dcm")
	for _, tt := range dcmtkCases() {
		t.Run("dump2dcm encodes "+tt.name+" byte for byte as we do", func(t *testing.T) {
			t.Parallel()
			dir := t.TempDir()
			in, out := filepath.Join(dir, "command.txt"), filepath.Join(dir, "command.raw")
			if err := os.WriteFile(in, []byte(strings.Join(tt.lines, "\n")+"\n"), 0o600); err != nil {
				t.Fatal(err)
			}
			// -F: bare data set; +ti: Implicit VR Little Endian; +g: DCMTK
			// computes the group length itself.
			if msg, err := exec.Command(dump2dcm, "-F", "+ti", "+g", in, out).CombinedOutput(); err != nil {
				t.Fatalf("dump2dcm: %v\n%s", err, msg)
			}
			want, err := os.ReadFile(out)
			if err != nil {
				t.Fatal(err)
			}
			if got := mustEncode(tt.cmd); !bytes.Equal(got, want) {
				t.Errorf("DCMTK dump2dcm wrote\n% X\nwe wrote\n% X", want, got) // DCMTK dump2dcm output
			}
		})
	}
}
