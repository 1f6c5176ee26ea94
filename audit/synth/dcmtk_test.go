package synth

import (
	"bytes"
	"os/exec"
	"regexp"
	"strings"
	"testing"

	"dwiaudit/scp/scptest"
)

// dcmDump is what DCMTK's dcmdump printed for one file.
type dcmDump struct {
	values map[string]string // "0028,0010" -> value, brackets removed
	stderr string            // DCMTK's warnings ("W: ") and errors ("E: ")
	text   string
}

// dumpLine matches one element line of dcmdump output, for example
// `(0028,0010) US 256                                      #   2, 1 Rows`.
var dumpLine = regexp.MustCompile(`^\s*\(([0-9a-fA-F]{4}),([0-9a-fA-F]{4})\) ([A-Z][A-Z]) (.*?)\s+#\s*\d+,`)

// runDCMDump runs `dcmdump -Un` (UIDs as numbers) on path; a non-zero exit
// fails the test.
func runDCMDump(t testing.TB, path string) dcmDump {
	t.Helper()
	tool := scptest.NeedDCMTK(t, "dcmdump")
	var stdout, stderr bytes.Buffer
	cmd := exec.Command(tool, "-Un", path)
	cmd.Stdout, cmd.Stderr = &stdout, &stderr
	if err := cmd.Run(); err != nil {
		t.Fatalf("dcmdump %s: %v\n%s", path, err, stderr.String())
	}
	d := dcmDump{values: map[string]string{}, stderr: stderr.String(), text: stdout.String()}
	for _, line := range strings.Split(stdout.String(), "\n") {
		m := dumpLine.FindStringSubmatch(line)
		if m == nil {
			continue
		}
		v := m[4]
		if strings.HasPrefix(v, "[") && strings.HasSuffix(v, "]") {
			v = v[1 : len(v)-1]
		}
		d.values[strings.ToUpper(m[1]+","+m[2])] = v
	}
	return d
}
