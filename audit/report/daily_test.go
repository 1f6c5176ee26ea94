package report_test

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"strings"
	"testing"
	"time"

	"dwiaudit/audit/report"
	"dwiaudit/rules"
)

// dayFixture is one day of audits at the invented hospital: a study with
// a missing b0 (error) and a hotspot (warning), a clean study, a test
// study with a low-SNR warning, all audited on 2026-12-01, and one study
// audited the day before.
func dayFixture(t *testing.T) (*report.Builder, []study) {
	t.Helper()
	loc := quellvander(t)
	c := &clock{t: time.Date(2026, 12, 2, 9, 0, 0, 0, loc)}
	s, _ := newStore(t, loc, c.Now)
	sts := []study{newStudy(1), newStudy(2), newStudy(3), newStudy(4)}
	sts[2].PatientID = "TEST-SYNTH-01"
	for _, st := range sts {
		put(t, s, st, 1)
	}
	day := func(h, m int) time.Time { return time.Date(2026, 12, 1, h, m, 0, 0, loc) }
	saveAudits(t, s,
		audit(t, sts[0], 1, day(10, 5), "brain", "hv-mr1", false,
			finding("b0-only-hotspot", rules.SeverityWarning, seriesUID(sts[0].UID, 1), 2, 0.00121, 0.00079),
			finding("missing-b0", rules.SeverityError, seriesUID(sts[0].UID, 1), 2, []float64{1000}, []float64{0})),
		audit(t, sts[1], 1, day(8, 30), "brain", "hv-mr1", false),
		audit(t, sts[2], 1, day(7, 15), "brain", "hv-mr2", true,
			finding("low-snr", rules.SeverityWarning, seriesUID(sts[2].UID, 1), 2, 4.2, 8.0)),
		audit(t, sts[3], 1, day(9, 0).AddDate(0, 0, -1), "brain", "hv-mr1", false,
			finding("missing-b0", rules.SeverityError, seriesUID(sts[3].UID, 1), 2, []float64{1000}, []float64{0})),
	)
	return &report.Builder{Source: s, Location: loc, Now: c.Now}, sts
}

func TestTheDailyListHasOneRowPerFindingErrorsFirstThenByAuditTime(t *testing.T) {
	b, sts := dayFixture(t)
	l, err := b.Daily("2026-12-01")
	if err != nil {
		t.Fatal(err)
	}
	type key struct{ rule, severity, study string }
	var got []key
	for _, r := range l.Rows {
		got = append(got, key{r.Rule, r.Severity, r.StudyUID})
	}
	want := []key{
		{"missing-b0", "error", sts[0].UID},
		{"low-snr", "warning", sts[2].UID},         // 07:15
		{"b0-only-hotspot", "warning", sts[0].UID}, // 10:05
	}
	if fmt.Sprint(got) != fmt.Sprint(want) {
		t.Fatalf("rows %v, want %v", got, want)
	}
	if l.StudiesAudited != 3 || l.StudiesWithFindings != 2 {
		t.Errorf("studies audited %d with findings %d, want 3 and 2", l.StudiesAudited, l.StudiesWithFindings)
	}
	r := l.Rows[0]
	checks := []struct{ name, got, want string }{
		{"study date from the index", r.StudyDate, "2026-12-01"},
		{"accession", r.AccessionNumber, sts[0].Accession},
		{"patient ID masked by default", r.PatientID, "*******201"},
		{"scanner", r.Scanner, "hv-mr1"},
		{"measured b-values", r.Measured, "1000 s/mm²"},
		{"expected b-values", r.Expected, "0 s/mm²"},
		{"explanation is the finding's message", r.Explanation, "plain words for missing-b0"},
		{"link to the series on its study page", r.Link, "/studies/" + sts[0].UID + "#series-" + seriesUID(sts[0].UID, 1)},
		{"audit time in the node's zone", r.AuditTime.Format(time.RFC3339), "2026-12-01T10:05:00Z"}, // Dublin is UTC+0 in winter
		{"hotspot ADC measured", l.Rows[2].Measured, "1.21e-3 mm²/s"},
		{"hotspot ADC expected", l.Rows[2].Expected, "0.79e-3 mm²/s"},
	}
	for _, c := range checks {
		if c.got != c.want {
			t.Errorf("%s: %q, want %q", c.name, c.got, c.want)
		}
	}
	if !l.Rows[1].Test || l.Rows[0].Test {
		t.Errorf("test flags %v %v, want the test study marked and only it", l.Rows[0].Test, l.Rows[1].Test)
	}
	if l.Caution != report.Caution {
		t.Errorf("caution %q", l.Caution)
	}
}

func TestPatientIDsShowAsConfigured(t *testing.T) {
	for _, c := range []struct {
		name string
		mode report.PatientIDMode
		id   string
		want string
	}{
		{"masked keeps the last three characters", report.PatientIDMasked, "QOH0004201", "*******201"},
		{"masked hides a short ID whole", report.PatientIDMasked, "A12", "***"},
		{"masked counts characters, not bytes", report.PatientIDMasked, "ÅÄÖ123456", "******456"},
		{"full shows it as stored", report.PatientIDFull, "QOH0004201", "QOH0004201"},
		{"hidden shows nothing", report.PatientIDHidden, "QOH0004201", ""},
	} {
		t.Run(c.name, func(t *testing.T) {
			if got := c.mode.Apply(c.id); got != c.want {
				t.Errorf("Apply(%q) = %q, want %q", c.id, got, c.want)
			}
		})
	}
	t.Run("a masked list never shows more when asked for full", func(t *testing.T) {
		l := &report.DailyList{PatientID: report.PatientIDMasked, Rows: []report.Row{{PatientID: "*******201"}}}
		if got := l.WithPatientID(report.PatientIDFull); got.Rows[0].PatientID != "*******201" || got.PatientID != report.PatientIDMasked {
			t.Errorf("got %q (%v)", got.Rows[0].PatientID, got.PatientID)
		}
	})
	t.Run("an unknown mode is refused", func(t *testing.T) {
		if _, err := report.ParsePatientIDMode("partial"); err == nil {
			t.Error("no error")
		}
	})
}

func TestMeasuredAndExpectedValuesReadWithTheirUnits(t *testing.T) {
	for _, c := range []struct {
		name, rule         string
		measured, expected any
		wantM, wantE       string
	}{
		// ADC in mm²/s written as e-3 (the rules' own fmtADC, rules/expect.go).
		{"tissue ADC against its range", "adc-out-of-range", 0.00052, []float64{0.0006, 0.0011}, "0.52e-3 mm²/s", "0.60e-3 to 1.10e-3 mm²/s"},
		{"CSF against free water", "adc-out-of-range", 0.0021, 0.003, "2.10e-3 mm²/s", "3.00e-3 mm²/s"},
		{"fraction of voxels as a percentage", "adc-out-of-range", 0.031, 0.02, "3.1%", "2.0%"},
		{"phantom ADC", "phantom-adc-bias", 0.00117, 0.0011, "1.17e-3 mm²/s", "1.10e-3 mm²/s"},
		{"b-value sets", "bvalue-mismatch", []float64{0, 900}, []float64{0, 1000}, "0, 900 s/mm²", "0, 1000 s/mm²"},
		// A measured b-value read raw from an image reads to a tenth.
		{"measured b-values near 0 and 1000", "bvalue-mismatch", []float64{0.0020000000717118383, 999.9979999999283}, []float64{0, 1000}, "0, 1000 s/mm²", "0, 1000 s/mm²"},
		{"a count of images stays a number", "bvalue-mismatch", 3.0, 0.0, "3", "0"},
		{"a count of images without direction", "unknown-directions", 9.0, 0.0, "9", "0"},
		{"slices covered", "incomplete-series", 18.0, 20.0, "18", "20"},
		{"text stays text", "audit-failed", "pixel data compressed", "a series the audit can read and compute", "pixel data compressed", "a series the audit can read and compute"},
		{"geometry differences joined", "geometry-mismatch", []string{"volume 2: spacing", "volume 3: matrix"}, "the reference volume", "volume 2: spacing; volume 3: matrix", "the reference volume"},
		{"a slice offset in millimetres", "geometry-mismatch", 2.5, 0.0, "2.5 mm", "0.0 mm"},
		{"undefined is empty", "low-snr", nil, 8.0, "", "8"},
	} {
		t.Run(c.name, func(t *testing.T) {
			m, _ := json.Marshal(c.measured)
			e, _ := json.Marshal(c.expected)
			if got := report.Value(c.rule, m, e, true); got != c.wantM {
				t.Errorf("measured %q, want %q", got, c.wantM)
			}
			if got := report.Value(c.rule, m, e, false); got != c.wantE {
				t.Errorf("expected %q, want %q", got, c.wantE)
			}
		})
	}
}

func TestLinksUseTheConfiguredBase(t *testing.T) {
	for _, c := range []struct{ base, want string }{
		{"", "/studies/1.2.3#series-1.2.3.4"},
		{"https://dwiaudit.quellvander.test", "https://dwiaudit.quellvander.test/studies/1.2.3#series-1.2.3.4"},
		{"https://quellvander.test/dwiaudit/", "https://quellvander.test/dwiaudit/studies/1.2.3#series-1.2.3.4"},
	} {
		t.Run("base "+c.base, func(t *testing.T) {
			if got := report.SeriesLink(c.base, "1.2.3", "1.2.3.4"); got != c.want {
				t.Errorf("%q, want %q", got, c.want)
			}
		})
	}
}

// TestTheCSVRoundTripsTheJSON reads the CSV with encoding/csv (RFC 4180)
// and the JSON with encoding/json, and requires the same rows with the
// same values under the same names.
func TestTheCSVRoundTripsTheJSON(t *testing.T) {
	b, _ := dayFixture(t)
	l, err := b.Daily("2026-12-01")
	if err != nil {
		t.Fatal(err)
	}
	// A value with a comma, a quote and a line break must survive too.
	l.Rows[0].Explanation = "b0 missing, \"all\" slices\nsecond line"
	var cb, jb bytes.Buffer
	if err := l.WriteCSV(&cb); err != nil {
		t.Fatal(err)
	}
	if err := l.WriteJSON(&jb); err != nil {
		t.Fatal(err)
	}
	recs, err := csv.NewReader(&cb).ReadAll()
	if err != nil {
		t.Fatalf("CSV does not parse: %v", err)
	}
	var doc struct {
		Rows []map[string]any `json:"rows"`
	}
	if err := json.Unmarshal(jb.Bytes(), &doc); err != nil {
		t.Fatal(err)
	}
	if len(recs) != len(doc.Rows)+1 || len(doc.Rows) != 3 {
		t.Fatalf("%d CSV records for %d JSON rows, want header + 3", len(recs), len(doc.Rows))
	}
	header := recs[0]
	for i, row := range doc.Rows {
		if len(row) != len(header) {
			t.Errorf("row %d: JSON has %d fields, CSV %d columns", i, len(row), len(header))
		}
		for j, col := range header {
			v, ok := row[col]
			if !ok {
				t.Errorf("CSV column %q is not a JSON field", col)
				continue
			}
			if got, want := recs[i+1][j], fmt.Sprint(v); got != want {
				t.Errorf("row %d %s: CSV %q, JSON %q", i, col, got, want)
			}
		}
	}
	if strings.Contains(cb.String(), "does not diagnose") {
		t.Error("the CSV carries the caution; it must stay pure data")
	}
}

func TestEveryReadableFormatCarriesTheCaution(t *testing.T) {
	b, _ := dayFixture(t)
	l, err := b.Daily("2026-12-01")
	if err != nil {
		t.Fatal(err)
	}
	c, err := b.Compliance("2026-12-01", "2026-12-01")
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range []report.Format{report.FormatText, report.FormatJSON, report.FormatHTML} {
		for _, w := range []interface {
			Write(*bytes.Buffer, report.Format) error
		}{dailyW{l}, complianceW{c}} {
			t.Run(fmt.Sprintf("%T as %v", w, f), func(t *testing.T) {
				var buf bytes.Buffer
				if err := w.Write(&buf, f); err != nil {
					t.Fatal(err)
				}
				if !strings.Contains(buf.String(), report.Caution) {
					t.Errorf("no caution in:\n%s", buf.String())
				}
				if f == report.FormatHTML {
					for _, bad := range []string{"<script", "<link", "src=", "@import", "url("} {
						if strings.Contains(buf.String(), bad) {
							t.Errorf("the page fetches something (%s)", bad)
						}
					}
					if !strings.Contains(buf.String(), "@media print") {
						t.Error("no print stylesheet")
					}
				}
			})
		}
	}
}

type dailyW struct{ l *report.DailyList }

func (d dailyW) Write(b *bytes.Buffer, f report.Format) error { return d.l.Write(b, f) }

type complianceW struct{ c *report.Compliance }

func (d complianceW) Write(b *bytes.Buffer, f report.Format) error { return d.c.Write(b, f) }

func TestTheHTMLListEscapesWhatTheFindingsSay(t *testing.T) {
	l := &report.DailyList{Day: "2026-12-01", Caution: report.Caution, Rows: []report.Row{{
		Rule: "audit-failed", Severity: "error", Explanation: `<img src=x onerror=alert(1)>`, Link: "/studies/1.2#series-1.2.3",
	}}}
	var buf bytes.Buffer
	if err := l.WriteHTML(&buf); err != nil {
		t.Fatal(err)
	}
	if strings.Contains(buf.String(), "<img") || !strings.Contains(buf.String(), "&lt;img") {
		t.Errorf("message not escaped:\n%s", buf.String())
	}
}

func TestABadDayOrFormatIsRefused(t *testing.T) {
	b, _ := dayFixture(t)
	for _, day := range []string{"2026-13-01", "2026-02-30", "yesterday", "2026-1-2", ""} {
		t.Run("day "+day, func(t *testing.T) {
			if _, err := b.Daily(day); err == nil {
				t.Error("no error")
			}
		})
	}
	if _, err := report.ParseFormat("pdf"); err == nil {
		t.Error("format pdf accepted")
	}
}

func TestTheTextTableKeepsOneLinePerFinding(t *testing.T) {
	l := &report.DailyList{Day: "2026-12-01", Caution: report.Caution, Rows: []report.Row{
		{Rule: "audit-failed", Severity: "error", SeriesDescription: "DWI\tb1000\nsecond line", Measured: "a\tb"},
		{Rule: "low-snr", Severity: "warning", Test: true},
	}}
	var buf bytes.Buffer
	if err := l.WriteText(&buf); err != nil {
		t.Fatal(err)
	}
	table, _, _ := strings.Cut(buf.String(), "Explanations:")
	var rows []string
	for _, line := range strings.Split(table, "\n") {
		if strings.HasPrefix(line, "error") || strings.HasPrefix(line, "warning") || strings.HasPrefix(line, "second") {
			rows = append(rows, line)
		}
	}
	if len(rows) != 2 || !strings.HasPrefix(rows[1], "warning (test)") {
		t.Errorf("table rows %q, want one per finding with the test one marked", rows)
	}
}

func TestTheTextTableCutsALongValueAndTheExplanationKeepsIt(t *testing.T) {
	reason := "1 file(s) of the series cannot be read (2.25.3129.dcm: dwi: pixel data does not match the header)"
	l := &report.DailyList{Day: "2026-12-01", Caution: report.Caution, Rows: []report.Row{
		{Rule: "audit-failed", Severity: "warning", Measured: reason, Expected: "a series the audit can read", Explanation: "could not be audited: " + reason},
	}}
	var buf bytes.Buffer
	if err := l.WriteText(&buf); err != nil {
		t.Fatal(err)
	}
	table, expl, _ := strings.Cut(buf.String(), "Explanations:")
	if strings.Contains(table, reason) || !strings.Contains(table, reason[:39]+"…") {
		t.Errorf("table does not cut the value to 40 characters:\n%s", table)
	}
	if !strings.Contains(expl, reason) {
		t.Errorf("explanation lost the whole value:\n%s", expl)
	}
}
