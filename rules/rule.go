package rules

import (
	"fmt"
	"strings"

	"dwiaudit/audit/analysis"
	"dwiaudit/audit/dwi"
)

// Severity ranks a finding.
type Severity int

const (
	SeverityInfo Severity = iota + 1
	SeverityWarning
	SeverityError
)

func (s Severity) String() string {
	switch s {
	case SeverityInfo:
		return "info"
	case SeverityWarning:
		return "warning"
	case SeverityError:
		return "error"
	}
	return fmt.Sprintf("Severity(%d)", int(s))
}

// ParseSeverity reads "info", "warning" or "error".
func ParseSeverity(s string) (Severity, error) {
	switch strings.ToLower(strings.TrimSpace(s)) {
	case "info":
		return SeverityInfo, nil
	case "warning":
		return SeverityWarning, nil
	case "error":
		return SeverityError, nil
	}
	return 0, fmt.Errorf("rules: unknown severity %q (want info, warning or error)", s)
}

// MarshalText writes the severity's name (JSON, YAML).
func (s Severity) MarshalText() ([]byte, error) { return []byte(s.String()), nil }

// UnmarshalText reads a severity's name.
func (s *Severity) UnmarshalText(b []byte) error {
	v, err := ParseSeverity(string(b))
	if err != nil {
		return err
	}
	*s = v
	return nil
}

// Region is where in a series a finding lies, for reports and the outline
// on previews. Slices are indexes into the series' slice grid
// (dwi.Series.Grid); the box is in pixels (row and column, inclusive) and
// in millimetres along the row and column directions from the first
// pixel.
type Region struct {
	Slices      []int      `json:"slices"`
	BoxPixels   [4]int     `json:"box_pixels"` // row0, col0, row1, col1
	BoxMM       [4]float64 `json:"box_mm"`     // same corners, mm
	AreaMM2     float64    `json:"area_mm2"`   // in-plane area summed over slices
	SlicesMM    []float64  `json:"slices_mm"`  // slice positions along the normal, mm
	Description string     `json:"description,omitempty"`
}

// Finding is one thing a rule found wrong (or worth knowing) about a
// series. Measured and Expected are machine-readable: a number (ADC in
// mm²/s, b-values in s/mm², ratios as fractions), a list of numbers, or
// a short string; Message says the same in plain words with the physical
// reason. Findings never carry patient identifiers.
type Finding struct {
	Rule              string   `json:"rule"`
	Severity          Severity `json:"severity"`
	StudyUID          string   `json:"study_uid"`
	SeriesUID         string   `json:"series_uid"`
	SeriesNumber      int      `json:"series_number"`
	SeriesDescription string   `json:"series_description"`
	Scanner           string   `json:"scanner"`
	Message           string   `json:"message"`
	Measured          any      `json:"measured"`
	Expected          any      `json:"expected"`
	Region            *Region  `json:"region,omitempty"`
}

// SeriesAudit is one diffusion series as the rules see it: the assembled
// series, the computation on it (nil when it could not run: Err or
// Result.CannotCompute say why), and the protocol or phantom profile it
// matched (nil when none).
type SeriesAudit struct {
	Series   *dwi.Series
	Result   *analysis.Result
	Protocol *Protocol
	Phantom  *PhantomProfile
	Err      error // extraction, assembly or computation failed
}

// Study is what a rule judges: every diffusion series of one study, with
// the study's assembly (so rules can look across series, e.g. for a b0
// in a sibling series).
type Study struct {
	StudyUID string
	Assembly *dwi.Study
	Series   []*SeriesAudit
}

// Rule is one check. Check is a pure function of the study and the
// configuration: no I/O, no state between calls. A rule returns findings
// with the severity it thinks right; the configuration's per-rule
// severity override is applied by the caller (Apply).
type Rule interface {
	ID() string
	Check(s *Study, cfg *Config) []Finding
}
