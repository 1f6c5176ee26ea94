package main

// A real Prometheus, on deploy/prometheus.yml and deploy/alerts.yml,
// scrapes a real node: the scrape job reaches /metrics, every alert rule
// evaluates on the node's own series without error, and the node-side
// alerts go pending on the conditions they describe.

import (
	"encoding/json"
	"fmt"
	"net"
	"net/http"
	"net/url"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"go.yaml.in/yaml/v3"

	"dwiaudit/internal/testtool"
	"dwiaudit/scp/dimse"
)

// Limits of the Prometheus harness.
const (
	// deployPromWait bounds each wait on Prometheus: it starts in about a
	// second and scrapes and evaluates every second here.
	deployPromWait = 30 * time.Second
	// deployPromStopTimeout bounds the wait for Prometheus to exit on SIGTERM.
	deployPromStopTimeout = 15 * time.Second
)

// freeLoopbackAddr is a loopback address with a port free right now
// (Prometheus cannot report the port it got for ":0").
func freeLoopbackAddr(t *testing.T) string {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	addr := l.Addr().String()
	l.Close()
	return addr
}

// promConfig is the shipped scrape configuration and alert rules, with
// the node's address as target and every interval one second, written
// to dir. Nothing else of them changes.
func promConfig(t *testing.T, dir, target string) string {
	t.Helper()
	deployDir := filepath.Join("..", "..", "deploy")
	b, err := os.ReadFile(filepath.Join(deployDir, "prometheus.yml"))
	if err != nil {
		t.Fatal(err)
	}
	var cfg map[string]any
	if err := yaml.Unmarshal(b, &cfg); err != nil {
		t.Fatal(err)
	}
	cfg["global"] = map[string]any{"scrape_interval": "1s", "evaluation_interval": "1s"}
	jobs := cfg["scrape_configs"].([]any)
	if len(jobs) != 1 {
		t.Fatalf("deploy/prometheus.yml has %d scrape jobs, want the dwiaudit one", len(jobs))
	}
	job := jobs[0].(map[string]any)
	job["scrape_interval"], job["scrape_timeout"] = "1s", "1s"
	static := job["static_configs"].([]any)[0].(map[string]any)
	static["targets"] = []string{target}

	rules, err := os.ReadFile(filepath.Join(deployDir, "alerts.yml"))
	if err != nil {
		t.Fatal(err)
	}
	// The quality group is evaluated every 5 minutes; here every second,
	// so that its rules run at least once during the test.
	rules = []byte(strings.ReplaceAll(string(rules), "\n    interval: 5m\n", "\n    interval: 1s\n"))
	if err := os.WriteFile(filepath.Join(dir, "alerts.yml"), rules, 0o644); err != nil {
		t.Fatal(err)
	}
	cfg["rule_files"] = []string{"alerts.yml"}
	out, err := yaml.Marshal(cfg)
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(dir, "prometheus.yml")
	if err := os.WriteFile(path, out, 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// startShippedPrometheus runs prometheus on config and returns its base URL.
func startShippedPrometheus(t *testing.T, bin, config string) string {
	t.Helper()
	addr := freeLoopbackAddr(t)
	stderr := &syncBuffer{}
	cmd := exec.Command(bin,
		"--config.file="+config,
		"--storage.tsdb.path="+t.TempDir(),
		"--web.listen-address="+addr,
		"--log.level=warn")
	cmd.Stdout, cmd.Stderr = stderr, stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	exited := make(chan error, 1)
	go func() { exited <- cmd.Wait() }()
	t.Cleanup(func() {
		cmd.Process.Signal(syscall.SIGTERM)
		select {
		case <-exited:
		case <-time.After(deployPromStopTimeout):
			cmd.Process.Kill()
			<-exited
		}
		if t.Failed() {
			t.Logf("prometheus output:\n%s", stderr.String())
		}
	})
	base := "http://" + addr
	deadline := time.Now().Add(deployPromWait)
	for {
		select {
		case err := <-exited:
			t.Fatalf("prometheus exited: %v\n%s", err, stderr.String())
		default:
		}
		if res, err := http.Get(base + "/-/ready"); err == nil {
			res.Body.Close()
			if res.StatusCode == http.StatusOK {
				return base
			}
		}
		if time.Now().After(deadline) {
			t.Fatalf("prometheus not ready in %v:\n%s", deployPromWait, stderr.String())
		}
		time.Sleep(100 * time.Millisecond)
	}
}

// shippedPromAPI GETs a Prometheus HTTP API path and decodes its data field.
func shippedPromAPI(t *testing.T, base, path string, data any) {
	t.Helper()
	res, err := http.Get(base + path)
	if err != nil {
		t.Fatal(err)
	}
	defer res.Body.Close()
	var body struct {
		Status string          `json:"status"`
		Error  string          `json:"error"`
		Data   json.RawMessage `json:"data"`
	}
	if err := json.NewDecoder(res.Body).Decode(&body); err != nil {
		t.Fatalf("GET %s: %v", path, err)
	}
	if body.Status != "success" {
		t.Fatalf("GET %s: %s %s", path, body.Status, body.Error)
	}
	if err := json.Unmarshal(body.Data, data); err != nil {
		t.Fatalf("GET %s: %v", path, err)
	}
}

// shippedPromQuery runs an instant query and returns the label sets of the
// result.
func shippedPromQuery(t *testing.T, base, q string) []map[string]string {
	t.Helper()
	var data struct {
		Result []struct {
			Metric map[string]string `json:"metric"`
		} `json:"result"`
	}
	shippedPromAPI(t, base, "/api/v1/query?query="+url.QueryEscape(q), &data)
	var out []map[string]string
	for _, r := range data.Result {
		out = append(out, r.Metric)
	}
	return out
}

// promAlert is one alert of /api/v1/alerts.
type promAlert struct {
	Labels map[string]string `json:"labels"`
	State  string            `json:"state"`
}

func promAlerts(t *testing.T, base string) []promAlert {
	t.Helper()
	var data struct {
		Alerts []promAlert `json:"alerts"`
	}
	shippedPromAPI(t, base, "/api/v1/alerts", &data)
	return data.Alerts
}

// waitFor polls cond until it holds or deployPromWait passes.
func waitFor(t *testing.T, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(deployPromWait)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatalf("%s: not within %v", what, deployPromWait)
		}
		time.Sleep(200 * time.Millisecond)
	}
}

func TestPrometheusScrapesTheNodeAndEvaluatesTheShippedAlerts(t *testing.T) {
	bin := testtool.Path(t, "prometheus", "prometheus")
	// A floor no test machine has free: every C-STORE is refused with
	// A700, the condition of DwiauditDiskBelowFloor and of
	// DwiauditIngestFailures.
	cfg := filepath.Join(t.TempDir(), "dwiaudit.yaml")
	conf := "limits:\n  disk_floor: 1000000TiB\npeers:\n  - ae_title: QOH_MR1\n    scanner: qoh-mr1\n"
	if err := os.WriteFile(cfg, []byte(conf), 0o644); err != nil {
		t.Fatal(err)
	}
	n := startNode(t, t.TempDir(), "--config", cfg)
	target := strings.TrimPrefix(n.httpURL, "http://")
	base := startShippedPrometheus(t, bin, promConfig(t, t.TempDir(), target))

	t.Run("the shipped scrape job reaches the node's /metrics", func(t *testing.T) {
		waitFor(t, "up == 1 for the node", func() bool {
			return len(shippedPromQuery(t, base, fmt.Sprintf(`up{job="dwiaudit", instance=%q} == 1`, target))) == 1
		})
		got := shippedPromQuery(t, base, `dwiaudit_build_info`)
		if len(got) != 1 || got[0]["site"] != "quellvander-ostmire" || got[0]["job"] != "dwiaudit" {
			t.Errorf("dwiaudit_build_info in Prometheus: %v, want one series with job dwiaudit and the site label", got)
		}
	})

	// Two refused stores, a scrape apart, make the failure counter rise
	// in Prometheus.
	refused := func(sop string) {
		t.Helper()
		in := testInstance{Study: "2.25.300", Series: "2.25.301", SOP: sop, Number: 1, Rows: 32, Columns: 32, Seed: 1}
		// PS3.4 B.2.3 Table B.2-1: A7xx Refused: Out of Resources.
		if rsp, _ := storeOne(t, n.dicomAddr, "QOH_MR1", in, in.reader()); rsp.Status != dimse.StatusOutOfResources {
			t.Fatalf("C-STORE status %v, want %v", rsp.Status, dimse.StatusOutOfResources)
		}
	}
	refused("2.25.302")
	waitFor(t, "the first failure scraped", func() bool {
		return len(shippedPromQuery(t, base, `dwiaudit_cstore_responses_total{status_class="failure"} >= 1`)) == 1
	})
	refused("2.25.303")

	t.Run("the node-side alerts go pending on the node's own series", func(t *testing.T) {
		want := map[string]bool{"DwiauditDiskBelowFloor": false, "DwiauditIngestFailures": false}
		var last []promAlert
		waitFor(t, "DwiauditDiskBelowFloor and DwiauditIngestFailures pending", func() bool {
			last = promAlerts(t, base)
			for _, a := range last {
				if _, ok := want[a.Labels["alertname"]]; ok && a.Labels["instance"] == target && a.State == "pending" {
					want[a.Labels["alertname"]] = true
				}
			}
			return want["DwiauditDiskBelowFloor"] && want["DwiauditIngestFailures"]
		})
		for _, a := range last {
			// Free space below the floor is the critical alert's, not
			// also the warning's; the node is up.
			if name := a.Labels["alertname"]; name == "DwiauditDiskNearFloor" || name == "DwiauditNodeDown" {
				t.Errorf("%s is %s for a node that is up with free space below its floor", name, a.State)
			}
		}
	})

	t.Run("every alert rule evaluates without error", func(t *testing.T) {
		type rule struct {
			Name      string `json:"name"`
			Health    string `json:"health"`
			LastError string `json:"lastError"`
		}
		var rules []rule
		waitFor(t, "every rule evaluated", func() bool {
			var data struct {
				Groups []struct {
					Rules []rule `json:"rules"`
				} `json:"groups"`
			}
			shippedPromAPI(t, base, "/api/v1/rules?type=alert", &data)
			rules = rules[:0]
			done := true
			for _, g := range data.Groups {
				for _, r := range g.Rules {
					rules = append(rules, r)
					done = done && r.Health != "unknown"
				}
			}
			return done && len(rules) > 0
		})
		if len(rules) < 10 {
			t.Errorf("Prometheus loaded %d alert rules, want the 10 of deploy/alerts.yml", len(rules))
		}
		for _, r := range rules {
			if r.Health != "ok" {
				t.Errorf("%s: health %s: %s", r.Name, r.Health, r.LastError)
			}
		}
	})
}
