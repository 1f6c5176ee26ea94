package rules

import "regexp"

// Match selects series by their headers. A series matches when any
// pattern of any non-empty list matches (patterns are Go regular
// expressions, RE2 syntax, matched against the whole attribute value
// unless anchored otherwise); an empty Match matches nothing.
type Match struct {
	SeriesDescription []string `yaml:"series_description"`
	ProtocolName      []string `yaml:"protocol_name"`
	BodyPart          []string `yaml:"body_part"` // Body Part Examined (0018,0015), compared case-insensitively

	compiled []*regexp.Regexp // filled by Config.Validate
}

// Protocol is what the department expects of a diffusion series it
// matches.
type Protocol struct {
	Name  string `yaml:"name"`
	Match Match  `yaml:"match"`
	// BValues are the expected nominal b-values, s/mm²; BTolerance the
	// allowed difference (DOMAIN.md: a nominal 900 seen as 895-905,
	// common practice).
	BValues    []float64 `yaml:"bvalues"`
	BTolerance float64   `yaml:"bvalue_tolerance"`
	// LowestB is the b-value that counts as "b0" for this protocol (0;
	// body protocols often use 50 to suppress perfusion, DOMAIN.md IVIM).
	LowestB       float64 `yaml:"lowest_b"`
	MinDirections int     `yaml:"min_directions"`
	// ParenchymaADC is the expected range of the tissue median ADC,
	// mm²/s; Head says the CSF/free-water checks apply.
	ParenchymaADC [2]float64 `yaml:"parenchyma_adc"`
	Head          bool       `yaml:"head"`
}

// PhantomProfile is a test object with a known ADC (DOMAIN.md: ice water
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

// Config is everything the rules read.
type Config struct {
	Protocols []Protocol              `yaml:"protocols"`
	Phantoms  []PhantomProfile        `yaml:"phantoms"`
	Rules     map[string]RuleSettings `yaml:"rules"`
	// Thresholds of the individual rules, with defaults from DOMAIN.md.
	Thresholds Thresholds `yaml:"thresholds"`
}

// Thresholds are the numbers each rule compares against. Every default
// in DefaultConfig names its source.
type Thresholds struct{}
