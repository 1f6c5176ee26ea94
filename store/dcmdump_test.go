package store

import (
	"path/filepath"
	"strings"
	"testing"

	"dwiaudit/scp/part10"
	"dwiaudit/scp/scptest"
)

func TestFilesAreReadByDCMTK(t *testing.T) {
	for _, ts := range []string{explicitVRLE, implicitVRLE} {
		t.Run("DCMTK dcmdump reads a file with data set in "+ts+" without warnings", func(t *testing.T) {
			s, opts := newTestStore(t)
			ti := testInstance{SOP: uid(80, 1), InstanceNumber: 7, Payload: 4096, TransferSyntax: ts}
			ref := mustPut(t, s, ti)
			d := scptest.DCMDump(t, filepath.Join(opts.Dir, ref.Path))
			// DCMTK dcmdump output: warnings and errors go to stderr as "W:" / "E:".
			if strings.Contains(d.Stderr, "W:") || strings.Contains(d.Stderr, "E:") {
				t.Errorf("dcmdump complained:\n%s", d.Stderr)
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
				if d.Values[tag] != v {
					t.Errorf("dcmdump shows (%s) = %q, want %q\n%s", tag, d.Values[tag], v, d.Text)
				}
			}
		})
	}
}
