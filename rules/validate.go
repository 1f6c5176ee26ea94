package rules

import (
	"errors"
	"fmt"
	"math"
	"regexp"
	"slices"
	"strings"
)

// maxPlausibleADC (mm²/s) bounds every configured ADC: free water at 37
// °C is 3.04e-3 (Holz 2000, docs/references.md#holz-2000) and nothing in a patient or a
// phantom diffuses much faster. A configured 0.6 where 0.6e-3 was meant
// (units of 1e-3 mm²/s) is caught by it.
const maxPlausibleADC = 5e-3

// Validate reports every problem of c at once, each naming its field by
// its YAML path (protocols[1].bvalues: empty), and compiles the match
// patterns for MatchProtocol and MatchPhantom. The errors wrap
// ErrInvalidConfig.
func (c *Config) Validate() error {
	var errs []error
	bad := func(path, format string, args ...any) {
		errs = append(errs, fmt.Errorf("%w: %s: %s", ErrInvalidConfig, path, fmt.Sprintf(format, args...)))
	}
	finite := func(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
	adcValue := func(path string, v float64) {
		if !finite(v) || v <= 0 || v > maxPlausibleADC {
			bad(path, "%v is not an ADC in mm²/s (0 < ADC <= %g)", v, maxPlausibleADC)
		}
	}
	fraction := func(path string, v float64) {
		if !finite(v) || v < 0 || v > 1 {
			bad(path, "%v is not a fraction between 0 and 1", v)
		}
	}
	positive := func(path string, v float64) {
		if !finite(v) || v <= 0 {
			bad(path, "%v, want a positive number", v)
		}
	}

	for i := range c.Protocols {
		p := &c.Protocols[i]
		at := fmt.Sprintf("protocols[%d]", i)
		if strings.TrimSpace(p.Name) == "" {
			bad(at+".name", "empty")
		}
		errs = append(errs, p.Match.compile(at+".match")...)
		if len(p.BValues) == 0 {
			bad(at+".bvalues", "empty")
		}
		for j, b := range p.BValues {
			switch {
			case !finite(b) || b < 0:
				bad(fmt.Sprintf("%s.bvalues[%d]", at, j), "%v is not a b-value in s/mm²", b)
			case j > 0 && b <= p.BValues[j-1]:
				bad(fmt.Sprintf("%s.bvalues[%d]", at, j), "%v does not ascend from %v", b, p.BValues[j-1])
			}
		}
		if !finite(p.BTolerance) || p.BTolerance < 0 {
			bad(at+".bvalue_tolerance", "%v, want >= 0 s/mm² (0 means %d)", p.BTolerance, DefaultBTolerance)
		}
		if !finite(p.LowestB) || p.LowestB < 0 {
			bad(at+".lowest_b", "%v is not a b-value in s/mm²", p.LowestB)
		} else if len(p.BValues) > 0 && !slices.ContainsFunc(p.BValues, func(b float64) bool {
			return math.Abs(b-p.LowestB) <= p.bTolerance(b, c.Thresholds.BValueMismatch.RelativeTolerance)
		}) {
			bad(at+".lowest_b", "%v is not one of bvalues %v", p.LowestB, p.BValues)
		}
		if p.MinDirections < 0 {
			bad(at+".min_directions", "%d, want >= 0", p.MinDirections)
		}
		if r := p.ParenchymaADC; r != [2]float64{} {
			adcValue(at+".parenchyma_adc[0]", r[0])
			adcValue(at+".parenchyma_adc[1]", r[1])
			if r[0] > r[1] {
				bad(at+".parenchyma_adc", "reversed: %g > %g", r[0], r[1])
			}
		}
	}

	for i := range c.Phantoms {
		p := &c.Phantoms[i]
		at := fmt.Sprintf("phantoms[%d]", i)
		if strings.TrimSpace(p.Name) == "" {
			bad(at+".name", "empty")
		}
		errs = append(errs, p.Match.compile(at+".match")...)
		adcValue(at+".expected_adc", p.ExpectedADC)
		if !finite(p.Tolerance) || p.Tolerance <= 0 || p.Tolerance >= 1 {
			bad(at+".tolerance", "%v, want a relative tolerance between 0 and 1 (0.036 for ±3.6%%)", p.Tolerance)
		}
	}

	known := knownRuleIDs()
	ids := make([]string, 0, len(c.Rules))
	for id := range c.Rules {
		ids = append(ids, id)
	}
	slices.Sort(ids) // one order for the messages
	for _, id := range ids {
		if !slices.Contains(known, id) {
			bad("rules."+id, "unknown rule (known: %s)", strings.Join(known, ", "))
			continue
		}
		if s := c.Rules[id].Severity; s != nil && (*s < SeverityInfo || *s > SeverityError) {
			bad("rules."+id+".severity", "%v, want info, warning or error", *s)
		}
	}

	t := &c.Thresholds
	if v := t.MissingB0.UnmatchedMaxB; !finite(v) || v < 0 {
		bad("thresholds.missing_b0.unmatched_max_b", "%v is not a b-value in s/mm²", v)
	}
	fraction("thresholds.bvalue_mismatch.relative_tolerance", t.BValueMismatch.RelativeTolerance)
	a := t.ADCOutOfRange
	adcValue("thresholds.adc_out_of_range.free_water_adc", a.FreeWaterADC)
	fraction("thresholds.adc_out_of_range.csf_tolerance", a.CSFTolerance)
	fraction("thresholds.adc_out_of_range.min_csf_share", a.MinCSFShare)
	fraction("thresholds.adc_out_of_range.max_fraction_above_free_water", a.MaxFractionAboveFreeWater)
	fraction("thresholds.adc_out_of_range.max_fraction_negative", a.MaxFractionNegative)
	positive("thresholds.low_snr.min_b0_snr", t.LowSNR.MinB0SNR)
	positive("thresholds.low_snr.min_high_b_snr", t.LowSNR.MinHighBSNR)
	s := t.ScannerADC
	if !finite(s.Tolerance) || s.Tolerance <= 0 || s.Tolerance >= 1 {
		bad("thresholds.scanner_adc_disagrees.tolerance", "%v, want a relative tolerance between 0 and 1", s.Tolerance)
	}
	if _, ok := unitScale(s.DefaultUnits); !ok {
		bad("thresholds.scanner_adc_disagrees.default_units", "%q, want mm2/s, um2/s or 10-6.mm2/s", s.DefaultUnits)
	}
	if s.MinVoxels < 1 {
		bad("thresholds.scanner_adc_disagrees.min_voxels", "%d, want >= 1", s.MinVoxels)
	}
	positive("thresholds.phantom_adc_bias.roi_radius_mm", t.PhantomADC.ROIRadiusMM)
	if t.PhantomADC.MinVoxels < 1 {
		bad("thresholds.phantom_adc_bias.min_voxels", "%d, want >= 1", t.PhantomADC.MinVoxels)
	}
	if err := t.Hotspot.Validate(); err != nil {
		// One error per problem, each already naming its key.
		list := []error{err}
		if j, ok := err.(interface{ Unwrap() []error }); ok {
			list = j.Unwrap()
		}
		for _, e := range list {
			errs = append(errs, fmt.Errorf("%w: %s", ErrInvalidConfig, strings.TrimPrefix(e.Error(), "rules: ")))
		}
	}
	return errors.Join(errs...)
}

// compile checks and compiles m's patterns, returning one error per
// problem, named under path.
func (m *Match) compile(path string) []error {
	var errs []error
	if m.empty() {
		return []error{fmt.Errorf("%w: %s: empty, matches no series", ErrInvalidConfig, path)}
	}
	m.compiled = nil
	for _, list := range []struct {
		name     string
		patterns []string
	}{{"series_description", m.SeriesDescription}, {"protocol_name", m.ProtocolName}} {
		for i, p := range list.patterns {
			re, err := regexp.Compile(p)
			if err != nil {
				errs = append(errs, fmt.Errorf("%w: %s.%s[%d]: %w", ErrInvalidConfig, path, list.name, i, err))
			}
			m.compiled = append(m.compiled, re) // nil for a bad one: it matches nothing
		}
	}
	for i, b := range m.BodyPart {
		if strings.TrimSpace(b) == "" {
			errs = append(errs, fmt.Errorf("%w: %s.body_part[%d]: empty", ErrInvalidConfig, path, i))
		}
	}
	return errs
}

// knownRuleIDs are the IDs rules.<id> may name: every rule of All, and
// audit-failed.
func knownRuleIDs() []string {
	var ids []string
	for _, r := range All() {
		ids = append(ids, r.ID())
	}
	return append(ids, IDAuditFailed)
}
