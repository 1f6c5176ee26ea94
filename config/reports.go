package config

// The reports: section of the configuration: when the daily discrepancy
// list is frozen, how reports show patient IDs, and the base of the
// links they carry.

import (
	"fmt"
	"net/url"
	"strings"
	"time"

	"go.yaml.in/yaml/v3"

	"dwiaudit/audit/report"
	"dwiaudit/store"
)

// defaultDailyAt is when the list of the day before is frozen: 06:00,
// after the night's late studies have settled and been audited and
// before a department's morning meeting.
const defaultDailyAt = TimeOfDay(6 * time.Hour)

// Reports shapes the daily discrepancy list and the compliance
// report.
type Reports struct {
	// DailyAt is when (node time) the list of the previous day is built
	// and kept unchanged.
	DailyAt TimeOfDay `yaml:"daily_at"`
	// PatientID is how reports show patient IDs: masked (last three
	// characters), full or hidden.
	PatientID PatientIDMode `yaml:"patient_id"`
	// BaseURL goes before the links to series pages in the reports
	// (e.g. https://dwiaudit.hospital.example); empty means links
	// relative to the node's root ("/studies/...").
	BaseURL string `yaml:"base_url"`
}

// defaultReports is the reports: section of Default.
func defaultReports() Reports {
	return Reports{DailyAt: defaultDailyAt, PatientID: PatientIDMode(report.PatientIDMasked)}
}

// validate adds the section's problems to p, by field path.
func (r Reports) validate(p *problems) {
	if r.DailyAt < 0 || r.DailyAt >= TimeOfDay(24*time.Hour) {
		p.addf("reports.daily_at", "%v is not a time of day between 00:00 and 23:59", time.Duration(r.DailyAt))
	}
	switch report.PatientIDMode(r.PatientID) {
	case report.PatientIDMasked, report.PatientIDFull, report.PatientIDHidden:
	default:
		p.addf("reports.patient_id", "%d is not masked, full or hidden", int(r.PatientID))
	}
	if r.BaseURL != "" {
		u, err := url.Parse(r.BaseURL)
		switch {
		case err != nil:
			p.addf("reports.base_url", "%q is not a URL: %v", r.BaseURL, err)
		case u.RawQuery != "" || u.Fragment != "":
			p.addf("reports.base_url", "%q: a base URL takes no query or fragment", r.BaseURL)
		case u.Scheme == "" && u.Host == "" && strings.HasPrefix(u.Path, "/"):
			// a path on the same host, e.g. behind a reverse proxy
		case (u.Scheme == "http" || u.Scheme == "https") && u.Host != "":
		default:
			p.addf("reports.base_url", "%q: use an http(s) URL such as https://dwiaudit.hospital.example, or a path starting with /", r.BaseURL)
		}
	}
}

// TimeOfDay is a wall-clock time, written "HH:MM".
type TimeOfDay time.Duration

// parseTimeOfDay reads "HH:MM" (00:00 to 23:59).
func parseTimeOfDay(s string) (TimeOfDay, error) {
	t, err := time.Parse("15:04", s)
	if err != nil || len(s) != 5 {
		return 0, fmt.Errorf("%q is not a time of day HH:MM (00:00 to 23:59)", s)
	}
	return TimeOfDay(time.Duration(t.Hour())*time.Hour + time.Duration(t.Minute())*time.Minute), nil
}

// String writes "HH:MM".
func (t TimeOfDay) String() string {
	d := time.Duration(t)
	return fmt.Sprintf("%02d:%02d", int(d/time.Hour), int(d%time.Hour/time.Minute))
}

// UnmarshalYAML reads "HH:MM".
func (t *TimeOfDay) UnmarshalYAML(n *yaml.Node) error {
	s, err := scalar(n)
	if err != nil {
		return err
	}
	v, err := parseTimeOfDay(s)
	if err != nil {
		return typeError(n, "not a time of day HH:MM (00:00 to 23:59)")
	}
	*t = v
	return nil
}

// MarshalYAML writes "HH:MM".
func (t TimeOfDay) MarshalYAML() (any, error) { return t.String(), nil }

// PatientIDMode is report.PatientIDMode in the configuration.
type PatientIDMode report.PatientIDMode

func (m PatientIDMode) String() string { return report.PatientIDMode(m).String() }

// UnmarshalYAML reads masked, full or hidden.
func (m *PatientIDMode) UnmarshalYAML(n *yaml.Node) error {
	s, err := scalar(n)
	if err != nil {
		return err
	}
	v, err := report.ParsePatientIDMode(s)
	if err != nil {
		return typeError(n, "not a patient ID mode: use masked, full or hidden")
	}
	*m = PatientIDMode(v)
	return nil
}

// MarshalYAML writes the mode's name.
func (m PatientIDMode) MarshalYAML() (any, error) { return m.String(), nil }

// Archive is the archive of daily lists the node and `dwiaudit report
// --data` serve: a report.Builder over the store with the section's
// settings.
func (r Reports) Archive(st *store.Store, loc *time.Location, now func() time.Time) *report.Archive {
	return &report.Archive{
		Builder: &report.Builder{
			Source:    st,
			PatientID: report.PatientIDMode(r.PatientID),
			BaseURL:   r.BaseURL,
			Location:  loc,
			Now:       now,
		},
		Lists:   st,
		DailyAt: time.Duration(r.DailyAt),
	}
}
