package rules

import (
	"regexp"
	"strings"

	"dwiaudit/audit/dwi"
)

// Match selects series by their headers. A series matches when any
// pattern of any non-empty list matches. Patterns are Go regular
// expressions (RE2 syntax) searched for anywhere in the attribute value:
// "DWI" matches "ep2d DWI tra"; anchor with ^ and $ to match the whole
// value. Body parts are compared with Body Part Examined (0018,0015) as
// whole values, case-insensitively.
//
// Body Part Examined also vetoes: when BodyPart is non-empty and the
// series says a body part that is not in it, the series does not match
// by its description or protocol name either. A pelvis series described
// "DWI" is not a brain series, whatever its description says; a series
// without Body Part Examined is matched on its description alone.
//
// An empty Match matches nothing (Validate reports it).
type Match struct {
	SeriesDescription []string `yaml:"series_description"`
	ProtocolName      []string `yaml:"protocol_name"`
	BodyPart          []string `yaml:"body_part"` // Body Part Examined (0018,0015), compared case-insensitively

	// compiled holds SeriesDescription's patterns, then ProtocolName's;
	// filled by Config.Validate. Matching without it compiles on the
	// fly.
	compiled []*regexp.Regexp
}

// Protocol is what the department expects of a diffusion series it
// matches.
type Protocol struct {
	Name  string `yaml:"name"`
	Match Match  `yaml:"match"`
	// BValues are the expected nominal b-values, s/mm², ascending.
	// BTolerance is the allowed difference in s/mm²; the tolerance at b
	// is max(BTolerance, thresholds.bvalue_mismatch.relative_tolerance*b),
	// the same form as the assembly's (dwi.DefaultTolerances). Zero
	// means DefaultBTolerance (docs/references.md#bvalue-tolerance: a nominal 900 seen as 895-905,
	// common practice).
	BValues    []float64 `yaml:"bvalues"`
	BTolerance float64   `yaml:"bvalue_tolerance"`
	// LowestB is the b-value that counts as "b0" for this protocol (0;
	// body protocols often use 50 to suppress perfusion, docs/references.md#ivim).
	LowestB float64 `yaml:"lowest_b"`
	// MinDirections is the least number of gradient directions per
	// diffusion-weighted b-value; 0 checks nothing.
	MinDirections int `yaml:"min_directions"`
	// ParenchymaADC is the expected range of the tissue median ADC,
	// mm²/s; [0, 0] checks nothing. Head says the CSF/free-water check
	// applies (the series images a head, whose CSF is an internal
	// free-water reference).
	ParenchymaADC [2]float64 `yaml:"parenchyma_adc"`
	Head          bool       `yaml:"head"`
}

// PhantomProfile is a test object with a known ADC (docs/references.md#ice-water-phantom: ice water
// 1.10e-3 mm²/s at 0 °C, QIBA; Malyarenko et al. 2013).
type PhantomProfile struct {
	Name        string  `yaml:"name"`
	Match       Match   `yaml:"match"`
	ExpectedADC float64 `yaml:"expected_adc"` // mm²/s
	Tolerance   float64 `yaml:"tolerance"`    // relative, e.g. 0.036
}

// RuleSettings switch a rule off or override the severity of its
// findings.
type RuleSettings struct {
	Enabled  *bool     `yaml:"enabled"`
	Severity *Severity `yaml:"severity"`
}

// Config is everything the rules read. Protocols and phantom profiles
// are tried in order, the first match wins; a series matched by a
// phantom profile is judged as a phantom, not against any protocol.
type Config struct {
	Protocols []Protocol              `yaml:"protocols"`
	Phantoms  []PhantomProfile        `yaml:"phantoms"`
	Rules     map[string]RuleSettings `yaml:"rules"`
	// Thresholds of the individual rules, with defaults from docs/references.md.
	Thresholds Thresholds `yaml:"thresholds"`
}

// Thresholds are the numbers each rule compares against, one section
// per rule. Every default in DefaultConfig names its source.
type Thresholds struct {
	MissingB0      MissingB0Thresholds      `yaml:"missing_b0"`
	BValueMismatch BValueMismatchThresholds `yaml:"bvalue_mismatch"`
	ADCOutOfRange  ADCRangeThresholds       `yaml:"adc_out_of_range"`
	LowSNR         LowSNRThresholds         `yaml:"low_snr"`
	ScannerADC     ScannerADCThresholds     `yaml:"scanner_adc_disagrees"`
	PhantomADC     PhantomADCThresholds     `yaml:"phantom_adc_bias"`
	// Hotspot is rule b0-only-hotspot's (hotspot.go).
	Hotspot HotspotThresholds `yaml:"b0_only_hotspot"`
}

// MissingB0Thresholds: rule missing-b0.
type MissingB0Thresholds struct {
	// UnmatchedMaxB (s/mm²) is, for a series no protocol matches, the
	// largest b-value accepted as its b0.
	UnmatchedMaxB float64 `yaml:"unmatched_max_b"`
}

// BValueMismatchThresholds: rule bvalue-mismatch.
type BValueMismatchThresholds struct {
	// RelativeTolerance is the part of b allowed as difference, beside a
	// protocol's absolute bvalue_tolerance (the larger counts).
	RelativeTolerance float64 `yaml:"relative_tolerance"`
}

// ADCRangeThresholds: rule adc-out-of-range (the parenchyma range is
// the protocol's).
type ADCRangeThresholds struct {
	// FreeWaterADC is free water at body temperature, mm²/s, which CSF
	// in a head series should be near; CSFTolerance the relative
	// difference allowed.
	FreeWaterADC float64 `yaml:"free_water_adc"`
	CSFTolerance float64 `yaml:"csf_tolerance"`
	// MinCSFShare is the least share of the tissue mask outside
	// parenchyma for the CSF ADC to be judged: the CSF ADC is a high
	// percentile of the mask (analysis.AnalyzeConfig.CSFPercentile), and
	// lies in CSF only when CSF is a larger share than the percentile
	// leaves above it.
	MinCSFShare float64 `yaml:"min_csf_share"`
	// MaxFractionAboveFreeWater and MaxFractionNegative are the largest
	// shares of tissue voxels allowed above the free-water ceiling
	// (analysis.AnalyzeConfig.FreeWaterCeiling) and below zero.
	MaxFractionAboveFreeWater float64 `yaml:"max_fraction_above_free_water"`
	MaxFractionNegative       float64 `yaml:"max_fraction_negative"`
}

// LowSNRThresholds: rule low-snr.
type LowSNRThresholds struct {
	MinB0SNR    float64 `yaml:"min_b0_snr"`     // median parenchyma b0 signal over noise σ
	MinHighBSNR float64 `yaml:"min_high_b_snr"` // the same at the highest b-value
}

// ScannerADCThresholds: rule scanner-adc-disagrees.
type ScannerADCThresholds struct {
	// Tolerance is the relative difference allowed between the median
	// of scanner/recomputed ADC ratios and 1.
	Tolerance float64 `yaml:"tolerance"`
	// DefaultUnits are the units of a scanner ADC map's pixel values
	// when it has no Real World Value Mapping in units of a diffusion
	// coefficient: "mm2/s", "um2/s" or "10-6.mm2/s" (UCUM, as in
	// (0040,08EA); docs/references.md#real-world-value-mapping).
	DefaultUnits string `yaml:"default_units"`
	// MinVoxels is the least number of tissue voxels where both maps
	// have a value for the comparison to be made.
	MinVoxels int `yaml:"min_voxels"`
}

// PhantomADCThresholds: rule phantom-adc-bias (the expected ADC and its
// tolerance are the phantom profile's).
type PhantomADCThresholds struct {
	// ROIRadiusMM is the radius of the central region: the sphere
	// around the centre of the phantom's tissue mask whose median ADC is
	// judged.
	ROIRadiusMM float64 `yaml:"roi_radius_mm"`
	// MinVoxels is the least number of voxels in that region.
	MinVoxels int `yaml:"min_voxels"`
}

// DefaultBTolerance is the absolute b-value tolerance of a protocol
// that gives none, s/mm²: stored b-values differ slightly from the
// nominal, a nominal 900 seen as 895-905 (docs/references.md#bvalue-tolerance, common practice);
// the same absolute floor as dwi.DefaultTolerances.
const DefaultBTolerance = 5

// DefaultConfig returns the shipped configuration, a fresh value each
// call:
//
//   - protocol "prostate (example)": b 50, 800, 1400 with b = 50 as the
//     lowest (docs/references.md#ivim); matched on Body Part Examined PROSTATE or
//     "prostat" in the series description or protocol name. It comes
//     before the brain protocol because the first match wins and the
//     brain protocol matches any description containing DWI.
//   - protocol "brain": b 0 and 1000 (docs/references.md#typical-b-values: typical brain DWI,
//     common practice); matched on Body Part Examined BRAIN or HEAD, or a
//     series description containing DWI or DIFF (case-insensitive).
//   - phantom "ice water": 1.10e-3 mm²/s, ±3.6%; matched on ice water
//     (ice-water, icewater, ...) in the series description or protocol
//     name, case-insensitive.
//   - every rule enabled at its own severities; thresholds as commented.
func DefaultConfig() *Config {
	return &Config{
		Protocols: []Protocol{
			{
				Name: "prostate (example)",
				Match: Match{
					BodyPart:          []string{"PROSTATE"},
					SeriesDescription: []string{`(?i)prostat`},
					ProtocolName:      []string{`(?i)prostat`},
				},
				// b 50/800/1400: docs/references.md#typical-b-values, prostate high b 1400-2000
				// (common practice) and b = 50 instead of 0 against
				// perfusion (Eur Radiol 2010, doi 10.1007/s00330-010-2017-y).
				BValues:    []float64{50, 800, 1400},
				BTolerance: DefaultBTolerance,
				LowestB:    50,
				// Three orthogonal directions give a rotationally
				// invariant trace (Basser & Pierpaoli, docs/references.md#basser-pierpaoli).
				MinDirections: 3,
				// Jafar et al., World J Radiol 2016;8:21 (docs/references.md#jafar-2016):
				// median prostate ADC 1.31e-3 (central) and 1.64e-3
				// (peripheral zone). Widened by a quarter each way, the
				// lower median less 25% and the higher plus 25%, rounded
				// to 0.1e-3: 0.98 -> 1.0e-3 and 2.05 -> 2.0e-3. The
				// review pools many b-value sets (ADC falls as b rises,
				// DeLano et al., AJNR 2000;21:1830) and a whole-gland
				// median mixes the zones.
				ParenchymaADC: [2]float64{1.0e-3, 2.0e-3},
				Head:          false,
			},
			{
				Name: "brain",
				Match: Match{
					BodyPart:          []string{"BRAIN", "HEAD"},
					SeriesDescription: []string{`(?i)DWI`, `(?i)DIFF`},
				},
				// docs/references.md#typical-b-values: typical brain DWI b = 1000 (common
				// practice), b0 as reference.
				BValues:       []float64{0, 1000},
				BTolerance:    DefaultBTolerance,
				LowestB:       0,
				MinDirections: 3, // rotationally invariant trace (Basser & Pierpaoli, docs/references.md#basser-pierpaoli)
				// docs/references.md#parenchyma-range: brain parenchyma median ADC roughly
				// 0.6-1.1e-3 mm²/s, Helenius et al. (AJNR 2002;23:194)
				// ranges (white matter 0.62-0.79, cortical grey
				// 0.78-1.09) widened for age and field.
				ParenchymaADC: [2]float64{0.6e-3, 1.1e-3},
				Head:          true,
			},
		},
		Phantoms: []PhantomProfile{
			{
				Name: "ice water",
				Match: Match{
					SeriesDescription: []string{`(?i)ice.?water`},
					ProtocolName:      []string{`(?i)ice.?water`},
				},
				// 1.10e-3 mm²/s at 0 °C, isocentre: QIBA DWI profile;
				// Malyarenko et al., JMRI 2013;37:1238 (docs/references.md#malyarenko-2013).
				ExpectedADC: 1.10e-3,
				// ±3.6%: QIBA phantom bias tolerance, from memory, not
				// verified (docs/references.md#phantom-tolerance).
				Tolerance: 0.036,
			},
		},
		Thresholds: Thresholds{
			MissingB0: MissingB0Thresholds{
				// Perfusion (IVIM) acts below about 200 s/mm², so a
				// lowest b-value up to 200 can still serve as the
				// reference (Eur Radiol 2010, doi
				// 10.1007/s00330-010-2017-y; docs/references.md#eur-radiol-2010-ivim); the same limit
				// as analysis.DefaultAnalyzeConfig's ReferenceBMax.
				UnmatchedMaxB: 200,
			},
			BValueMismatch: BValueMismatchThresholds{
				// 2% of b, as dwi.DefaultTolerances: three times the
				// ±5 spread of a nominal 900 (docs/references.md#bvalue-tolerance, common
				// practice) and far below the relative step between
				// high b-values in use (800/1000: 20%; common
				// practice).
				RelativeTolerance: 0.02,
			},
			ADCOutOfRange: ADCRangeThresholds{
				// Free water at 37 °C: 3.04e-3 from the Holz, Heil &
				// Sacco fit (PCCP 2000;2:4740; docs/references.md#holz-2000), 3.0e-3 as
				// the issue and docs/references.md#csf-reference ("about 3e-3") round it.
				FreeWaterADC: 3.0e-3,
				// ±15% (inference): room for the 5% between free water
				// at 37 °C and the CSF histogram peak (3.2e-3, AJNR
				// 2000;21:1078; docs/references.md#csf-histogram-ajnr-2000) and for partial volume,
				// while a header b-value 1/0.85 or more times the
				// applied one (ADC scales as b_applied/b_header,
				// the mono-exponential model in docs/references.md#mono-exponential) still shows.
				CSFTolerance: 0.15,
				// The analysis takes the 95th percentile
				// (analysis.DefaultAnalyzeConfig), which lies in CSF
				// when more than 5% of the mask is not parenchyma; 6%
				// keeps it off the partial-volume edge of the CSF
				// (inference; on the synthetic brain the percentile
				// drops from 2.9e-3 to 0.9e-3 when the share falls below
				// 5%, at coarse matrices).
				MinCSFShare: 0.06,
				// No tissue diffuses faster than free water at body
				// temperature (docs/references.md#free-water-ceiling): 2% (inference) is ten times
				// what noise alone puts there at b0 SNR 4 (0.2% on the
				// low-snr phantom) and below the CSF's own share of
				// the mask (5-10%), so a header b-value too low lifts
				// the CSF over the ceiling and shows.
				MaxFractionAboveFreeWater: 0.02,
				// Negative ADC (Sb > S0) beyond noise is a defect
				// (docs/references.md#free-water-ceiling): 5% (inference) is twice the 2.5% noise
				// gives at b0 SNR 4 (the low-snr phantom), while b0
				// and DWI swapped or scaled apart turn most voxels
				// negative.
				MaxFractionNegative: 0.05,
			},
			LowSNR: LowSNRThresholds{
				// 10 (inference): the two-point ADC's noise is about
				// (1/b)·sqrt(1/SNR0² + 1/SNRb²) (propagation through
				// ln(S0/Sb)/b, the model in docs/references.md#mono-exponential); at b0 SNR 10, white
				// matter at b = 1000 has SNR 5 and a voxel's ADC
				// scatters by 0.22e-3 mm²/s, a third of its value
				// (0.70e-3, Helenius 2002).
				MinB0SNR: 10,
				// Rician bias: magnitude images are biased when SNR <
				// 2-3 (Gudbjartsson & Patz, MRM 1995;34:910); docs/references.md#gudbjartsson-patz-1995
				// says flag tissue whose high-b SNR is below about 3
				// (inference).
				MinHighBSNR: 3,
			},
			ScannerADC: ScannerADCThresholds{
				// 8%: the change worth reporting in brain ADC at 95%
				// confidence (QIBA profile review, Radiology 2024;
				// docs/references.md#qiba-review-2024). A scanner map closer than that to the
				// recomputed one reads the same to a radiologist.
				Tolerance: 0.08,
				// Scanners commonly store ADC maps as integers in
				// 10^-6 mm²/s (common practice); the phantom's map
				// does too (audit/phantom).
				DefaultUnits: "10-6.mm2/s",
				// 100 voxels (inference): the median of fewer is at
				// the mercy of a few edge voxels.
				MinVoxels: 100,
			},
			PhantomADC: PhantomADCThresholds{
				// 15 mm (inference): the QIBA value is at isocentre
				// (docs/references.md#ice-water-phantom); gradient nonlinearity biases ADC away
				// from it (Malyarenko 2013), so a small central region,
				// still hundreds of voxels at 4 mm pixels and 5 mm
				// slices.
				ROIRadiusMM: 15,
				MinVoxels:   30, // inference: a median of fewer is noise-dominated at SNR 20
			},
			Hotspot: DefaultHotspotThresholds(), // sources beside each field, hotspot.go
		},
	}
}

// MatchProtocol is the first protocol that matches s, nil when none
// does. It does not look at phantom profiles: use MatchPhantom first
// (NewSeriesAudit does), since a phantom is judged as a phantom.
func (c *Config) MatchProtocol(s *dwi.Series) *Protocol {
	if c == nil || s == nil {
		return nil
	}
	for i := range c.Protocols {
		if c.Protocols[i].Match.matches(s) {
			return &c.Protocols[i]
		}
	}
	return nil
}

// MatchPhantom is the first phantom profile that matches s, nil when
// none does.
func (c *Config) MatchPhantom(s *dwi.Series) *PhantomProfile {
	if c == nil || s == nil {
		return nil
	}
	for i := range c.Phantoms {
		if c.Phantoms[i].Match.matches(s) {
			return &c.Phantoms[i]
		}
	}
	return nil
}

// Enabled says whether the rule with this ID runs: every rule does
// unless rules.<id>.enabled is false.
func (c *Config) Enabled(ruleID string) bool {
	if c == nil {
		return true
	}
	st, ok := c.Rules[ruleID]
	return !ok || st.Enabled == nil || *st.Enabled
}

// Apply returns the findings with the configured severity overrides
// (rules.<id>.severity) applied; fs is not changed. Applying twice gives
// the same result.
func Apply(c *Config, fs []Finding) []Finding {
	out := make([]Finding, len(fs))
	copy(out, fs)
	if c == nil {
		return out
	}
	for i := range out {
		if st, ok := c.Rules[out[i].Rule]; ok && st.Severity != nil {
			out[i].Severity = *st.Severity
		}
	}
	return out
}

// empty reports whether m has no pattern and no body part.
func (m *Match) empty() bool {
	return len(m.SeriesDescription) == 0 && len(m.ProtocolName) == 0 && len(m.BodyPart) == 0
}

// patterns compiles m's patterns (SeriesDescription's, then
// ProtocolName's), or returns those Validate compiled. A pattern that
// does not compile matches nothing here; Validate reports it.
func (m *Match) patterns() []*regexp.Regexp {
	if n := len(m.SeriesDescription) + len(m.ProtocolName); len(m.compiled) == n {
		return m.compiled
	}
	var out []*regexp.Regexp
	for _, p := range append(append([]string(nil), m.SeriesDescription...), m.ProtocolName...) {
		re, err := regexp.Compile(p)
		if err != nil {
			re = nil
		}
		out = append(out, re)
	}
	return out
}

// matches applies m to a series (see Match).
func (m *Match) matches(s *dwi.Series) bool {
	body := strings.TrimSpace(s.BodyPartExamined)
	if len(m.BodyPart) > 0 && body != "" {
		for _, want := range m.BodyPart {
			if strings.EqualFold(strings.TrimSpace(want), body) {
				return true
			}
		}
		return false // the veto: another body part
	}
	res := m.patterns()
	for i, re := range res {
		if re == nil {
			continue
		}
		value := s.SeriesDescription
		if i >= len(m.SeriesDescription) {
			value = s.ProtocolName
		}
		if re.MatchString(value) {
			return true
		}
	}
	return false
}
