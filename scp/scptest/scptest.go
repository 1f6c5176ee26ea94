// Package scptest holds helpers for tests that drive real DICOM peers
// (DCMTK's echoscu, storescu, storescp, dcmdump, dump2dcm), in the way
// net/http/httptest serves tests of net/http. It is imported by tests
// only.
package scptest

import (
	"bytes"
	"os"
	"os/exec"
	"regexp"
	"strings"
	"testing"

	"dwiaudit/internal/testtool"
)

// NeedDCMTK returns the path of a DCMTK program (Debian package dcmtk),
// through testtool.Path: missing, it fails the test under CI=true and
// skips it elsewhere.
func NeedDCMTK(t testing.TB, name string) string {
	t.Helper()
	return testtool.Path(t, name, "dcmtk")
}

// DCMTKEnv is the environment for a DCMTK process. Debian's DCMTK leaves
// Nagle's algorithm on unless TCP_NODELAY=1 is set, and then every image
// waits about 40 ms for a delayed ACK (observed here; DCMTK's
// documentation of the TCP_NODELAY environment variable).
func DCMTKEnv() []string {
	return append(os.Environ(), "TCP_NODELAY=1")
}

// Dump is what DCMTK's dcmdump printed for one file.
type Dump struct {
	Values map[string]string // "0002,0010" -> value, brackets removed
	Stderr string            // DCMTK's warnings ("W: ") and errors ("E: ")
	Text   string            // the whole dump
}

// dumpLine matches one element line of dcmdump output, for example
// `(0002,0010) UI [1.2.840.10008.1.2.1]   #  20, 1 TransferSyntaxUID`
// (DCMTK dcmdump output).
var dumpLine = regexp.MustCompile(`^\s*\(([0-9a-fA-F]{4}),([0-9a-fA-F]{4})\) ([A-Z][A-Z]) (.*?)\s+#\s*\d+,`)

// DCMDump runs `dcmdump -Un` (UIDs as numbers, not names) on path and
// fails the test if dcmdump exits non-zero. Values holds every element
// line, nested ones included, by "gggg,eeee".
func DCMDump(t testing.TB, path string) Dump {
	t.Helper()
	tool := NeedDCMTK(t, "dcmdump")
	var stdout, stderr bytes.Buffer
	cmd := exec.Command(tool, "-Un", path)
	cmd.Stdout, cmd.Stderr = &stdout, &stderr
	if err := cmd.Run(); err != nil {
		t.Fatalf("dcmdump %s: %v\n%s%s", path, err, stdout.String(), stderr.String())
	}
	d := Dump{Values: map[string]string{}, Stderr: stderr.String(), Text: stdout.String()}
	for _, line := range strings.Split(stdout.String(), "\n") {
		m := dumpLine.FindStringSubmatch(line)
		if m == nil {
			continue
		}
		v := m[4]
		if strings.HasPrefix(v, "[") && strings.HasSuffix(v, "]") {
			v = v[1 : len(v)-1]
		}
		d.Values[strings.ToUpper(m[1]+","+m[2])] = v
	}
	return d
}
