package report

import (
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"strconv"
	"strings"
	"text/tabwriter"
	"time"
)

// Format is a report's output form.
type Format int

const (
	FormatText Format = iota // a terminal table
	FormatCSV                // RFC 4180, header row, pure data
	FormatJSON
	FormatHTML // a printable page
)

// ParseFormat reads "text", "csv", "json" or "html".
func ParseFormat(s string) (Format, error) {
	switch s {
	case "text":
		return FormatText, nil
	case "csv":
		return FormatCSV, nil
	case "json":
		return FormatJSON, nil
	case "html":
		return FormatHTML, nil
	}
	return 0, fmt.Errorf("%w %q (want text, csv, json or html)", errBadFormat, s)
}

func (f Format) String() string {
	switch f {
	case FormatText:
		return "text"
	case FormatCSV:
		return "csv"
	case FormatJSON:
		return "json"
	case FormatHTML:
		return "html"
	}
	return fmt.Sprintf("Format(%d)", int(f))
}

// ContentType is the HTTP Content-Type of the format.
func (f Format) ContentType() string {
	switch f {
	case FormatCSV:
		return "text/csv; charset=utf-8" // RFC 7111 registers text/csv
	case FormatJSON:
		return "application/json"
	case FormatHTML:
		return "text/html; charset=utf-8"
	}
	return "text/plain; charset=utf-8"
}

// Columns are the CSV header of the daily list: the JSON names of Row's
// fields, in order.
var columns = []string{
	"audit_time", "study_date", "accession_number", "patient_id", "test", "scanner",
	"series_number", "series_description", "rule", "severity", "measured", "expected",
	"explanation", "link", "study_uid", "series_uid",
}

// Columns returns the CSV header of the daily list (a fresh slice).
func Columns() []string { return append([]string(nil), columns...) }

// record is a row as CSV fields, in Columns order.
func (r Row) record() []string {
	return []string{
		r.AuditTime.Format(time.RFC3339), r.StudyDate, r.AccessionNumber, r.PatientID,
		strconv.FormatBool(r.Test), r.Scanner, strconv.Itoa(r.SeriesNumber), r.SeriesDescription,
		r.Rule, r.Severity, r.Measured, r.Expected, r.Explanation, r.Link, r.StudyUID, r.SeriesUID,
	}
}

// Write writes the list in format f.
func (l *DailyList) Write(w io.Writer, f Format) error {
	switch f {
	case FormatCSV:
		return l.WriteCSV(w)
	case FormatJSON:
		return l.WriteJSON(w)
	case FormatHTML:
		return l.WriteHTML(w)
	case FormatText:
		return l.WriteText(w)
	}
	return fmt.Errorf("%w %v", errBadFormat, f)
}

// WriteCSV writes the header row and one record per row (RFC 4180, CRLF
// line ends, as encoding/csv writes with UseCRLF). It carries no caution
// line, so that spreadsheets read it as a table.
func (l *DailyList) WriteCSV(w io.Writer) error {
	cw := csv.NewWriter(w)
	cw.UseCRLF = true // RFC 4180 section 2, rule 1
	if err := cw.Write(columns); err != nil {
		return err
	}
	for _, r := range l.Rows {
		if err := cw.Write(r.record()); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// WriteJSON writes the list as indented JSON.
func (l *DailyList) WriteJSON(w io.Writer) error {
	b, err := l.marshalIndent()
	if err != nil {
		return err
	}
	_, err = w.Write(b)
	return err
}

// marshalIndent is the list's JSON form, as WriteJSON writes and the
// store keeps it (two-space indent, final newline).
func (l *DailyList) marshalIndent() ([]byte, error) {
	b, err := json.MarshalIndent(l, "", "  ")
	if err != nil {
		return nil, err
	}
	return append(b, '\n'), nil
}

// ParseDailyList reads a list written by WriteJSON.
func ParseDailyList(b []byte) (*DailyList, error) {
	var l DailyList
	if err := json.Unmarshal(b, &l); err != nil {
		return nil, fmt.Errorf("%w: daily list: %v", errBadRecord, err)
	}
	if l.Rows == nil {
		l.Rows = []Row{}
	}
	return &l, nil
}

// WriteText writes a terminal table: the caution, a summary line, then
// one block per finding.
func (l *DailyList) WriteText(w io.Writer) error {
	ew := &errWriter{w: w}
	fmt.Fprintf(ew, "Daily discrepancy list %s (%s)\n", l.Day, l.TimeZone)
	fmt.Fprintf(ew, "%s\n", l.Caution)
	state := "built live"
	if l.FrozenAt != nil {
		state = "kept since " + l.FrozenAt.Format(time.RFC3339)
	}
	fmt.Fprintf(ew, "%s audited, %d with findings, %s; patient IDs %s; %s.\n",
		plural(l.StudiesAudited, "study", "studies"), l.StudiesWithFindings, plural(len(l.Rows), "finding", "findings"), l.PatientID, state)
	if len(l.Rows) == 0 {
		fmt.Fprintln(ew, "No findings.")
		return ew.err
	}
	fmt.Fprintln(ew)
	tw := tabwriter.NewWriter(ew, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "SEVERITY\tRULE\tAUDITED\tSTUDY DATE\tACCESSION\tPATIENT ID\tSCANNER\tSERIES\tMEASURED\tEXPECTED")
	for _, r := range l.Rows {
		sev := r.Severity
		if r.Test {
			sev += " (test)"
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\n", sev, cell(r.Rule), r.AuditTime.Format("15:04:05"),
			cell(r.StudyDate), cell(r.AccessionNumber), cell(r.PatientID), cell(r.Scanner),
			cell(seriesName(r.SeriesNumber, r.SeriesDescription)), short(cell(r.Measured)), short(cell(r.Expected)))
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	fmt.Fprintln(ew, "\nExplanations:")
	for i, r := range l.Rows {
		fmt.Fprintf(ew, "%3d. %s, series %s: %s\n     %s\n", i+1, r.Rule, seriesName(r.SeriesNumber, r.SeriesDescription), r.Explanation, r.Link)
	}
	return ew.err
}

// Write writes the report in format f.
func (c *Compliance) Write(w io.Writer, f Format) error {
	switch f {
	case FormatCSV:
		return c.writeCSV(w)
	case FormatJSON:
		b, err := json.MarshalIndent(c, "", "  ")
		if err != nil {
			return err
		}
		_, err = w.Write(append(b, '\n'))
		return err
	case FormatHTML:
		return c.writeHTML(w)
	case FormatText:
		return c.writeText(w)
	}
	return fmt.Errorf("%w %v", errBadFormat, f)
}

// complianceColumns is the CSV header of the compliance report.
var complianceColumns = []string{
	"protocol", "scanner", "studies", "compliant_studies", "share_percent",
	"previous_studies", "previous_compliant_studies", "previous_share_percent", "delta_points",
	"top_rule_1", "top_rule_1_studies", "top_rule_2", "top_rule_2_studies", "top_rule_3", "top_rule_3_studies",
}

// writeCSV writes one record per group, the overall line first (protocol
// and scanner "all"), header row first, pure data.
func (c *Compliance) writeCSV(w io.Writer) error {
	cw := csv.NewWriter(w)
	cw.UseCRLF = true // RFC 4180 section 2, rule 1
	if err := cw.Write(complianceColumns); err != nil {
		return err
	}
	for _, g := range append([]ComplianceGroup{c.Overall}, c.Groups...) {
		rec := []string{g.Protocol, g.Scanner, strconv.Itoa(g.Studies), strconv.Itoa(g.Compliant), num(g.SharePercent),
			strconv.Itoa(g.PreviousStudies), strconv.Itoa(g.PreviousCompliant), num(g.PreviousSharePercent), num(g.DeltaPoints)}
		for i := range TopRules {
			if i < len(g.TopRules) {
				rec = append(rec, g.TopRules[i].Rule, strconv.Itoa(g.TopRules[i].Studies))
			} else {
				rec = append(rec, "", "")
			}
		}
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// writeText writes a terminal table of the groups.
func (c *Compliance) writeText(w io.Writer) error {
	ew := &errWriter{w: w}
	fmt.Fprintf(ew, "Protocol compliance %s to %s (%s, %s), against %s to %s\n", c.From, c.To, plural(c.Days, "day", "days"), c.TimeZone, c.PreviousFrom, c.PreviousTo)
	fmt.Fprintf(ew, "%s\n", c.Caution)
	fmt.Fprintf(ew, "Compliant: a study without a finding of severity warning or error. %s left out.\n\n", plural(c.TestStudiesExcluded, "test study", "test studies"))
	tw := tabwriter.NewWriter(ew, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "PROTOCOL\tSCANNER\tSTUDIES\tCOMPLIANT\tBEFORE\tCHANGE\tMOST FREQUENT RULES")
	for _, g := range append([]ComplianceGroup{c.Overall}, c.Groups...) {
		fmt.Fprintf(tw, "%s\t%s\t%d\t%s\t%s\t%s\t%s\n", cell(g.Protocol), cell(g.Scanner), g.Studies,
			pct(g.SharePercent), pct(g.PreviousSharePercent), points(g.DeltaPoints), topRules(g.TopRules))
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	return ew.err
}

// num writes an optional number for CSV: one decimal, empty when nil.
func num(v *float64) string {
	if v == nil {
		return ""
	}
	return strconv.FormatFloat(*v, 'f', 1, 64)
}

func pct(v *float64) string {
	if v == nil {
		return "-"
	}
	return strconv.FormatFloat(*v, 'f', 1, 64) + "%"
}

func points(v *float64) string {
	if v == nil {
		return "-"
	}
	return fmt.Sprintf("%+.1f pp", *v)
}

func topRules(rs []RuleCount) string {
	if len(rs) == 0 {
		return "-"
	}
	parts := make([]string, len(rs))
	for i, r := range rs {
		parts[i] = fmt.Sprintf("%s (%d)", r.Rule, r.Studies)
	}
	return strings.Join(parts, ", ")
}

func plural(n int, one, many string) string {
	if n == 1 {
		return "1 " + one
	}
	return strconv.Itoa(n) + " " + many
}

// cell is a value in a table column: a tab or line break inside it
// would break the table, so they become spaces; empty is "-".
func cell(s string) string {
	return dash(strings.Map(func(r rune) rune {
		if r == '\t' || r == '\n' || r == '\r' {
			return ' '
		}
		return r
	}, s))
}

// maxValueCell is the widest a measured or expected value is shown in
// the text table; a longer one (an audit-failed reason) is cut with an
// ellipsis, and the explanation under the table says it whole. 40
// characters keep the table within a wide terminal.
const maxValueCell = 40

// short cuts s to maxValueCell characters.
func short(s string) string {
	if r := []rune(s); len(r) > maxValueCell {
		return string(r[:maxValueCell-1]) + "…"
	}
	return s
}

func dash(s string) string {
	if s == "" {
		return "-"
	}
	return s
}

func seriesName(n int, desc string) string {
	if desc == "" {
		return strconv.Itoa(n)
	}
	return fmt.Sprintf("%d %q", n, desc)
}

// errWriter keeps the first write error, so that a report's many
// Fprintf calls need one check.
type errWriter struct {
	w   io.Writer
	err error
}

func (e *errWriter) Write(p []byte) (int, error) {
	if e.err != nil {
		return 0, e.err
	}
	n, err := e.w.Write(p)
	e.err = err
	return n, err
}
