package deploy

import (
	"embed"
	"encoding/json"
	"fmt"
	"regexp"
	"slices"
	"strings"

	"go.yaml.in/yaml/v3"
)

// files are the deploy files whose queries name node metrics. Read-only.
//
//go:embed alerts.yml grafana-dashboard.json
var files embed.FS

// File names inside the package.
const (
	AlertsFile    = "alerts.yml"
	DashboardFile = "grafana-dashboard.json"
)

// metricNamePattern matches the node's metric names in PromQL: the
// dwiaudit_ prefix (a job label value "dwiaudit" has no underscore after
// it).
const metricNamePattern = `\bdwiaudit_[a-zA-Z0-9_]+`

// MetricUse is one metric named in a query of a deploy file.
type MetricUse struct {
	Name  string // as written: a histogram may appear as NAME_bucket
	File  string // AlertsFile or DashboardFile
	Where string // the alert's name, or the dashboard panel's title or variable
}

// AlertRules is the shape of a Prometheus rule file, as far as the tests
// read it.
type AlertRules struct {
	Groups []struct {
		Name     string `yaml:"name"`
		Interval string `yaml:"interval"`
		Rules    []struct {
			Alert       string            `yaml:"alert"`
			Record      string            `yaml:"record"`
			Expr        string            `yaml:"expr"`
			For         string            `yaml:"for"`
			Labels      map[string]string `yaml:"labels"`
			Annotations map[string]string `yaml:"annotations"`
		} `yaml:"rules"`
	} `yaml:"groups"`
}

// ReadAlertRules parses the embedded alerts.yml.
func ReadAlertRules() (*AlertRules, error) {
	b, err := files.ReadFile(AlertsFile)
	if err != nil {
		return nil, err
	}
	var r AlertRules
	if err := yaml.Unmarshal(b, &r); err != nil {
		return nil, fmt.Errorf("deploy: %s: %w", AlertsFile, err)
	}
	return &r, nil
}

// DashboardQuery is one PromQL query of the dashboard.
type DashboardQuery struct {
	Where string // panel title, or "variable NAME"
	Expr  string
}

// DashboardQueries returns every query of the embedded dashboard: the
// panels' targets and the template variables' queries.
func DashboardQueries() ([]DashboardQuery, error) {
	b, err := files.ReadFile(DashboardFile)
	if err != nil {
		return nil, err
	}
	var d struct {
		Panels     []dashboardPanel `json:"panels"`
		Templating struct {
			List []struct {
				Name       string `json:"name"`
				Definition string `json:"definition"`
			} `json:"list"`
		} `json:"templating"`
	}
	if err := json.Unmarshal(b, &d); err != nil {
		return nil, fmt.Errorf("deploy: %s: %w", DashboardFile, err)
	}
	var out []DashboardQuery
	var walk func([]dashboardPanel)
	walk = func(ps []dashboardPanel) {
		for _, p := range ps {
			for _, t := range p.Targets {
				out = append(out, DashboardQuery{Where: p.Title, Expr: t.Expr})
			}
			walk(p.Panels) // panels inside a collapsed row
		}
	}
	walk(d.Panels)
	for _, v := range d.Templating.List {
		out = append(out, DashboardQuery{Where: "variable " + v.Name, Expr: v.Definition})
	}
	return out, nil
}

type dashboardPanel struct {
	Title   string `json:"title"`
	Targets []struct {
		Expr string `json:"expr"`
	} `json:"targets"`
	Panels []dashboardPanel `json:"panels"`
}

// MetricUses lists every node metric the alert rules and the dashboard
// name, ordered by name, file and place.
func MetricUses() ([]MetricUse, error) {
	metricName := regexp.MustCompile(metricNamePattern)
	rules, err := ReadAlertRules()
	if err != nil {
		return nil, err
	}
	var out []MetricUse
	for _, g := range rules.Groups {
		for _, r := range g.Rules {
			where := r.Alert + r.Record
			for _, n := range metricName.FindAllString(r.Expr, -1) {
				out = append(out, MetricUse{Name: n, File: AlertsFile, Where: where})
			}
		}
	}
	qs, err := DashboardQueries()
	if err != nil {
		return nil, err
	}
	for _, q := range qs {
		for _, n := range metricName.FindAllString(q.Expr, -1) {
			out = append(out, MetricUse{Name: n, File: DashboardFile, Where: q.Where})
		}
	}
	slices.SortFunc(out, func(a, b MetricUse) int {
		return strings.Compare(a.Name+"\x00"+a.File+"\x00"+a.Where, b.Name+"\x00"+b.File+"\x00"+b.Where)
	})
	return slices.Compact(out), nil
}
