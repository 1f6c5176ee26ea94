package rules_test

import (
	"errors"
	"math"
	"strings"
	"testing"

	"go.yaml.in/yaml/v3"

	"dwiaudit/audit/dwi"
	"dwiaudit/rules"
)

func TestDefaultConfigIsValidAndFresh(t *testing.T) {
	a, b := rules.DefaultConfig(), rules.DefaultConfig()
	if err := a.Validate(); err != nil {
		t.Fatalf("the shipped configuration does not validate: %v", err)
	}
	a.Protocols[0].BValues[0] = 7
	a.Thresholds.LowSNR.MinB0SNR = 99
	if b.Protocols[0].BValues[0] == 7 || b.Thresholds.LowSNR.MinB0SNR == 99 {
		t.Error("DefaultConfig values share memory: changing one changed another")
	}
}

func TestDefaultConfigHoldsTheDocumentedValues(t *testing.T) {
	c := rules.DefaultConfig()
	brain := protocolNamed(t, c, "brain")
	// docs/references.md#typical-b-values: typical brain DWI b = 1000 (common practice); parenchyma
	// 0.6-1.1e-3 mm²/s (Helenius 2002 ranges widened).
	if got := brain.BValues; len(got) != 2 || got[0] != 0 || got[1] != 1000 || brain.LowestB != 0 || brain.MinDirections != 3 || !brain.Head {
		t.Errorf("brain protocol %+v", brain)
	}
	if brain.ParenchymaADC != [2]float64{0.6e-3, 1.1e-3} { // docs/references.md#physiological-sanity
		t.Errorf("brain parenchyma range %v", brain.ParenchymaADC)
	}
	body := protocolNamed(t, c, "prostate (example)")
	// Issue 5: b 50, 800, 1400 with b = 50 lowest (docs/references.md#ivim); the
	// range is Jafar 2016's prostate medians 1.31/1.64e-3 widened by a
	// quarter (config.go).
	if got := body.BValues; len(got) != 3 || got[0] != 50 || got[1] != 800 || got[2] != 1400 || body.LowestB != 50 || body.Head {
		t.Errorf("prostate protocol %+v", body)
	}
	// Rounded to 0.1e-3: within 0.05e-3 of 0.75·1.31e-3 and 1.25·1.64e-3.
	if r := body.ParenchymaADC; math.Abs(r[0]-0.75*1.31e-3) > 0.05e-3+1e-12 || math.Abs(r[1]-1.25*1.64e-3) > 0.05e-3+1e-12 {
		t.Errorf("prostate range %v does not hold Jafar 2016's medians widened by a quarter", r)
	}
	if len(c.Phantoms) != 1 {
		t.Fatalf("%d phantom profiles, want the ice-water one", len(c.Phantoms))
	}
	ice := c.Phantoms[0]
	// QIBA DWI profile: 1.10e-3 mm²/s at 0 °C; ±3.6% from memory, not
	// verified (docs/references.md#phantom-tolerance).
	if ice.ExpectedADC != 1.10e-3 || ice.Tolerance != 0.036 {
		t.Errorf("ice-water profile %+v", ice)
	}
	th := c.Thresholds
	if th.ADCOutOfRange.FreeWaterADC != 3.0e-3 { // Holz 2000 at 37 °C, as issue 5 rounds it
		t.Errorf("free water %v", th.ADCOutOfRange.FreeWaterADC)
	}
	if th.LowSNR.MinHighBSNR != 3 { // docs/references.md#rician-floor: flag high-b SNR below about 3 (Gudbjartsson & Patz 1995)
		t.Errorf("high-b SNR limit %v", th.LowSNR.MinHighBSNR)
	}
	if th.ScannerADC.Tolerance != 0.08 { // docs/references.md#qiba-review-2024: > 8% is the change worth reporting (QIBA review, Radiology 2024)
		t.Errorf("scanner ADC tolerance %v", th.ScannerADC.Tolerance)
	}
}

func protocolNamed(t *testing.T, c *rules.Config, name string) *rules.Protocol {
	t.Helper()
	for i := range c.Protocols {
		if c.Protocols[i].Name == name {
			return &c.Protocols[i]
		}
	}
	t.Fatalf("no protocol %q", name)
	return nil
}

func TestValidateNamesEveryProblemByItsField(t *testing.T) {
	c := rules.DefaultConfig()
	c.Protocols = append(c.Protocols,
		rules.Protocol{Name: "empty b-values", Match: rules.Match{SeriesDescription: []string{"x"}}},
		rules.Protocol{Name: "", Match: rules.Match{SeriesDescription: []string{"(unclosed"}}, BValues: []float64{0, 1000, 800},
			LowestB: 50, BTolerance: -1, MinDirections: -2, ParenchymaADC: [2]float64{1.1e-3, 0.6e-3}},
		rules.Protocol{Name: "units slip", Match: rules.Match{}, BValues: []float64{0, 1000}, ParenchymaADC: [2]float64{0.6, 1.1}},
	)
	c.Phantoms[0].Tolerance = 3.6
	c.Phantoms[0].Match.ProtocolName = append(c.Phantoms[0].Match.ProtocolName, "[z-a]")
	sev := rules.Severity(9)
	c.Rules = map[string]rules.RuleSettings{"no-such-rule": {}, rules.IDLowSNR: {Severity: &sev}}
	c.Thresholds.LowSNR.MinB0SNR = 0
	c.Thresholds.ScannerADC.DefaultUnits = "furlongs"
	c.Thresholds.Hotspot.WindowMM = 0

	err := c.Validate()
	if !errors.Is(err, rules.ErrInvalidConfig) {
		t.Fatalf("Validate = %v, want ErrInvalidConfig", err)
	}
	for _, want := range []string{
		"protocols[2].bvalues: empty",
		"protocols[3].name: empty",
		"protocols[3].match.series_description[0]: error parsing regexp",
		"protocols[3].bvalues[2]: 800 does not ascend",
		"protocols[3].bvalue_tolerance",
		"protocols[3].lowest_b: 50 is not one of bvalues",
		"protocols[3].min_directions",
		"protocols[3].parenchyma_adc: reversed",
		"protocols[4].match: empty",
		"protocols[4].parenchyma_adc[0]: 0.6 is not an ADC in mm²/s",
		"phantoms[0].tolerance",
		"phantoms[0].match.protocol_name[1]: error parsing regexp",
		"rules.no-such-rule: unknown rule",
		"rules.low-snr.severity",
		"thresholds.low_snr.min_b0_snr",
		"thresholds.scanner_adc_disagrees.default_units",
		"thresholds.b0_only_hotspot.window_mm",
	} {
		if !strings.Contains(err.Error(), want) {
			t.Errorf("Validate does not report %q; it says:\n%v", want, err)
		}
	}
}

func TestUnknownRuleMessageListsTheKnownOnes(t *testing.T) {
	c := rules.DefaultConfig()
	c.Rules = map[string]rules.RuleSettings{"missing_b0": {}}
	err := c.Validate()
	for _, id := range []string{rules.IDMissingB0, rules.HotspotID, rules.IDAuditFailed, rules.IDPhantomADCBias} {
		if err == nil || !strings.Contains(err.Error(), id) {
			t.Errorf("the message %v does not list %s", err, id)
		}
	}
}

func TestSeriesMatchTheRightProtocolOrPhantom(t *testing.T) {
	c := rules.DefaultConfig()
	if err := c.Validate(); err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		name                   string
		desc, protocol, body   string
		wantProtocol, wantPhan string
	}{
		{"a series with body part BRAIN is a brain series", "ax t2 whatever", "", "BRAIN", "brain", ""},
		{"body part head matches case-insensitively", "", "", "head", "brain", ""},
		{"a description containing DWI matches brain when no body part is given", "ep2d DWI tra", "", "", "brain", ""},
		{"a description containing diff matches brain", "ep2d_diff_3scan", "", "", "brain", ""},
		{"a prostate series matches the prostate example first", "DWI prostate", "", "", "prostate (example)", ""},
		{"body part PROSTATE matches the prostate example", "resolve", "", "PROSTATE", "prostate (example)", ""},
		{"a pelvis series described DWI is vetoed from brain by its body part", "DWI pelvis", "", "PELVIS", "", ""},
		{"a series with nothing diffusion-like matches nothing", "t2 tse sag", "", "", "", ""},
		{"ice water in the protocol name is the phantom, not the brain", "DWI b0 b1000 3dir", "QA ice-water DWI", "HEAD", "", "ice water"},
		{"icewater in the description is the phantom", "ICEWATER qa", "", "", "", "ice water"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			s := &dwi.Series{SeriesDescription: tc.desc, ProtocolName: tc.protocol, BodyPartExamined: tc.body}
			sa := rules.NewSeriesAudit(c, s, nil, nil)
			gotP, gotF := "", ""
			if sa.Protocol != nil {
				gotP = sa.Protocol.Name
			}
			if sa.Phantom != nil {
				gotF = sa.Phantom.Name
			}
			if gotP != tc.wantProtocol || gotF != tc.wantPhan {
				t.Errorf("protocol %q phantom %q, want %q %q", gotP, gotF, tc.wantProtocol, tc.wantPhan)
			}
		})
	}
}

func TestMatchingWorksWithoutValidate(t *testing.T) {
	c := rules.DefaultConfig() // not validated: patterns compile on the fly
	if p := c.MatchProtocol(&dwi.Series{SeriesDescription: "DWI"}); p == nil || p.Name != "brain" {
		t.Errorf("MatchProtocol = %v, want brain", p)
	}
}

func TestEnabledAndApplyFollowTheRulesSection(t *testing.T) {
	off, errSev := false, rules.SeverityError
	c := rules.DefaultConfig()
	c.Rules = map[string]rules.RuleSettings{
		rules.IDLowSNR:           {Enabled: &off},
		rules.IDIncompleteSeries: {Severity: &errSev},
	}
	if c.Enabled(rules.IDLowSNR) || !c.Enabled(rules.IDMissingB0) || !c.Enabled(rules.IDIncompleteSeries) {
		t.Error("Enabled does not follow rules.<id>.enabled (absent means on)")
	}
	in := []rules.Finding{{Rule: rules.IDIncompleteSeries, Severity: rules.SeverityWarning}, {Rule: rules.IDMissingB0, Severity: rules.SeverityError}}
	out := rules.Apply(c, in)
	if out[0].Severity != rules.SeverityError || out[1].Severity != rules.SeverityError {
		t.Errorf("Apply gave %v and %v", out[0].Severity, out[1].Severity)
	}
	if in[0].Severity != rules.SeverityWarning {
		t.Error("Apply changed its input")
	}
}

func TestTheYAMLKeysAreTheDocumentedOnes(t *testing.T) {
	c := rules.DefaultConfig()
	doc := `
protocols:
  - name: knee
    match: {series_description: ["(?i)knee"], body_part: [KNEE]}
    bvalues: [0, 600]
    bvalue_tolerance: 10
    lowest_b: 0
    min_directions: 3
    parenchyma_adc: [0.0010, 0.0020]
rules:
  low-snr: {enabled: false}
  incomplete-series: {severity: error}
thresholds:
  low_snr: {min_b0_snr: 12}
  phantom_adc_bias: {roi_radius_mm: 20}
`
	if err := yaml.Unmarshal([]byte(doc), c); err != nil {
		t.Fatal(err)
	}
	if err := c.Validate(); err != nil {
		t.Fatal(err)
	}
	p := c.Protocols[0]
	if p.Name != "knee" || p.BTolerance != 10 || p.ParenchymaADC[1] != 0.002 || p.Match.BodyPart[0] != "KNEE" {
		t.Errorf("protocol %+v", p)
	}
	if c.Enabled(rules.IDLowSNR) || *c.Rules[rules.IDIncompleteSeries].Severity != rules.SeverityError {
		t.Errorf("rules section %+v", c.Rules)
	}
	th := c.Thresholds
	if th.LowSNR.MinB0SNR != 12 || th.PhantomADC.ROIRadiusMM != 20 || th.LowSNR.MinHighBSNR != 3 {
		t.Errorf("thresholds %+v: the file's values, the defaults elsewhere", th)
	}
}
