package config

import (
	"path/filepath"
	"strings"
	"testing"
	"time"

	"dwiaudit/audit/report"
)

func TestTheExampleConfigShowsTheReportsDefaults(t *testing.T) {
	c, err := LoadFile(filepath.Join("..", "deploy", "dwiaudit.example.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	if d := Default(); c.Reports != d.Reports {
		t.Errorf("reports: example %+v, defaults %+v", c.Reports, d.Reports)
	}
	if d := Default().Reports; d.DailyAt != TimeOfDay(6*time.Hour) || report.PatientIDMode(d.PatientID) != report.PatientIDMasked || d.BaseURL != "" {
		t.Errorf("defaults %+v, want 06:00, masked, relative links", d)
	}
}

func TestTheReportsSectionParsesAndListsEveryProblem(t *testing.T) {
	for _, c := range []struct {
		name, yaml string
		problems   []string
	}{
		{"good values", "reports: {daily_at: \"23:30\", patient_id: hidden, base_url: \"https://dwiaudit.quellvander.example/\"}", nil},
		{"a path base", "reports: {base_url: /dwiaudit}", nil},
		{"every problem at once",
			"reports:\n  daily_at: \"25:00\"\n  patient_id: partial\n  base_url: \"ftp://x\"\n",
			[]string{
				"reports.daily_at: cannot use `25:00`: not a time of day HH:MM (00:00 to 23:59) (line 2)",
				"reports.patient_id: cannot use `partial`: not a patient ID mode: use masked, full or hidden (line 3)",
				`reports.base_url: "ftp://x": use an http(s) URL`,
			}},
		{"a base with a query", "reports: {base_url: \"https://h.example/?a=1\"}", []string{"reports.base_url: \"https://h.example/?a=1\": a base URL takes no query or fragment"}},
		{"an unknown key", "reports:\n  daily: \"06:00\"\n", []string{"reports.daily: unknown field (line 2)"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, err := Parse("test.yaml", []byte(c.yaml))
			if len(c.problems) == 0 {
				if err != nil {
					t.Fatalf("refused: %v", err)
				}
				return
			}
			if err == nil {
				t.Fatal("accepted")
			}
			for _, p := range c.problems {
				if !strings.Contains(err.Error(), p) {
					t.Errorf("missing %q in:\n%v", p, err)
				}
			}
		})
	}
	t.Run("values decode", func(t *testing.T) {
		cfg, err := Parse("test.yaml", []byte("reports: {daily_at: \"07:45\", patient_id: full}"))
		if err != nil {
			t.Fatal(err)
		}
		if cfg.Reports.DailyAt != TimeOfDay(7*time.Hour+45*time.Minute) || report.PatientIDMode(cfg.Reports.PatientID) != report.PatientIDFull {
			t.Errorf("%+v", cfg.Reports)
		}
	})
}
