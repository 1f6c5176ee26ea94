package report

import (
	"encoding/json"
	"errors"
	"fmt"
	"sort"
	"time"

	"dwiaudit/store"
)

// Caution is the sentence every report shows (JSON: the caution field;
// HTML and text: a visible line). CSV stays pure data.
const Caution = "dwiaudit checks acquisitions; it does not diagnose. Clinical decisions rest with the radiologist and local policy."

// dayLayout is the form of a calendar day.
const dayLayout = "2006-01-02"

// Source is what the builders read (*store.Store has it): the current
// audit of every series audited on a day, and a study's index record
// (patient ID, study date, accession).
type Source interface {
	Findings(day string) ([]store.AuditRecord, error)
	Study(uid string) (store.Study, error)
}

// Builder builds reports from a Source. Its zero value but Source is
// usable: patient IDs masked, links relative to "/", time.Local, time.Now.
type Builder struct {
	Source Source
	// PatientID says how rows show patient IDs (PatientIDMasked when
	// zero).
	PatientID PatientIDMode
	// BaseURL is put before the links to series pages
	// (<base>/studies/<study UID>#series-<series UID>); empty means "/".
	BaseURL string
	// Location is the node's time zone (node.time_zone): what a calendar
	// day is and how times are written. Nil means time.Local; it must be
	// the Source's too.
	Location *time.Location
	// Now is the clock of GeneratedAt; time.Now when nil.
	Now func() time.Time
}

// DailyList is the daily discrepancy list: one row per finding of every
// study audited on Day that has a finding.
type DailyList struct {
	Day         string    `json:"day"`       // YYYY-MM-DD in TimeZone
	TimeZone    string    `json:"time_zone"` // IANA name of the node's zone
	GeneratedAt time.Time `json:"generated_at"`
	// FrozenAt is when the list was kept in the store; nil for a list
	// built live (today's, or one read from a read-only data folder).
	FrozenAt *time.Time `json:"frozen_at"`
	Caution  string     `json:"caution"`
	// PatientID is how the rows show patient IDs: masked, full or hidden.
	PatientID PatientIDMode `json:"patient_id_mode"`
	// StudiesAudited counts the studies with a series whose current
	// audit falls on Day, test studies included; StudiesWithFindings
	// those of them in Rows.
	StudiesAudited      int   `json:"studies_audited"`
	StudiesWithFindings int   `json:"studies_with_findings"`
	Rows                []Row `json:"rows"`
}

// Row is one finding. Every field is a plain value, so the CSV columns
// (Columns) are exactly the JSON fields and read back to the same row.
type Row struct {
	AuditTime         time.Time `json:"audit_time"` // in the node's time zone, whole seconds
	StudyDate         string    `json:"study_date"` // YYYY-MM-DD, or as stored when not a DICOM date
	AccessionNumber   string    `json:"accession_number"`
	PatientID         string    `json:"patient_id"` // as PatientIDMode says
	Test              bool      `json:"test"`       // a test study (configured test patient)
	Scanner           string    `json:"scanner"`
	SeriesNumber      int       `json:"series_number"`
	SeriesDescription string    `json:"series_description"`
	Rule              string    `json:"rule"`
	Severity          string    `json:"severity"` // error, warning, info
	Measured          string    `json:"measured"` // in words with units
	Expected          string    `json:"expected"`
	Explanation       string    `json:"explanation"` // the finding's message
	Link              string    `json:"link"`        // the series on its study page
	StudyUID          string    `json:"study_uid"`
	SeriesUID         string    `json:"series_uid"`
}

// finding is the part of a stored rules.Finding the reports read. It is
// decoded here rather than as rules.Finding so that a severity or value
// this version does not know still shows instead of failing the list.
type finding struct {
	Rule              string          `json:"rule"`
	Severity          string          `json:"severity"`
	SeriesNumber      int             `json:"series_number"`
	SeriesDescription string          `json:"series_description"`
	Scanner           string          `json:"scanner"`
	Message           string          `json:"message"`
	Measured          json.RawMessage `json:"measured"`
	Expected          json.RawMessage `json:"expected"`
}

func (b *Builder) loc() *time.Location {
	if b.Location != nil {
		return b.Location
	}
	return time.Local
}

func (b *Builder) now() time.Time {
	if b.Now != nil {
		return b.Now()
	}
	return time.Now()
}

// parseDay checks that day is a calendar date.
func parseDay(day string, loc *time.Location) (time.Time, error) {
	d, err := time.ParseInLocation(dayLayout, day, loc)
	if err != nil || d.Format(dayLayout) != day {
		return time.Time{}, fmt.Errorf("%w: %q", ErrBadDay, day)
	}
	return d, nil
}

// Daily builds the list of day (YYYY-MM-DD in the node's time zone) from
// the current audits: rows for every finding of every study audited that
// day, test studies included and marked.
func (b *Builder) Daily(day string) (*DailyList, error) {
	loc := b.loc()
	if _, err := parseDay(day, loc); err != nil {
		return nil, err
	}
	recs, err := b.Source.Findings(day)
	if err != nil {
		return nil, fmt.Errorf("report: audits of %s: %w", day, err)
	}
	l := &DailyList{
		Day:         day,
		TimeZone:    zoneName(loc, b.now()),
		GeneratedAt: b.now().In(loc).Truncate(time.Second),
		Caution:     Caution,
		PatientID:   PatientIDFull,
		Rows:        []Row{},
	}
	studies := map[string]*store.Study{} // study UID -> index record (nil: unknown)
	withFindings := map[string]bool{}
	for _, rec := range recs {
		if _, seen := studies[rec.StudyInstanceUID]; !seen {
			st, err := b.Source.Study(rec.StudyInstanceUID)
			switch {
			case err == nil:
				studies[rec.StudyInstanceUID] = &st
			case errors.Is(err, store.ErrNotFound):
				studies[rec.StudyInstanceUID] = nil // audited, then forgotten: rows without patient data
			default:
				return nil, fmt.Errorf("report: study of an audit of %s: %w", day, err)
			}
		}
		var fs []finding
		if err := json.Unmarshal(rec.Findings, &fs); err != nil {
			return nil, fmt.Errorf("%w: findings of an audit of %s: %v", errBadRecord, day, err)
		}
		if len(fs) == 0 {
			continue
		}
		withFindings[rec.StudyInstanceUID] = true
		st := studies[rec.StudyInstanceUID]
		for _, f := range fs {
			r := Row{
				AuditTime:         rec.AuditTime.In(loc).Truncate(time.Second),
				AccessionNumber:   rec.AccessionNumber,
				Test:              rec.TestPatient,
				Scanner:           firstNonEmpty(rec.Scanner, f.Scanner),
				SeriesNumber:      f.SeriesNumber,
				SeriesDescription: f.SeriesDescription,
				Rule:              f.Rule,
				Severity:          f.Severity,
				Measured:          Value(f.Rule, f.Measured, f.Expected, true),
				Expected:          Value(f.Rule, f.Measured, f.Expected, false),
				Explanation:       f.Message,
				Link:              SeriesLink(b.BaseURL, rec.StudyInstanceUID, rec.SeriesUID),
				StudyUID:          rec.StudyInstanceUID,
				SeriesUID:         rec.SeriesUID,
			}
			if st != nil {
				r.StudyDate = studyDate(st.StudyDate)
				r.PatientID = st.PatientID
				r.AccessionNumber = firstNonEmpty(rec.AccessionNumber, st.AccessionNumber)
			}
			l.Rows = append(l.Rows, r)
		}
	}
	l.StudiesAudited = len(studies)
	l.StudiesWithFindings = len(withFindings)
	sortRows(l.Rows)
	return l.WithPatientID(b.PatientID), nil
}

// sortRows orders rows by severity (error first), then audit time, then
// study, series and rule, so that a list always comes out the same.
func sortRows(rows []Row) {
	sort.SliceStable(rows, func(i, j int) bool {
		a, c := rows[i], rows[j]
		if ra, rc := SeverityRank(a.Severity), SeverityRank(c.Severity); ra != rc {
			return ra > rc
		}
		if !a.AuditTime.Equal(c.AuditTime) {
			return a.AuditTime.Before(c.AuditTime)
		}
		if a.StudyUID != c.StudyUID {
			return a.StudyUID < c.StudyUID
		}
		if a.SeriesNumber != c.SeriesNumber {
			return a.SeriesNumber < c.SeriesNumber
		}
		if a.SeriesUID != c.SeriesUID {
			return a.SeriesUID < c.SeriesUID
		}
		return a.Rule < c.Rule
	})
}

// SeverityRank orders the severity names of stored findings: error 3,
// warning 2, info 1; an unknown one 0, after info.
func SeverityRank(s string) int {
	switch s {
	case "error":
		return 3
	case "warning":
		return 2
	case "info":
		return 1
	}
	return 0
}

// WithPatientID returns a copy of the list whose rows show patient IDs as
// mode says. Masking only hides: a list already masked or hidden stays
// so whatever mode asks (a frozen list is kept with IDs in full, so that
// the configured mode applies when it is read).
func (l *DailyList) WithPatientID(mode PatientIDMode) *DailyList {
	out := *l
	out.Rows = make([]Row, len(l.Rows))
	copy(out.Rows, l.Rows)
	if l.PatientID != PatientIDFull && (mode == PatientIDFull || l.PatientID == PatientIDHidden) {
		mode = l.PatientID // never reveal more than the list holds
	}
	for i := range out.Rows {
		out.Rows[i].PatientID = mode.Apply(out.Rows[i].PatientID)
	}
	out.PatientID = mode
	return &out
}

func firstNonEmpty(s ...string) string {
	for _, v := range s {
		if v != "" {
			return v
		}
	}
	return ""
}

// studyDate writes a DICOM DA (PS3.5 6.2, YYYYMMDD) as YYYY-MM-DD; any
// other text is kept as stored.
func studyDate(da string) string {
	if t, err := time.Parse("20060102", da); err == nil {
		return t.Format(dayLayout)
	}
	return da
}

// zoneName names the node's time zone: its IANA name, or for "Local"
// the abbreviation in force at t too, so a reader knows which it was.
func zoneName(loc *time.Location, t time.Time) string {
	if name := loc.String(); name != "Local" {
		return name
	}
	abbr, _ := t.In(loc).Zone()
	return "Local (" + abbr + ")"
}
