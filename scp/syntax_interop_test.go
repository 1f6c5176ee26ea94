package scp_test

import (
	"bytes"
	"os"
	"path/filepath"
	"testing"

	"dwiaudit/audit/phantom"
	"dwiaudit/scp"
	"dwiaudit/scp/scptest"
)

// TestStorescuProposingSeveralSyntaxesGetsOneTheAuditDecodes has DCMTK's
// storescu propose several transfer syntaxes in one presentation context
// (a -xf configuration file, or +C; DCMTK storescu --help) and checks the
// syntax the server accepted, as storescu used it for the C-STORE.
func TestStorescuProposingSeveralSyntaxesGetsOneTheAuditDecodes(t *testing.T) {
	scptest.NeedDCMTK(t, "storescu")
	dir := t.TempDir()
	st, err := phantom.Write(filepath.Join(dir, "study"), phantom.Options{Matrix: 32, Slices: 1, Seed: 9})
	if err != nil {
		t.Fatal(err)
	}
	native := st.Files[0]
	jls := filepath.Join(dir, "jls.dcm")
	if run := runTool(t, "dcmcjpls", "+el", native, jls); run.exitCode != 0 {
		t.Fatalf("dcmcjpls exited %d", run.exitCode)
	}
	// A file labelled JPEG 2000 Lossless (1.2.840.10008.1.2.4.90): the
	// JPEG-LS file with its meta's Transfer Syntax UID replaced, same
	// length. No DCMTK tool writes JPEG 2000; the acceptor and storescu
	// never look inside the pixel data, which is all this file needs.
	raw, err := os.ReadFile(jls)
	if err != nil {
		t.Fatal(err)
	}
	j2k := filepath.Join(dir, "j2k.dcm")
	if bytes.Count(raw, []byte("1.2.840.10008.1.2.4.80")) != 1 {
		t.Fatal("JPEG-LS Transfer Syntax UID not found once in the file")
	}
	if err := os.WriteFile(j2k, bytes.Replace(raw, []byte("1.2.840.10008.1.2.4.80"), []byte("1.2.840.10008.1.2.4.90"), 1), 0o644); err != nil {
		t.Fatal(err)
	}
	// DCMTK's storescu configuration format (/etc/dcmtk/storescu.cfg):
	// transfer syntax lists, then presentation contexts naming them.
	cfg := filepath.Join(dir, "storescu.cfg")
	if err := os.WriteFile(cfg, []byte(`[[TransferSyntaxes]]
[J2KFirst]
TransferSyntax1 = 1.2.840.10008.1.2.4.90
TransferSyntax2 = 1.2.840.10008.1.2.4.91
TransferSyntax3 = 1.2.840.10008.1.2.4.80
TransferSyntax4 = 1.2.840.10008.1.2.5
[J2KOnly]
TransferSyntax1 = 1.2.840.10008.1.2.4.90
[[PresentationContexts]]
[MixedContexts]
PresentationContext1 = MRImageStorage\J2KFirst
[J2KContexts]
PresentationContext1 = MRImageStorage\J2KOnly
[[Profiles]]
[Mixed]
PresentationContexts = MixedContexts
[J2K]
PresentationContexts = J2KContexts
`), 0o644); err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		name string
		args []string
		file string
		want string
	}{
		{"JPEG-LS is accepted when JPEG 2000 is proposed before it", []string{"-xf", cfg, "Mixed"}, jls, "1.2.840.10008.1.2.4.80"},
		{"Explicit VR Little Endian is accepted when proposed with JPEG 2000 in one context", []string{"-xv", "+C"}, native, scp.ExplicitVRLittleEndian},
		{"JPEG 2000 proposed alone is accepted and the instance stored", []string{"-xf", cfg, "J2K"}, j2k, "1.2.840.10008.1.2.4.90"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			f, err := readPart10(tc.file)
			if err != nil {
				t.Fatal(err)
			}
			rec := newStoreRecorder()
			host, port := serveLoopback(t, newRecordingServer(t, rec))
			args := append(append([]string{"-aec", scp.DefaultAETitle}, tc.args...), host, port, tc.file)
			if run := runTool(t, "storescu", args...); run.exitCode != 0 {
				t.Fatalf("storescu exited %d:\n%s", run.exitCode, run.output) // DCMTK storescu exits 0 when every C-STORE succeeded
			}
			rec.waitSummaries(t, 1)
			rec.mu.Lock()
			got, ok := rec.syntaxes[f.meta.MediaStorageSOPInstanceUID]
			rec.mu.Unlock()
			if !ok {
				t.Fatalf("the instance was not stored")
			}
			if got != tc.want {
				t.Errorf("stored in %s, want %s", got, tc.want)
			}
		})
	}
}
