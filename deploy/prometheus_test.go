package deploy

import (
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"testing"

	"dwiaudit/internal/testtool"

	"go.yaml.in/yaml/v3"
)

// ruleTestFiles are the promtool unit-test files of alerts.yml.
var ruleTestFiles = []string{"alerts_test.yml", "alerts_days_test.yml"}

func runPromtool(t *testing.T, promtool, dir string, args ...string) (string, error) {
	t.Helper()
	cmd := exec.Command(promtool, args...)
	cmd.Dir = dir
	out, err := cmd.CombinedOutput()
	return string(out), err
}

func TestPromtoolAcceptsTheConfigTheRulesAndTheirTests(t *testing.T) {
	promtool := testtool.Path(t, "promtool", "prometheus")
	for _, c := range []struct {
		name string
		args []string
	}{
		{"the scrape configuration is valid", []string{"check", "config", "prometheus.yml"}},
		{"the alert rules are valid", []string{"check", "rules", "alerts.yml"}},
		{"the alert rules pass their unit tests", append([]string{"test", "rules"}, ruleTestFiles...)},
	} {
		t.Run(c.name, func(t *testing.T) {
			if out, err := runPromtool(t, promtool, ".", c.args...); err != nil {
				t.Errorf("promtool %s: %v\n%s", strings.Join(c.args, " "), err, out)
			}
		})
	}
}

// ruleTests is the shape of a promtool unit-test file, as far as the
// tests read it.
type ruleTests struct {
	Tests []struct {
		Name          string `yaml:"name"`
		AlertRuleTest []struct {
			EvalTime  string           `yaml:"eval_time"`
			Alertname string           `yaml:"alertname"`
			ExpAlerts []map[string]any `yaml:"exp_alerts"`
		} `yaml:"alert_rule_test"`
	} `yaml:"tests"`
}

func alertNames(t *testing.T) []string {
	t.Helper()
	r, err := ReadAlertRules()
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, g := range r.Groups {
		for _, rule := range g.Rules {
			if rule.Alert != "" {
				names = append(names, rule.Alert)
			}
		}
	}
	return names
}

func TestEveryAlertHasAFiringAndAQuietCase(t *testing.T) {
	firing, quiet := map[string]int{}, map[string]int{}
	testedIn := map[string]string{}
	for _, f := range ruleTestFiles {
		b, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		var rt ruleTests
		if err := yaml.Unmarshal(b, &rt); err != nil {
			t.Fatalf("%s: %v", f, err)
		}
		for _, tc := range rt.Tests {
			for _, a := range tc.AlertRuleTest {
				if len(a.ExpAlerts) > 0 {
					firing[a.Alertname]++
				} else {
					quiet[a.Alertname]++
				}
				testedIn[a.Alertname] = f
			}
		}
	}
	names := alertNames(t)
	if len(names) < 10 {
		t.Fatalf("alerts.yml has %d alerts, want the 10 of the brief: %v", len(names), names)
	}
	for _, n := range names {
		t.Run(n+" is tested firing and quiet", func(t *testing.T) {
			if firing[n] == 0 || quiet[n] == 0 {
				t.Errorf("%s: %d firing and %d quiet cases, want at least one of each", n, firing[n], quiet[n])
			}
		})
	}
	for n := range testedIn {
		if !slices.Contains(names, n) {
			t.Errorf("%s tests alert %s, which alerts.yml does not have", testedIn[n], n)
		}
	}
}

// TestTheFiringCasesCatchASilencedAlert replaces each alert's expression
// with one that never fires and runs the unit tests: they must fail, so
// that the firing cases are known to be checked, not only written.
func TestTheFiringCasesCatchASilencedAlert(t *testing.T) {
	promtool := testtool.Path(t, "promtool", "prometheus")
	orig, err := os.ReadFile("alerts.yml")
	if err != nil {
		t.Fatal(err)
	}
	for _, name := range alertNames(t) {
		t.Run("silencing "+name+" fails its tests", func(t *testing.T) {
			dir := t.TempDir()
			mutated := silence(t, orig, name)
			if err := os.WriteFile(filepath.Join(dir, "alerts.yml"), mutated, 0o644); err != nil {
				t.Fatal(err)
			}
			var files []string
			for _, f := range ruleTestFiles {
				b, err := os.ReadFile(f)
				if err != nil {
					t.Fatal(err)
				}
				if !strings.Contains(string(b), "alertname: "+name+"\n") {
					continue
				}
				if err := os.WriteFile(filepath.Join(dir, f), b, 0o644); err != nil {
					t.Fatal(err)
				}
				files = append(files, f)
			}
			if len(files) == 0 {
				t.Fatalf("no test file tests %s", name)
			}
			out, err := runPromtool(t, promtool, dir, append([]string{"test", "rules"}, files...)...)
			if err == nil {
				t.Errorf("the unit tests pass with %s never firing:\n%s", name, out)
			}
		})
	}
}

// silence returns the rule file with the named alert's expr replaced by
// one that is never true.
func silence(t *testing.T, rules []byte, alert string) []byte {
	t.Helper()
	var doc yaml.Node
	if err := yaml.Unmarshal(rules, &doc); err != nil {
		t.Fatal(err)
	}
	found := false
	var walk func(n *yaml.Node)
	walk = func(n *yaml.Node) {
		if n.Kind == yaml.MappingNode {
			isAlert := false
			for i := 0; i+1 < len(n.Content); i += 2 {
				if n.Content[i].Value == "alert" && n.Content[i+1].Value == alert {
					isAlert = true
				}
			}
			if isAlert {
				for i := 0; i+1 < len(n.Content); i += 2 {
					if n.Content[i].Value == "expr" {
						n.Content[i+1].Value = "vector(0) > 1"
						n.Content[i+1].Style = yaml.DoubleQuotedStyle
						found = true
					}
				}
			}
		}
		for _, c := range n.Content {
			walk(c)
		}
	}
	walk(&doc)
	if !found {
		t.Fatalf("alert %s not found", alert)
	}
	out, err := yaml.Marshal(&doc)
	if err != nil {
		t.Fatal(err)
	}
	return out
}

// identifierWords are label or metric name parts that would carry
// patient identifiers; none may appear in a query or a label.
var identifierWords = regexp.MustCompile(`(?i)patient|accession|study_?uid|series_?uid|sop_?uid|birth`)

func TestEveryAlertSpeaksPlainlyAndSaysTheNodeDoesNotDiagnose(t *testing.T) {
	r, err := ReadAlertRules()
	if err != nil {
		t.Fatal(err)
	}
	for _, g := range r.Groups {
		for _, rule := range g.Rules {
			t.Run(rule.Alert, func(t *testing.T) {
				if s := rule.Labels["severity"]; s != "warning" && s != "critical" {
					t.Errorf("severity %q, want warning or critical", s)
				}
				for _, k := range []string{"summary", "description", "runbook"} {
					if strings.TrimSpace(rule.Annotations[k]) == "" {
						t.Errorf("no %s annotation", k)
					}
				}
				if !strings.Contains(rule.Annotations["description"], "dwiaudit checks acquisitions; it does not diagnose.") {
					t.Errorf("the description does not say that dwiaudit checks acquisitions and does not diagnose: %q", rule.Annotations["description"])
				}
				if m := identifierWords.FindString(rule.Expr); m != "" {
					t.Errorf("the expression names %q, a patient identifier", m)
				}
				for k, v := range rule.Labels {
					if identifierWords.MatchString(k) || identifierWords.MatchString(v) {
						t.Errorf("label %s=%q names a patient identifier", k, v)
					}
				}
			})
		}
	}
}

// dashboard is the shape of the dashboard JSON, as far as the tests
// read it.
type dashboard struct {
	Inputs []struct {
		Name     string `json:"name"`
		Type     string `json:"type"`
		PluginID string `json:"pluginId"`
	} `json:"__inputs"`
	SchemaVersion int           `json:"schemaVersion"`
	UID           string        `json:"uid"`
	Title         string        `json:"title"`
	Panels        []panelDetail `json:"panels"`
	Templating    struct {
		List []struct {
			Name       string `json:"name"`
			Type       string `json:"type"`
			Definition string `json:"definition"`
			Query      struct {
				Query string `json:"query"`
			} `json:"query"`
			Datasource *datasourceRef `json:"datasource"`
		} `json:"list"`
	} `json:"templating"`
}

type datasourceRef struct {
	Type string `json:"type"`
	UID  string `json:"uid"`
}

type panelDetail struct {
	ID          int                      `json:"id"`
	Type        string                   `json:"type"`
	Title       string                   `json:"title"`
	Description string                   `json:"description"`
	Datasource  *datasourceRef           `json:"datasource"`
	GridPos     struct{ H, W, X, Y int } `json:"gridPos"`
	FieldConfig struct {
		Defaults struct {
			Unit       string `json:"unit"`
			Thresholds struct {
				Steps []struct {
					Value *float64 `json:"value"`
				} `json:"steps"`
			} `json:"thresholds"`
		} `json:"defaults"`
	} `json:"fieldConfig"`
	Options struct {
		Content string `json:"content"`
	} `json:"options"`
	Targets []struct {
		RefID      string         `json:"refId"`
		Expr       string         `json:"expr"`
		Datasource *datasourceRef `json:"datasource"`
	} `json:"targets"`
	Panels []panelDetail `json:"panels"`
}

func readDashboard(t *testing.T) dashboard {
	t.Helper()
	b, err := os.ReadFile(DashboardFile)
	if err != nil {
		t.Fatal(err)
	}
	var d dashboard
	if err := json.Unmarshal(b, &d); err != nil {
		t.Fatal(err)
	}
	return d
}

func allPanels(ps []panelDetail) []panelDetail {
	var out []panelDetail
	for _, p := range ps {
		out = append(out, p)
		out = append(out, allPanels(p.Panels)...)
	}
	return out
}

// fixedMetrics are the node's metric names (fixed with the metrics
// work, audit/metrics); the dashboard shows every one.
var fixedMetrics = []string{
	"dwiaudit_build_info", "dwiaudit_associations_total", "dwiaudit_cstore_responses_total",
	"dwiaudit_received_instances_total", "dwiaudit_received_bytes_total", "dwiaudit_store_put_duration_seconds",
	"dwiaudit_data_free_bytes", "dwiaudit_data_floor_bytes", "dwiaudit_audit_queue_studies",
	"dwiaudit_audits_total", "dwiaudit_audit_duration_seconds", "dwiaudit_findings_total",
	"dwiaudit_series_parenchyma_adc_square_meters_per_second", "dwiaudit_series_csf_adc_square_meters_per_second",
	"dwiaudit_series_b0_snr", "dwiaudit_series_audited_timestamp_seconds",
	"dwiaudit_phantom_adc_square_meters_per_second", "dwiaudit_phantom_adc_bias_ratio",
}

func TestTheDashboardImportsAndShowsEveryMetric(t *testing.T) {
	d := readDashboard(t)
	const ds = "${DS_PROMETHEUS}"
	t.Run("it asks for a Prometheus data source on import", func(t *testing.T) {
		if len(d.Inputs) != 1 || d.Inputs[0].Name != "DS_PROMETHEUS" || d.Inputs[0].Type != "datasource" || d.Inputs[0].PluginID != "prometheus" {
			t.Errorf("__inputs = %+v, want one prometheus datasource input DS_PROMETHEUS", d.Inputs)
		}
		// Grafana 10 and 11 write schema versions 36 to 41 (from memory).
		if d.SchemaVersion < 36 || d.SchemaVersion > 41 {
			t.Errorf("schemaVersion %d, want about 39", d.SchemaVersion)
		}
		if d.UID == "" || d.Title == "" {
			t.Errorf("uid %q, title %q: want both", d.UID, d.Title)
		}
	})
	t.Run("it has a scanner variable from the audited-series metric", func(t *testing.T) {
		const want = "label_values(dwiaudit_series_audited_timestamp_seconds, scanner)"
		for _, v := range d.Templating.List {
			if v.Name == "scanner" {
				if v.Type != "query" || v.Definition != want || v.Query.Query != want || v.Datasource == nil || v.Datasource.UID != ds {
					t.Errorf("variable scanner = %+v, want a query %q on %s", v, want, ds)
				}
				return
			}
		}
		t.Error("no scanner variable")
	})
	panels := allPanels(d.Panels)
	t.Run("every query panel uses the imported data source and has distinct queries", func(t *testing.T) {
		ids := map[int]string{}
		for _, p := range panels {
			if prev, dup := ids[p.ID]; dup {
				t.Errorf("panels %q and %q share id %d", prev, p.Title, p.ID)
			}
			ids[p.ID] = p.Title
			if p.Type == "row" || p.Type == "text" {
				continue
			}
			if p.Datasource == nil || p.Datasource.UID != ds || len(p.Targets) == 0 {
				t.Errorf("panel %q: datasource %+v, %d targets; want %s and at least one", p.Title, p.Datasource, len(p.Targets), ds)
			}
			if strings.TrimSpace(p.Description) == "" {
				t.Errorf("panel %q has no description", p.Title)
			}
			refs := map[string]bool{}
			for _, q := range p.Targets {
				if q.Expr == "" || q.RefID == "" || refs[q.RefID] || q.Datasource == nil || q.Datasource.UID != ds {
					t.Errorf("panel %q: target %+v: want an expr, a distinct refId and %s", p.Title, q, ds)
				}
				refs[q.RefID] = true
			}
		}
	})
	t.Run("panels lie side by side on the 24-column grid without overlapping", func(t *testing.T) {
		type cell struct{ x, y int }
		used := map[cell]string{}
		for _, p := range d.Panels { // top level; rows' own panels are placed when collapsed
			g := p.GridPos
			if g.W <= 0 || g.H <= 0 || g.X < 0 || g.X+g.W > 24 {
				t.Errorf("panel %q at %+v is off the grid", p.Title, g)
			}
			for x := g.X; x < g.X+g.W; x++ {
				for y := g.Y; y < g.Y+g.H; y++ {
					if other, ok := used[cell{x, y}]; ok {
						t.Errorf("panels %q and %q overlap at column %d, row %d", other, p.Title, x, y)
						return
					}
					used[cell{x, y}] = p.Title
				}
			}
		}
	})
	t.Run("ADC is shown in 1e-3 mm²/s: the node's m²/s times 1e9", func(t *testing.T) {
		n := 0
		for _, p := range panels {
			if !strings.Contains(p.Title, "10⁻³ mm²/s") {
				continue
			}
			for _, q := range p.Targets {
				n++
				if !strings.Contains(q.Expr, "_adc_square_meters_per_second") || !strings.HasSuffix(q.Expr, "* 1e9") {
					t.Errorf("panel %q: %q is not an ADC metric times 1e9", p.Title, q.Expr)
				}
			}
		}
		if n < 3 {
			t.Errorf("%d ADC queries in 10⁻³ mm²/s panels, want parenchyma, CSF and phantom", n)
		}
	})
	t.Run("the phantom ADC panel draws the expected 1.1", func(t *testing.T) {
		for _, p := range panels {
			if strings.Contains(p.Title, "Phantom ADC (") {
				for _, s := range p.FieldConfig.Defaults.Thresholds.Steps {
					// Ice water at 0 °C, 1.1e-3 mm²/s (QIBA DWI profile;
					// Malyarenko et al., JMRI 2013;37:1238; docs/references.md#malyarenko-2013).
					if s.Value != nil && *s.Value == 1.1 {
						return
					}
				}
				t.Errorf("phantom ADC panel has no line at 1.1")
				return
			}
		}
		t.Error("no phantom ADC panel")
	})
	t.Run("it says the node checks acquisitions and does not diagnose", func(t *testing.T) {
		for _, p := range panels {
			if p.Type == "text" && strings.Contains(p.Options.Content, "it does not diagnose") {
				return
			}
		}
		t.Error("no text panel saying dwiaudit does not diagnose")
	})
	t.Run("every node metric has a panel", func(t *testing.T) {
		qs, err := DashboardQueries()
		if err != nil {
			t.Fatal(err)
		}
		var all strings.Builder
		for _, q := range qs {
			all.WriteString(q.Expr + "\n")
		}
		for _, m := range fixedMetrics {
			if !regexp.MustCompile(`\b` + m + `(_bucket)?\b`).MatchString(all.String()) {
				t.Errorf("no dashboard query uses %s", m)
			}
			if identifierWords.MatchString(m) {
				t.Errorf("metric %s names a patient identifier", m)
			}
		}
		if m := identifierWords.FindString(all.String()); m != "" {
			t.Errorf("a dashboard query names %q, a patient identifier", m)
		}
	})
}

// grafanaVariables are the dashboard's variables with a value of the
// right kind, so that its queries can be parsed as plain PromQL.
var grafanaVariables = strings.NewReplacer(
	"$__rate_interval", "5m",
	"$__range", "1d",
	"$scanner", ".*",
	"$instance", ".*",
)

func TestPromtoolParsesEveryDashboardQuery(t *testing.T) {
	promtool := testtool.Path(t, "promtool", "prometheus")
	qs, err := DashboardQueries()
	if err != nil {
		t.Fatal(err)
	}
	// promtool has no query parser of its own; a rule file with one
	// recording rule per query lets `promtool check rules` parse them.
	type rule struct {
		Record string `yaml:"record"`
		Expr   string `yaml:"expr"`
	}
	var rs []rule
	for i, q := range qs {
		if strings.HasPrefix(q.Expr, "label_values(") {
			continue // a Grafana function, not PromQL
		}
		expr := grafanaVariables.Replace(q.Expr)
		if strings.Contains(expr, "$") {
			t.Errorf("%s: %q uses a variable this test does not know", q.Where, q.Expr)
		}
		rs = append(rs, rule{Record: fmt.Sprintf("dashboard:query_%d", i), Expr: expr})
	}
	if len(rs) < 20 {
		t.Fatalf("%d dashboard queries, want the dashboard's 20 or more", len(rs))
	}
	b, err := yaml.Marshal(map[string]any{"groups": []any{map[string]any{"name": "dashboard", "rules": rs}}})
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	if err := os.WriteFile(filepath.Join(dir, "dashboard-queries.yml"), b, 0o644); err != nil {
		t.Fatal(err)
	}
	if out, err := runPromtool(t, promtool, dir, "check", "rules", "dashboard-queries.yml"); err != nil {
		t.Errorf("promtool check rules on the dashboard's queries: %v\n%s", err, out)
	}
}
