package main

import (
	"errors"
	"os"
	"path/filepath"
	"reflect"
	"slices"
	"strings"
	"testing"
	"time"

	"dwiaudit/audit/header"
	"dwiaudit/rules"
)

func TestDefaultAuditConfigIsTheRulesDefaults(t *testing.T) {
	a := DefaultAuditConfig()
	if a.Settle != Duration(30*time.Second) || a.Workers != 2 {
		t.Errorf("settle %v, workers %d; want 30s (issue 5) and 2", a.Settle, a.Workers)
	}
	if got, want := a.RulesConfig(), rules.DefaultConfig(); !reflect.DeepEqual(got, want) {
		t.Errorf("RulesConfig() of the defaults differs from rules.DefaultConfig():\n got %+v\nwant %+v", got, want)
	}
	var p problems
	a.validate(&p)
	if len(p) != 0 {
		t.Errorf("the default audit section has problems: %v", p)
	}
	a.Protocols[0].BValues[0] = 1
	a.Rules["x"] = RuleConfig{}
	if b := DefaultAuditConfig(); b.Protocols[0].BValues[0] == 1 || len(b.Rules) != 0 {
		t.Error("DefaultAuditConfig shares its lists or map between calls")
	}
}

func TestAuditSectionReplacesListsAndMergesTheRest(t *testing.T) {
	yaml := `audit:
  settle: 2s
  workers: 4
  protocols:
    - name: pelvis
      match: {body_part: [PELVIS], series_description: ["(?i)dwi"]}
      bvalues: [50, 400, 800]
      lowest_b: 50
      parenchyma_adc: [0.0008, 0.0018]
  rules:
    low-snr: {severity: info}
    scanner-adc-disagrees: {enabled: false}
  thresholds:
    low_snr: {min_b0_snr: 12}
  private_sources:
    - name: acme-b
      creator: ACME DIFFUSION 1
      group: "0x0019"
      element: 0C
      read: IS
      offset: 1e9
      gradient: {elements: ["0xBB", "0xBC", "0xBD"], read: DS, image_axes: true}
  analysis:
    csf_percentile: 90
`
	c, err := ParseConfig("node.yaml", []byte(yaml))
	if err != nil {
		t.Fatal(err)
	}
	a := c.Audit
	d := DefaultAuditConfig()
	if a.Settle != Duration(2*time.Second) || a.Workers != 4 {
		t.Errorf("settle %v workers %d", a.Settle, a.Workers)
	}
	if len(a.Protocols) != 1 || a.Protocols[0].Name != "pelvis" || !slices.Equal(a.Protocols[0].BValues, []float64{50, 400, 800}) {
		t.Errorf("protocols %+v: the list given must replace the defaults", a.Protocols)
	}
	if !reflect.DeepEqual(a.Phantoms, d.Phantoms) {
		t.Errorf("phantoms %+v: an absent list keeps the defaults", a.Phantoms)
	}
	rc := a.RulesConfig()
	if rc.Enabled(rules.IDScannerADCDisagrees) || !rc.Enabled(rules.IDLowSNR) || *rc.Rules[rules.IDLowSNR].Severity != rules.SeverityInfo {
		t.Errorf("rules %+v", rc.Rules)
	}
	wantT := d.Thresholds
	wantT.LowSNR.MinB0SNR = 12
	if !reflect.DeepEqual(a.Thresholds, wantT) {
		t.Errorf("thresholds %+v: only low_snr.min_b0_snr must change", a.Thresholds)
	}
	src := a.ExtractOptions().PrivateSources
	want := []header.PrivateSource{{Name: "acme-b", Creator: "ACME DIFFUSION 1", Group: 0x0019, Element: 0x0C, Read: header.ValueIS, Offset: 1e9,
		Gradient: &header.GradientSource{Element: []uint8{0xBB, 0xBC, 0xBD}, Read: header.ValueDS, ImageAxes: true}}}
	if !reflect.DeepEqual(src, want) {
		t.Errorf("private sources %+v, want %+v", src, want)
	}
	an := a.AnalyzeConfig()
	if an.CSFPercentile != 90 || an.ParenchymaADCMax != d.Analysis.ParenchymaADCMax || an.FreeWaterCeiling != d.Analysis.FreeWaterCeiling {
		t.Errorf("analysis %+v: only csf_percentile must change", an)
	}
	e, err := a.Engine(nil)
	if err != nil {
		t.Fatal(err)
	}
	if e.Workers != 4 || len(e.Rules) != len(rules.All()) || len(e.Extract.PrivateSources) != 1 {
		t.Errorf("engine workers %d, %d rules, %d private sources", e.Workers, len(e.Rules), len(e.Extract.PrivateSources))
	}
}

func TestAuditSectionProblemsNameTheirFields(t *testing.T) {
	yaml := `audit:
  settle: 100ms
  workers: 0
  protocols:
    - name: brain
      match: {series_description: ["(unclosed"]}
      bvalues: []
      parenchyma_adc: [0.0006, 0.0011, 0.002]
    - name: brain
      match: {body_part: [HEAD]}
      bvalues: [0, 1000]
      lowest_b: 50
      parenchyma_adc: [0.6, 1.1]
  phantoms:
    - name: ice
      match: {}
      expected_adc: 1.1
      tolerance: 0.036
  rules:
    missing-b0: {severity: loud}
    no-such-rule: {enabled: false}
  thresholds:
    low_snr: {min_b0_snr: -1, min_hi: 2}
  private_sources:
    - name: acme
      creator: ACME
      group: "0x0018"
      element: "0x10C"
      read: XX
      index: -1
      gradient: {elements: ["0x0D", "0x0E"]}
  analysis:
    csf_percentile: 0
`
	_, err := ParseConfig("node.yaml", []byte(yaml))
	var ce *ConfigError
	if !errors.As(err, &ce) {
		t.Fatalf("ParseConfig = %v, want a *ConfigError", err)
	}
	want := []string{
		"audit.rules.missing-b0.severity: cannot use `loud`: not a severity",
		"audit.thresholds.low_snr.min_hi: unknown field (line 23)",
		"audit.private_sources[0].element: cannot use `0x10C`",
		"audit.private_sources[0].read: cannot use `XX`",
		"audit.settle: 100ms is outside 1s..24h0m0s",
		"audit.workers: 0 is outside 1..64",
		"audit.protocols[0].parenchyma_adc: want [low, high] in mm²/s, got 3 value(s)",
		`audit.protocols[1].name: "brain" is also audit.protocols[0]'s name`,
		"audit.protocols[0].match.series_description[0]: ",
		"audit.protocols[0].bvalues: empty",
		"audit.protocols[1].lowest_b: 50 is not one of bvalues [0 1000]",
		"audit.protocols[1].parenchyma_adc[0]: 0.6 is not an ADC in mm²/s",
		"audit.protocols[1].parenchyma_adc[1]: 1.1 is not an ADC in mm²/s",
		"audit.phantoms[0].match: empty",
		"audit.phantoms[0].expected_adc: 1.1 is not an ADC in mm²/s",
		"audit.rules.no-such-rule: unknown rule (known: ",
		"audit.thresholds.low_snr.min_b0_snr: -1",
		"audit.private_sources[0].group: 0x0018 is not a private group", // PS3.5 7.8.1: private groups are odd
		"audit.private_sources[0].index: -1 is negative",
		"audit.private_sources[0].gradient.elements: 2 offsets",
		"audit.private_sources[0].gradient.read: missing",
		"audit.analysis.csf_percentile: 0 is outside (0, 100]",
	}
	if len(ce.Problems) != len(want) {
		t.Errorf("%d problems, want %d:\n  %s", len(ce.Problems), len(want), strings.Join(ce.Problems, "\n  "))
	}
	for i, w := range want {
		if i < len(ce.Problems) && !strings.HasPrefix(ce.Problems[i], w) {
			t.Errorf("problem %d is %q, want it to start %q", i, ce.Problems[i], w)
		}
	}
}

func TestHexNumbersReadWithOrWithout0x(t *testing.T) {
	for _, tt := range []struct{ group, element string }{{`"0x0019"`, `"0x0C"`}, {`"0019"`, `"0c"`}, {`0x0019`, `0x0C`}, {`"19"`, `"C"`}} {
		t.Run("group "+tt.group+" element "+tt.element, func(t *testing.T) {
			y := "audit:\n  private_sources:\n    - {name: a, creator: ACME, read: FD, group: " + tt.group + ", element: " + tt.element + "}\n"
			c, err := ParseConfig("x.yaml", []byte(y))
			if err != nil {
				t.Fatal(err)
			}
			if s := c.Audit.PrivateSources[0]; s.Group != 0x0019 || s.Element != 0x0C {
				t.Errorf("group %04X element %02X, want 0019 and 0C", uint16(s.Group), uint8(s.Element))
			}
		})
	}
}

func TestLoadAuditConfigFileIgnoresOtherSections(t *testing.T) {
	path := filepath.Join(t.TempDir(), "node.yaml")
	body := "node: {time_zone: Mars/Olympus}\nlimits: {max_assocations: 3}\naudit:\n  settle: 5s\n"
	if err := os.WriteFile(path, []byte(body), 0o644); err != nil {
		t.Fatal(err)
	}
	a, err := LoadAuditConfigFile(path)
	if err != nil {
		t.Fatalf("LoadAuditConfigFile = %v, want the other sections' problems ignored", err)
	}
	if a.Settle != Duration(5*time.Second) {
		t.Errorf("settle %v, want 5s", a.Settle)
	}
	if err := os.WriteFile(path, []byte(body+"  workers: 100\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	_, err = LoadAuditConfigFile(path)
	var ce *ConfigError
	if !errors.As(err, &ce) || len(ce.Problems) != 1 || !strings.HasPrefix(ce.Problems[0], "audit.workers:") {
		t.Errorf("LoadAuditConfigFile = %v, want audit.workers only", err)
	}
}

func TestExampleAuditSectionIsTheDefaultsAndItsCommentsParse(t *testing.T) {
	path := filepath.Join("..", "..", "deploy", "dwiaudit.example.yaml")
	c, err := LoadConfigFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if d := DefaultAuditConfig(); !reflect.DeepEqual(c.Audit, d) {
		t.Errorf("the example's audit section differs from DefaultAuditConfig:\n got %+v\nwant %+v", c.Audit, d)
	}
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	text := string(b)
	for _, r := range [][2]string{{"  rules: {}\n", "  rules:\n"}, {"  thresholds: {}\n", "  thresholds:\n"}, {"  private_sources: []\n", "  private_sources:\n"}} {
		text = strings.Replace(text, r[0], r[1], 1)
	}
	text = strings.ReplaceAll(text, "\n  #  ", "\n    ")
	c, err = ParseConfig(path, []byte(text))
	if err != nil {
		t.Fatalf("with the audit examples uncommented: %v", err)
	}
	a := c.Audit
	if len(a.PrivateSources) != 1 || a.PrivateSources[0].Group != 0x0019 || a.PrivateSources[0].Element != 0x0C || header.ValueKind(a.PrivateSources[0].Read) != header.ValueIS {
		t.Errorf("private sources %+v", a.PrivateSources)
	}
	if rc := a.RulesConfig(); rc.Enabled(rules.IDScannerADCDisagrees) || *rc.Rules[rules.IDLowSNR].Severity != rules.SeverityInfo {
		t.Errorf("rules %+v", rc.Rules)
	}
}
