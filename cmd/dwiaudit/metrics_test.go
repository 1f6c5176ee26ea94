package main

import (
	"encoding/json"
	"fmt"
	"io"
	"net"
	"net/http"
	"net/url"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"dwiaudit/audit/phantom"
	"dwiaudit/internal/testtool"
	"dwiaudit/scp/part10"
)

const (
	// promWait bounds the wait for Prometheus to scrape the node and
	// answer with the drift gauge: a 1 s settle, an audit of a 32x32x4
	// study in well under a second, and 1 s scrapes.
	promWait = 20 * time.Second
	// metricsWait bounds the wait for the node's own /metrics to show an
	// audit.
	metricsWait = 10 * time.Second
	// parenchymaGauge is the drift gauge the dashboards plot.
	parenchymaGauge = "dwiaudit_series_parenchyma_adc_square_meters_per_second"
)

// writeNodeConfig writes a node configuration file with one peer.
func writeNodeConfig(t *testing.T, aeTitle, scanner string) string {
	t.Helper()
	path := filepath.Join(t.TempDir(), "dwiaudit.yaml")
	cfg := fmt.Sprintf("peers:\n  - ae_title: %s\n    scanner: %s\n", aeTitle, scanner)
	if err := os.WriteFile(path, []byte(cfg), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// cleanBrainStudy writes a small clean synthetic brain study (the
// invented Quellvander Ostmire Hospital's QOH-MR1) and returns its
// folder and the data-set bytes of its files (each file less its
// preamble and file meta, PS3.10 7.1).
func cleanBrainStudy(t *testing.T) (string, int64) {
	t.Helper()
	dir := t.TempDir()
	st, err := phantom.Write(dir, phantom.Options{Matrix: 32, Slices: 4, Seed: 11})
	if err != nil {
		t.Fatal(err)
	}
	var dataSet int64
	for _, f := range st.Files {
		_, offset, err := part10.ReadMetaFile(f)
		if err != nil {
			t.Fatal(err)
		}
		fi, err := os.Stat(f)
		if err != nil {
			t.Fatal(err)
		}
		dataSet += fi.Size() - offset
	}
	return dir, dataSet
}

// scrapeNode GETs the node's /metrics.
func scrapeNode(t *testing.T, n *node) string {
	t.Helper()
	res, err := http.Get(n.httpURL + "/metrics")
	if err != nil {
		t.Fatal(err)
	}
	defer res.Body.Close()
	b, err := io.ReadAll(res.Body)
	if err != nil || res.StatusCode != http.StatusOK {
		t.Fatalf("GET /metrics: %d %v", res.StatusCode, err)
	}
	return string(b)
}

// awaitMetricLine polls the node's /metrics until a line starts with
// prefix and returns its value.
func awaitMetricLine(t *testing.T, n *node, prefix string, within time.Duration) float64 {
	t.Helper()
	deadline := time.Now().Add(within)
	for {
		body := scrapeNode(t, n)
		for _, line := range strings.Split(body, "\n") {
			if rest, ok := strings.CutPrefix(line, prefix); ok {
				v, err := strconv.ParseFloat(strings.TrimSpace(rest), 64)
				if err != nil {
					t.Fatalf("line %q: %v", line, err)
				}
				return v
			}
		}
		if time.Now().After(deadline) {
			t.Fatalf("no line %q in /metrics within %v:\n%s", prefix, within, body)
		}
		time.Sleep(100 * time.Millisecond)
	}
}

// freePort returns a loopback port free at the time of the call
// (Prometheus takes no ":0" and reports no port it chose).
func freePort(t *testing.T) string {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	return l.Addr().String()
}

// startPrometheus runs a real Prometheus server scraping target every
// second and returns its address and a channel closed if it exits. It
// is killed when the test ends.
func startPrometheus(t *testing.T, bin, target string) (string, <-chan struct{}) {
	t.Helper()
	dir := t.TempDir()
	cfg := filepath.Join(dir, "prometheus.yml")
	// Prometheus configuration file format (prometheus.io docs,
	// "Configuration"): a global scrape interval and one static target.
	conf := fmt.Sprintf(`global:
  scrape_interval: 1s
  scrape_timeout: 1s
scrape_configs:
  - job_name: dwiaudit
    static_configs:
      - targets: ['%s']
`, target)
	if err := os.WriteFile(cfg, []byte(conf), 0o644); err != nil {
		t.Fatal(err)
	}
	addr := freePort(t)
	var stderr syncBuffer
	cmd := exec.Command(bin, "--config.file="+cfg, "--storage.tsdb.path="+filepath.Join(dir, "tsdb"),
		"--web.listen-address="+addr)
	cmd.Stdout, cmd.Stderr = &stderr, &stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	done := make(chan struct{})
	go func() { cmd.Wait(); close(done) }()
	t.Cleanup(func() {
		cmd.Process.Kill()
		<-done
		if t.Failed() {
			t.Logf("prometheus output:\n%s", stderr.String())
		}
	})
	return addr, done
}

// promResult is one series of an instant query answer (Prometheus HTTP
// API, /api/v1/query, resultType vector).
type promResult struct {
	Metric map[string]string `json:"metric"`
	Value  [2]any            `json:"value"` // [unix time, "value"]
}

// promQuery asks Prometheus an instant query; nil while it is not up.
func promQuery(t *testing.T, addr, query string) []promResult {
	t.Helper()
	res, err := http.Get("http://" + addr + "/api/v1/query?query=" + url.QueryEscape(query))
	if err != nil {
		return nil // still starting
	}
	defer res.Body.Close()
	var body struct {
		Status string `json:"status"`
		Data   struct {
			ResultType string       `json:"resultType"`
			Result     []promResult `json:"result"`
		} `json:"data"`
	}
	if err := json.NewDecoder(res.Body).Decode(&body); err != nil || body.Status != "success" {
		return nil
	}
	return body.Data.Result
}

func resultValue(t *testing.T, r promResult) float64 {
	t.Helper()
	s, _ := r.Value[1].(string)
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		t.Fatalf("value %v: %v", r.Value, err)
	}
	return v
}

func TestPrometheusScrapesTheDriftGaugeOfAnAuditedPhantomStudy(t *testing.T) {
	prom := testtool.Path(t, "prometheus", "prometheus")
	src, _ := cleanBrainStudy(t)
	n := startNode(t, t.TempDir(), "--config", writeNodeConfig(t, "QOH_MR1", "qoh-mr1-1.5t"), "--settle", "1s")
	promAddr, promExited := startPrometheus(t, prom, strings.TrimPrefix(n.httpURL, "http://"))
	if r := runCLI(t, "send", "--to", n.dicomAddr, "--calling-ae", "QOH_MR1", "--called-ae", testAE, "--quiet", src); r.code != exitOK {
		t.Fatalf("send exited %d", r.code)
	}

	deadline := time.Now().Add(promWait)
	var got []promResult
	for {
		got = promQuery(t, promAddr, parenchymaGauge)
		if len(got) > 0 || time.Now().After(deadline) {
			break
		}
		select {
		case <-promExited:
			t.Fatal("prometheus exited (its output follows)")
		default:
		}
		time.Sleep(250 * time.Millisecond)
	}
	if len(got) != 1 {
		t.Fatalf("Prometheus answered %v for %s within %v, want one series", got, parenchymaGauge, promWait)
	}
	// The peer's configured label, the default brain protocol's name
	// (rules.DefaultConfig) and Prometheus' own job label.
	if m := got[0].Metric; m["scanner"] != "qoh-mr1-1.5t" || m["protocol"] != "brain" || m["job"] != "dwiaudit" {
		t.Errorf("series labels %v, want scanner qoh-mr1-1.5t, protocol brain, job dwiaudit", m)
	}
	// docs/references.md#helenius-2002 (Helenius 2002): white matter 0.70e-3 and cortex 0.89e-3
	// mm²/s, the synthetic phantom's truth; the parenchyma median lies
	// between, here in m²/s.
	if v := resultValue(t, got[0]); v < 0.70e-9 || v > 0.89e-9 {
		t.Errorf("parenchyma ADC %g m²/s, want 0.70e-9..0.89e-9", v)
	}
	// Prometheus read the whole exposition: the scrape is up, and the
	// counters of the send are there.
	if up := promQuery(t, promAddr, `up{job="dwiaudit"}`); len(up) != 1 || resultValue(t, up[0]) != 1 {
		t.Errorf("up = %v, want 1", up)
	}
	if in := promQuery(t, promAddr, `dwiaudit_received_instances_total{scanner="qoh-mr1-1.5t"}`); len(in) != 1 || resultValue(t, in[0]) < 1 {
		t.Errorf("received instances %v, want at least one from qoh-mr1-1.5t", in)
	}
}

func TestARestartedNodeShowsTheLastDriftValuesBeforeAnyNewAudit(t *testing.T) {
	src, dataSetBytes := cleanBrainStudy(t)
	data := t.TempDir()
	// No peers: the scanner label comes from the Station Name, QOH-MR1
	// (audit/phantom Scanners), sanitised.
	n := startNode(t, data, "--settle", "1s")
	if r := runCLI(t, "send", "--to", n.dicomAddr, "--called-ae", testAE, "--quiet", src); r.code != exitOK {
		t.Fatalf("send exited %d", r.code)
	}
	line := parenchymaGauge + `{protocol="brain",scanner="qoh-mr1"} `
	before := awaitMetricLine(t, n, line, metricsWait)
	body := scrapeNode(t, n)
	for _, want := range []string{
		"dwiaudit_received_instances_total{scanner=\"qoh-mr1\"} 20\n", // b0 and three b1000 directions and the trace, on 4 slices
		fmt.Sprintf("dwiaudit_received_bytes_total{scanner=\"qoh-mr1\"} %d\n", dataSetBytes),
		"dwiaudit_cstore_responses_total{status_class=\"success\"} 20\n",
		`dwiaudit_audits_total{result="ok"} 1`,
		`dwiaudit_associations_total{result="released"} 1`,
		`dwiaudit_store_put_duration_seconds_count `,
		`dwiaudit_data_free_bytes `,
	} {
		if !strings.Contains(body, want) {
			t.Errorf("/metrics lacks %q", want)
		}
	}
	if code := n.stop(); code != exitOK {
		t.Fatalf("exit code %d after SIGTERM", code)
	}

	n2 := startNode(t, data, "--settle", "1s")
	after := awaitMetricLine(t, n2, line, time.Second)
	if after != before {
		t.Errorf("after the restart the gauge is %g, want %g as before", after, before)
	}
	if body := scrapeNode(t, n2); !strings.Contains(body, `dwiaudit_audits_total{result="ok"} 0`) {
		t.Errorf("the restarted node counts audits it did not make:\n%s", body)
	}
}
