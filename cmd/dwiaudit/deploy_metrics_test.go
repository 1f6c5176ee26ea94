package main

// The deploy files (deploy/alerts.yml, deploy/grafana-dashboard.json)
// query the node's metrics by name; a renamed or missing metric would
// leave an alert that can never fire and a panel that shows nothing.
// This test runs a real node, has it audit a brain study and an
// ice-water phantom, scrapes /metrics and checks that every name the
// deploy files use is there.

import (
	"fmt"
	"io"
	"net/http"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"dwiaudit/audit/phantom"
	"dwiaudit/deploy"
	"dwiaudit/rules"
)

// deployMetricsWait bounds the wait for the audits to reach /metrics: two
// small studies settle in 1 s and audit in well under a second each.
const deployMetricsWait = 30 * time.Second

// scrapedSample is one sample line of the Prometheus text format.
type scrapedSample struct {
	name   string
	labels map[string]string
}

// scrape is a parsed /metrics answer: family types from the # TYPE
// lines, and the samples.
type scrape struct {
	types   map[string]string // family name -> counter, gauge, histogram, ...
	samples []scrapedSample
}

// parseExposition reads the Prometheus text format (version 0.0.4):
// "# TYPE name type" lines and "name{label="value",...} value" samples,
// label values with \\, \" and \n escapes.
func parseExposition(text string) (scrape, error) {
	s := scrape{types: map[string]string{}}
	for n, line := range strings.Split(text, "\n") {
		if line == "" {
			continue
		}
		if rest, ok := strings.CutPrefix(line, "# TYPE "); ok {
			name, typ, _ := strings.Cut(rest, " ")
			s.types[name] = typ
			continue
		}
		if strings.HasPrefix(line, "#") {
			continue
		}
		smp := scrapedSample{labels: map[string]string{}}
		i := strings.IndexAny(line, "{ ")
		if i <= 0 {
			return s, fmt.Errorf("line %d: %q", n+1, line)
		}
		smp.name, line = line[:i], line[i:]
		if strings.HasPrefix(line, "{") {
			line = line[1:]
			for !strings.HasPrefix(line, "}") {
				eq := strings.Index(line, `="`)
				if eq <= 0 {
					return s, fmt.Errorf("line %d: bad labels", n+1)
				}
				key := strings.TrimPrefix(line[:eq], ",")
				line = line[eq+2:]
				var val strings.Builder
				for {
					if line == "" {
						return s, fmt.Errorf("line %d: unterminated label value", n+1)
					}
					c := line[0]
					line = line[1:]
					if c == '"' {
						break
					}
					if c == '\\' && line != "" {
						c, line = line[0], line[1:]
						if c == 'n' {
							c = '\n'
						}
					}
					val.WriteByte(c)
				}
				smp.labels[key] = val.String()
				line = strings.TrimPrefix(line, ",")
			}
			line = line[1:]
		}
		fields := strings.Fields(line)
		if len(fields) < 1 {
			return s, fmt.Errorf("line %d: no value", n+1)
		}
		if _, err := strconv.ParseFloat(fields[0], 64); err != nil {
			return s, fmt.Errorf("line %d: value %q: %v", n+1, fields[0], err)
		}
		s.samples = append(s.samples, smp)
	}
	return s, nil
}

// family is the family a sample name belongs to: a histogram's or
// summary's _bucket, _sum and _count samples belong to its base name.
func (s scrape) family(name string) (string, bool) {
	if _, ok := s.types[name]; ok {
		return name, true
	}
	for _, suf := range []string{"_bucket", "_sum", "_count"} {
		if base, ok := strings.CutSuffix(name, suf); ok {
			if t := s.types[base]; t == "histogram" || (t == "summary" && suf != "_bucket") {
				return base, true
			}
		}
	}
	return "", false
}

// has reports whether the family has a sample whose labels include want.
func (s scrape) has(family string, want map[string]string) bool {
	for _, smp := range s.samples {
		if f, _ := s.family(smp.name); f != family {
			continue
		}
		ok := true
		for k, v := range want {
			if got, present := smp.labels[k]; !present || (v != "*" && got != v) {
				ok = false
			}
		}
		if ok {
			return true
		}
	}
	return false
}

func fetchMetrics(t *testing.T, n *node) (string, scrape) {
	t.Helper()
	res, err := http.Get(n.httpURL + "/metrics")
	if err != nil {
		t.Fatal(err)
	}
	defer res.Body.Close()
	b, err := io.ReadAll(res.Body)
	if err != nil {
		t.Fatal(err)
	}
	if res.StatusCode != http.StatusOK {
		t.Fatalf("GET /metrics: %d\n%s", res.StatusCode, b)
	}
	s, err := parseExposition(string(b))
	if err != nil {
		t.Fatalf("GET /metrics: %v", err)
	}
	return string(b), s
}

func TestParseExpositionReadsTheTextFormat(t *testing.T) {
	text := "# HELP x_seconds A histogram.\n# TYPE x_seconds histogram\n" +
		`x_seconds_bucket{le="0.1"} 1` + "\n" + `x_seconds_bucket{le="+Inf"} 2` + "\n" +
		"x_seconds_sum 0.3\nx_seconds_count 2\n# TYPE y gauge\n" +
		`y{protocol="prostate (example)",q="a\"b\\c,d"} 1.5e-09` + "\n"
	s, err := parseExposition(text)
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		name, family string
		ok           bool
	}{
		{"x_seconds_bucket", "x_seconds", true},
		{"x_seconds_count", "x_seconds", true},
		{"y", "y", true},
		{"y_bucket", "", false},
		{"z", "", false},
	} {
		if f, ok := s.family(c.name); f != c.family || ok != c.ok {
			t.Errorf("family(%q) = %q, %v; want %q, %v", c.name, f, ok, c.family, c.ok)
		}
	}
	if !s.has("y", map[string]string{"protocol": "prostate (example)", "q": `a"b\c,d`}) {
		t.Errorf("labels with spaces, escapes and commas not read: %+v", s.samples)
	}
	if _, err := parseExposition("y{a=\"b} 1\n"); err == nil {
		t.Error("an unterminated label value was accepted")
	}
}

func TestEveryMetricTheDeployFilesUseIsExported(t *testing.T) {
	uses, err := deploy.MetricUses()
	if err != nil {
		t.Fatal(err)
	}
	if len(uses) == 0 {
		t.Fatal("the deploy files name no metric")
	}

	// Two invented studies from one scanner of Quellvander Ostmire: a
	// clean brain study (drift gauges) and an ice-water phantom scanned
	// warm (phantom gauges and a phantom-adc-bias finding).
	const patientID, patientName = "QOH-SYN-0042", "TEST^SYNTHETIC"
	var studies []*phantom.Study
	src := t.TempDir()
	for _, c := range []phantom.Case{phantom.CaseClean, phantom.CaseIceWaterWarm} {
		st, err := phantom.Write(filepath.Join(src, string(c)), phantom.Options{
			Case: c, Matrix: 64, Slices: 8, Seed: 5, PatientID: patientID, PatientName: patientName,
		})
		if err != nil {
			t.Fatal(err)
		}
		studies = append(studies, st)
	}
	cfg := filepath.Join(t.TempDir(), "dwiaudit.yaml")
	if err := os.WriteFile(cfg, []byte("peers:\n  - ae_title: QOH_MR1\n    scanner: qoh-mr1\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	n := startNode(t, t.TempDir(), "--config", cfg, "--settle", "1s")
	if r := runCLI(t, "send", "--to", n.dicomAddr, "--calling-ae", "QOH_MR1", "--called-ae", testAE, "--quiet", src); r.code != exitOK {
		t.Fatalf("send exited %d: %s", r.code, r.stderr)
	}
	phantomSeries := studies[1].Series[len(studies[1].Series)-1].UID
	for _, s := range studies[1].Series {
		if strings.Contains(strings.ToLower(s.Description), "ice") {
			phantomSeries = s.UID
		}
	}
	awaitFinding(t, n, phantomSeries, rules.IDPhantomADCBias, deployMetricsWait)

	// What the alerts and panels filter and group by must be there too.
	want := []struct {
		family string
		labels map[string]string
	}{
		{"dwiaudit_build_info", map[string]string{"version": "*", "goversion": "*"}},
		{"dwiaudit_associations_total", map[string]string{"result": "*"}},
		{"dwiaudit_cstore_responses_total", map[string]string{"status_class": "success"}},
		{"dwiaudit_received_instances_total", map[string]string{"scanner": "qoh-mr1"}},
		{"dwiaudit_received_bytes_total", map[string]string{"scanner": "qoh-mr1"}},
		{"dwiaudit_audits_total", map[string]string{"result": "ok"}},
		{"dwiaudit_findings_total", map[string]string{"scanner": "qoh-mr1", "rule": rules.IDPhantomADCBias, "severity": "warning"}},
		{"dwiaudit_series_parenchyma_adc_square_meters_per_second", map[string]string{"scanner": "qoh-mr1", "protocol": "brain"}},
		{"dwiaudit_series_csf_adc_square_meters_per_second", map[string]string{"scanner": "qoh-mr1", "protocol": "brain"}},
		{"dwiaudit_series_b0_snr", map[string]string{"scanner": "qoh-mr1", "protocol": "brain"}},
		{"dwiaudit_series_audited_timestamp_seconds", map[string]string{"scanner": "qoh-mr1", "protocol": "brain"}},
		{"dwiaudit_phantom_adc_square_meters_per_second", map[string]string{"scanner": "qoh-mr1", "phantom": "ice water"}},
		{"dwiaudit_phantom_adc_bias_ratio", map[string]string{"scanner": "qoh-mr1", "phantom": "ice water"}},
	}
	// The gauges follow the saved audit closely; poll until the last of
	// them is there.
	var body string
	var s scrape
	deadline := time.Now().Add(deployMetricsWait)
	for {
		body, s = fetchMetrics(t, n)
		missing := 0
		for _, w := range want {
			if !s.has(w.family, w.labels) {
				missing++
			}
		}
		if missing == 0 || time.Now().After(deadline) {
			break
		}
		time.Sleep(100 * time.Millisecond)
	}

	for _, u := range uses {
		t.Run(fmt.Sprintf("%s in %s (%s) is exported", u.Name, u.File, u.Where), func(t *testing.T) {
			f, ok := s.family(u.Name)
			if !ok {
				t.Fatalf("/metrics has no %s", u.Name)
			}
			if !s.has(f, nil) {
				t.Errorf("/metrics declares %s but has no sample of it", f)
			}
		})
	}
	for _, w := range want {
		t.Run(fmt.Sprintf("%s has a sample with labels %v", w.family, w.labels), func(t *testing.T) {
			if !s.has(w.family, w.labels) {
				t.Errorf("no sample of %s with labels %v", w.family, w.labels)
			}
		})
	}
	t.Run("no patient or instance identifier is in the metrics", func(t *testing.T) {
		banned := []string{patientID, patientName, "SYNTHETIC"}
		for _, st := range studies {
			banned = append(banned, st.StudyUID)
			for _, se := range st.Series {
				banned = append(banned, se.UID)
			}
		}
		for _, b := range banned {
			if strings.Contains(body, b) {
				t.Errorf("/metrics contains %q", b)
			}
		}
	})
	if t.Failed() {
		t.Logf("/metrics:\n%s", body)
	}
}
