package report

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"strconv"
	"strings"
)

// PatientIDMode says how reports show patient IDs (reports.patient_id).
type PatientIDMode int

const (
	// PatientIDMasked keeps the last maskKeep characters of an ID of at
	// least maskMinLength characters and writes '*' for the rest; a
	// shorter ID is all '*'. The default.
	PatientIDMasked PatientIDMode = iota
	// PatientIDFull shows the ID as stored.
	PatientIDFull
	// PatientIDHidden shows nothing.
	PatientIDHidden
)

// Masking limits. Three characters are enough for a reader to tell two
// rows of the same day apart and to find the study at the console, and
// too few to identify anyone; an ID shorter than six characters would
// give half of itself away, so it is masked whole.
const (
	maskKeep      = 3
	maskMinLength = 6
)

// ParsePatientIDMode reads "masked", "full" or "hidden".
func ParsePatientIDMode(s string) (PatientIDMode, error) {
	switch s {
	case "masked":
		return PatientIDMasked, nil
	case "full":
		return PatientIDFull, nil
	case "hidden":
		return PatientIDHidden, nil
	}
	return 0, fmt.Errorf("%w %q (want masked, full or hidden)", errBadPatientIDMode, s)
}

func (m PatientIDMode) String() string {
	switch m {
	case PatientIDMasked:
		return "masked"
	case PatientIDFull:
		return "full"
	case PatientIDHidden:
		return "hidden"
	}
	return fmt.Sprintf("PatientIDMode(%d)", int(m))
}

// MarshalText writes the mode's name (JSON, YAML).
func (m PatientIDMode) MarshalText() ([]byte, error) { return []byte(m.String()), nil }

// UnmarshalText reads a mode's name.
func (m *PatientIDMode) UnmarshalText(b []byte) error {
	v, err := ParsePatientIDMode(string(b))
	if err != nil {
		return err
	}
	*m = v
	return nil
}

// Apply shows id as the mode says.
func (m PatientIDMode) Apply(id string) string {
	switch m {
	case PatientIDFull:
		return id
	case PatientIDHidden:
		return ""
	}
	r := []rune(id)
	keep := maskKeep
	if len(r) < maskMinLength {
		keep = 0
	}
	for i := 0; i < len(r)-keep; i++ {
		r[i] = '*'
	}
	return string(r)
}

// SeriesLink is the address of a series on its study page:
// <base>/studies/<study UID>#series-<series UID>. An empty base means
// the node's own root, "/". UIDs are digits and dots (PS3.5 9.1), so
// they need no escaping.
func SeriesLink(base, studyUID, seriesUID string) string {
	if base == "" {
		base = "/"
	}
	if !strings.HasSuffix(base, "/") {
		base += "/"
	}
	return base + "studies/" + studyUID + "#series-" + seriesUID
}

// unit is how the values of a finding read.
type unit int

const (
	unitPlain    unit = iota // a count or a ratio, as is
	unitADC                  // mm²/s, written as e-3
	unitBValue               // s/mm²
	unitFraction             // 0..1, written as a percentage
	unitMM                   // millimetres
)

// unitOf says what a rule's measured and expected values are, from the
// rule and, where a rule reports several quantities, the expected value
// (rules/*.go set Measured and Expected; their doc comments say the
// units: ADC in mm²/s, b-values in s/mm², fractions 0..1).
func unitOf(rule string, expected any, isList bool) unit {
	switch rule {
	case "b0-only-hotspot", "scanner-adc-disagrees", "phantom-adc-bias":
		return unitADC
	case "adc-out-of-range":
		// The tissue range is a pair of ADCs and CSF is compared with
		// free water (3.0e-3); the other two checks compare fractions
		// of voxels (defaults 0.02 and 0.05).
		if isList {
			return unitADC
		}
		if e, ok := expected.(float64); ok && e >= 0.01 {
			return unitFraction
		}
		return unitADC
	case "missing-b0", "bvalue-mismatch":
		if isList {
			return unitBValue // the b-value sets; single numbers count images or directions
		}
	case "geometry-mismatch":
		return unitMM
	}
	return unitPlain
}

// Value writes the measured (measured true) or expected value of a
// finding in words with its unit: ADC as "0.79e-3 mm²/s", b-values as
// "0, 1000 s/mm²", fractions as percentages, text as is. A value this
// version cannot read is shown as its JSON.
func Value(rule string, measuredJSON, expectedJSON json.RawMessage, measured bool) string {
	var m, e any
	_ = json.Unmarshal(measuredJSON, &m)
	_ = json.Unmarshal(expectedJSON, &e)
	v, raw := e, expectedJSON
	if measured {
		v, raw = m, measuredJSON
	}
	switch x := v.(type) {
	case nil:
		if len(bytes.TrimSpace(raw)) == 0 || string(bytes.TrimSpace(raw)) == "null" {
			return ""
		}
		return string(raw)
	case string:
		return x
	case bool:
		return strconv.FormatBool(x)
	case float64:
		return formatNumbers([]float64{x}, unitOf(rule, e, isList(e) || isList(m)), false)
	case []any:
		if strs, ok := allStrings(x); ok {
			return strings.Join(strs, "; ")
		}
		nums := make([]float64, 0, len(x))
		for _, it := range x {
			f, ok := it.(float64)
			if !ok {
				return string(raw)
			}
			nums = append(nums, f)
		}
		u := unitOf(rule, e, true)
		// A pair of expected ADCs is a range.
		return formatNumbers(nums, u, !measured && u == unitADC && rule == "adc-out-of-range" && len(nums) == 2)
	}
	return string(raw)
}

func allStrings(x []any) ([]string, bool) {
	out := make([]string, len(x))
	for i, it := range x {
		s, ok := it.(string)
		if !ok || len(x) == 0 {
			return nil, false
		}
		out[i] = s
	}
	return out, len(x) > 0
}

func isList(v any) bool {
	_, ok := v.([]any)
	return ok
}

func formatNumbers(nums []float64, u unit, isRange bool) string {
	parts := make([]string, len(nums))
	for i, f := range nums {
		switch u {
		case unitADC:
			parts[i] = fmt.Sprintf("%.2fe-3", f*1e3)
		case unitFraction:
			parts[i] = strconv.FormatFloat(100*f, 'f', 1, 64) + "%"
		case unitMM:
			parts[i] = strconv.FormatFloat(f, 'f', 1, 64)
		case unitBValue:
			// Nominal b-values are whole numbers; a measured one reads to
			// a tenth (never 999.9979999999283).
			parts[i] = strconv.FormatFloat(math.Round(f*10)/10, 'f', -1, 64)
		default:
			parts[i] = strconv.FormatFloat(f, 'g', 6, 64)
		}
	}
	sep := ", "
	if isRange {
		sep = " to "
	}
	s := strings.Join(parts, sep)
	if len(nums) == 0 {
		s = "none"
	}
	switch u {
	case unitADC:
		return s + " mm²/s"
	case unitBValue:
		if len(nums) == 0 {
			return "no b-value"
		}
		return s + " s/mm²"
	case unitMM:
		return s + " mm"
	}
	return s
}
