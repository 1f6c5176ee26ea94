package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"dwiaudit/config"
)

func TestServeWithAnInvalidConfigFileListsEveryProblemAndExitsTwo(t *testing.T) {
	path := filepath.Join(t.TempDir(), "bad.yaml")
	bad := "node:\n  ae_title: THIS_AE_TITLE_IS_TOO_LONG\n  time_zone: Mars/Olympus\nlimits:\n  max_pdu_length: 1024\n  max_assocations: 3\n"
	if err := os.WriteFile(path, []byte(bad), 0o644); err != nil {
		t.Fatal(err)
	}
	r := runCLI(t, "serve", "--config", path, "--log-level", "chatty")
	if r.code != exitUsage {
		t.Errorf("exit code %d, want %d", r.code, exitUsage)
	}
	for _, want := range []string{
		"limits.max_assocations: unknown field (line 6)",
		"node.ae_title: ",
		`node.time_zone: unknown time zone "Mars/Olympus"`,
		"limits.max_pdu_length: 1024 is below 4096",
		`--log-level: "chatty" is not a log level`,
	} {
		if !strings.Contains(r.stderr, want) {
			t.Errorf("stderr lacks %q", want)
		}
	}
}

func TestServeFlagsOverrideTheFile(t *testing.T) {
	path := filepath.Join(t.TempDir(), "node.yaml")
	if err := os.WriteFile(path, []byte("node: {ae_title: FROMFILE, data_dir: /from/file}\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	fs := newFlagSet(&cliEnv{stderr: os.Stderr}, "serve", "")
	fs.String("data", "", "")
	fs.String("ae-title", "", "")
	fs.String("log-format", "", "")
	if err := fs.Parse([]string{"--data", "/from/flag", "--log-format", "json"}); err != nil {
		t.Fatal(err)
	}
	c, err := serveConfig(path, fs)
	if err != nil {
		t.Fatal(err)
	}
	if c.Node.DataDir != "/from/flag" || c.Node.AETitle != "FROMFILE" || c.Log.Format != config.LogJSON {
		t.Errorf("node %+v, log %+v", c.Node, c.Log)
	}
}

func TestServeWithBadFlagValuesListsThemAndExitsTwo(t *testing.T) {
	r := runCLI(t, "serve", "--listen", "nowhere", "--ae-title", "", "--log-format", "xml")
	if r.code != exitUsage {
		t.Errorf("exit code %d, want %d", r.code, exitUsage)
	}
	for _, want := range []string{`node.dicom_listen: "nowhere" is not host:port`, "node.ae_title: ", `--log-format: "xml" is not a log format`} {
		if !strings.Contains(r.stderr, want) {
			t.Errorf("stderr lacks %q:\n%s", want, r.stderr)
		}
	}
}
