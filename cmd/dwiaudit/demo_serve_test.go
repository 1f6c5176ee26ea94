package main

import (
	"context"
	"io"
	"net/http"
	"regexp"
	"strings"
	"testing"
	"time"
)

// demoOverviewLine is the demo's line giving the node's web address.
var demoOverviewLine = regexp.MustCompile(`(?m)^\s+overview\s+(http://\S+)/$`)

// TestDemoKeepsServingItsPagesUntilStopped runs the demo without --exit:
// once it has printed its summary, the node it started must answer the
// pages the demo points at (the list, the drifting scanner's trends, the
// metrics), and a stop (Ctrl-C: the context ending) must end it cleanly.
func TestDemoKeepsServingItsPagesUntilStopped(t *testing.T) {
	if testing.Short() {
		t.Skip("-short: the demo scenario takes about 20 s")
	}
	ctx, stop := context.WithCancel(t.Context())
	defer stop()
	var stdout, stderr syncBuffer
	env := &cliEnv{stdout: &stdout, stderr: &stderr}
	done := make(chan int, 1)
	go func() { done <- run(ctx, env, []string{"demo", "--data", t.TempDir()}) }()

	deadline := time.Now().Add(2 * time.Minute)
	for !strings.Contains(stdout.String(), "the node keeps serving") {
		select {
		case code := <-done:
			t.Fatalf("demo exited %d before serving\nstdout:\n%s\nstderr:\n%s", code, stdout.String(), stderr.String())
		case <-time.After(100 * time.Millisecond):
		}
		if time.Now().After(deadline) {
			t.Fatalf("demo not serving after 2 minutes\nstdout:\n%s", stdout.String())
		}
	}
	m := demoOverviewLine.FindStringSubmatch(stdout.String())
	if m == nil {
		t.Fatalf("no overview URL in the output:\n%s", stdout.String())
	}
	base := m[1]
	pages := []struct{ path, want string }{
		{"/", "b0-only-hotspot"},
		{"/", "it does not diagnose"},
		{"/scanners/qoh-mr1-1.5t", "<svg"},
		{"/metrics", `dwiaudit_phantom_adc_bias_ratio{phantom="ice water",scanner="qoh-mr1-1.5t"}`},
	}
	for _, p := range pages {
		res, err := http.Get(base + p.path)
		if err != nil {
			t.Fatal(err)
		}
		body, _ := io.ReadAll(res.Body)
		res.Body.Close()
		if res.StatusCode != http.StatusOK || !strings.Contains(string(body), p.want) {
			t.Errorf("GET %s: %s, body without %q", p.path, res.Status, p.want)
		}
	}

	stop()
	select {
	case code := <-done:
		if code != exitOK {
			t.Errorf("demo exited %d after the stop, want 0\nstderr:\n%s", code, stderr.String())
		}
	case <-time.After(time.Minute):
		t.Fatal("demo did not stop within a minute of Ctrl-C")
	}
}
