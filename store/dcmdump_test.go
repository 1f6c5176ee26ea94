package store

import (
	"bytes"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"dwiaudit/internal/testtool"
	"dwiaudit/scp/part10"
)

// dumpLine matches one element line of dcmdump output, for example
// `(0002,0010) UI =LittleEndianExplicit  #  20, 1 TransferSyntaxUID` or,
// with -Un, `(0002,0010) UI [1.2.840.10008.1.2.1]  #  20, 1 TransferSyntaxUID`
// (DCMTK dcmdump output).
var dumpLine = regexp.MustCompile(`^\s*\(([0-9a-fA-F]{4}),([0-9a-fA-F]{4})\) ([A-Z][A-Z]) (.*?)\s+#\s*\d+,`)

func TestFilesAreReadByDCMTK(t *testing.T) {
	tool := testtool.Path(t, "dcmdump", "dcmtk")
	for _, ts := range []string{explicitVRLE, implicitVRLE} {
		t.Run("DCMTK dcmdump reads a file with data set in "+ts+" without warnings", func(t *testing.T) {
			s, opts := newTestStore(t)
			ti := testInstance{SOP: uid(80, 1), InstanceNumber: 7, Payload: 4096, TransferSyntax: ts}
			ref := mustPut(t, s, ti)
			var stdout, stderr bytes.Buffer
			cmd := exec.Command(tool, "-Un", filepath.Join(opts.Dir, ref.Path))
			cmd.Stdout, cmd.Stderr = &stdout, &stderr
			if err := cmd.Run(); err != nil {
				t.Fatalf("dcmdump: %v\n%s%s", err, stdout.String(), stderr.String())
			}
			// DCMTK dcmdump output: warnings and errors go to stderr as "W:" / "E:".
			if strings.Contains(stderr.String(), "W:") || strings.Contains(stderr.String(), "E:") {
				t.Errorf("dcmdump complained:\n%s", stderr.String())
			}
			values := map[string]string{}
			for _, line := range strings.Split(stdout.String(), "\n") {
				if m := dumpLine.FindStringSubmatch(line); m != nil {
					values[strings.ToUpper(m[1]+","+m[2])] = strings.Trim(m[4], "[]")
				}
			}
			want := map[string]string{
				"0002,0001": `00\01`,        // PS3.10 7.1 Table 7.1-1: version 00H 01H (DCMTK dcmdump output)
				"0002,0002": mrImageStorage, // Media Storage SOP Class UID
				"0002,0003": ti.SOP,         // Media Storage SOP Instance UID
				"0002,0010": ts,             // Transfer Syntax UID
				"0002,0012": part10.ImplementationClassUID,
				"0002,0013": part10.ImplementationVersionName,
				"0002,0016": "OSTMIRE_MR1",  // Source Application Entity Title
				"0010,0010": "TEST^PHANTOM", // from the data set, read in its transfer syntax
				"0020,0013": "7",            // Instance Number
			}
			for tag, v := range want {
				if values[tag] != v {
					t.Errorf("dcmdump shows (%s) = %q, want %q\n%s", tag, values[tag], v, stdout.String())
				}
			}
		})
	}
}
