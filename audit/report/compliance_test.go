package report_test

import (
	"errors"
	"fmt"
	"testing"
	"time"

	"dwiaudit/audit/report"
	"dwiaudit/rules"
	"dwiaudit/store"
)

// complianceFixture: two weeks at the invented hospital. Previous period
// 2026-12-01..07: brain on hv-mr1, 4 studies, 1 clean; prostate on
// hv-mr2, 2 studies, both clean. Current 2026-12-08..14: brain on
// hv-mr1, 4 studies, 3 clean (one more with only an info finding); 3
// test studies with errors, which must not count; one study with a
// brain series and a prostate series. Audits outside both periods must
// not count either.
func complianceFixture(t *testing.T) *report.Builder {
	t.Helper()
	loc := quellvander(t)
	c := &clock{t: time.Date(2026, 12, 15, 9, 0, 0, 0, loc)}
	s, _ := newStore(t, loc, c.Now)
	at := func(day, h int) time.Time { return time.Date(2026, 12, day, h, 0, 0, 0, loc) }
	n := 0
	next := func() study { n++; return newStudy(n) }
	f := func(rule string, sev rules.Severity) rules.Finding { return finding(rule, sev, "", 2, 1.0, 2.0) }
	var recs []store.AuditRecord
	// Previous period.
	recs = append(recs,
		audit(t, next(), 1, at(1, 9), "brain", "hv-mr1", false, f("missing-b0", rules.SeverityError)),
		audit(t, next(), 1, at(3, 9), "brain", "hv-mr1", false, f("low-snr", rules.SeverityWarning)),
		audit(t, next(), 1, at(5, 9), "brain", "hv-mr1", false, f("b0-only-hotspot", rules.SeverityWarning)),
		audit(t, next(), 1, at(7, 23), "brain", "hv-mr1", false),
		audit(t, next(), 1, at(2, 9), "prostate", "hv-mr2", false),
		audit(t, next(), 1, at(4, 9), "prostate", "hv-mr2", false),
	)
	// Current period: one study with two broken rules in two series.
	broken := next()
	recs = append(recs,
		audit(t, broken, 1, at(8, 0), "brain", "hv-mr1", false, f("missing-b0", rules.SeverityError)),
		audit(t, broken, 2, at(8, 0), "brain", "hv-mr1", false, f("bvalue-mismatch", rules.SeverityWarning)),
		audit(t, next(), 1, at(9, 9), "brain", "hv-mr1", false),
		audit(t, next(), 1, at(10, 9), "brain", "hv-mr1", false, f("low-snr", rules.SeverityInfo)),
	)
	mixed := next()
	recs = append(recs,
		audit(t, mixed, 1, at(14, 23), "brain", "hv-mr1", false),
		audit(t, mixed, 2, at(14, 23), "prostate", "hv-mr2", false, f("adc-out-of-range", rules.SeverityWarning)),
		audit(t, next(), 1, at(11, 9), "", "", false, f("audit-failed", rules.SeverityError)),
	)
	for range 3 {
		recs = append(recs, audit(t, next(), 1, at(12, 9), "brain", "hv-mr1", true, f("missing-b0", rules.SeverityError)))
	}
	// Outside both periods.
	recs = append(recs,
		audit(t, next(), 1, at(15, 1), "brain", "hv-mr1", false, f("missing-b0", rules.SeverityError)),
		audit(t, next(), 1, time.Date(2026, 11, 30, 23, 0, 0, 0, loc), "brain", "hv-mr1", false, f("missing-b0", rules.SeverityError)),
	)
	saveAudits(t, s, recs...)
	return &report.Builder{Source: s, Location: loc, Now: c.Now}
}

func pp(v *float64) string {
	if v == nil {
		return "nil"
	}
	return fmt.Sprintf("%.1f", *v)
}

func TestComplianceCountsStudiesPerProtocolAndScannerWithTheTrend(t *testing.T) {
	b := complianceFixture(t)
	c, err := b.Compliance("2026-12-08", "2026-12-14")
	if err != nil {
		t.Fatal(err)
	}
	if c.PreviousFrom != "2026-12-01" || c.PreviousTo != "2026-12-07" || c.Days != 7 {
		t.Errorf("previous period %s..%s (%d days), want 2026-12-01..2026-12-07 (7)", c.PreviousFrom, c.PreviousTo, c.Days)
	}
	if want := time.Date(2026, 12, 15, 9, 0, 0, 0, quellvander(t)); !c.GeneratedAt.Equal(want) {
		t.Errorf("generated at %v, want the injected clock's %v", c.GeneratedAt, want)
	}
	if c.TestStudiesExcluded != 3 {
		t.Errorf("test studies excluded %d, want 3", c.TestStudiesExcluded)
	}
	type row struct {
		protocol, scanner       string
		studies, compliant      int
		share, prevShare, delta string
		prevStudies             int
		top                     string
	}
	got := map[string]row{}
	for _, g := range append([]report.ComplianceGroup{c.Overall}, c.Groups...) {
		got[g.Protocol+"/"+g.Scanner] = row{g.Protocol, g.Scanner, g.Studies, g.Compliant, pp(g.SharePercent), pp(g.PreviousSharePercent), pp(g.DeltaPoints), g.PreviousStudies, fmt.Sprint(g.TopRules)}
	}
	want := map[string]row{
		// 5 studies now (test studies left out): broken, clean, info only,
		// mixed (broken in prostate), audit-failed; 2 compliant. Before:
		// 6 studies, 3 compliant.
		"all/all": {"all", "all", 5, 2, "40.0", "50.0", "-10.0", 6, "[{adc-out-of-range 1} {audit-failed 1} {bvalue-mismatch 1}]"},
		// brain: broken, clean, info-only, mixed's brain series: 3 of 4;
		// before 1 of 4: +50 points.
		"brain/hv-mr1":    {"brain", "hv-mr1", 4, 3, "75.0", "25.0", "50.0", 4, "[{bvalue-mismatch 1} {missing-b0 1}]"},
		"prostate/hv-mr2": {"prostate", "hv-mr2", 1, 0, "0.0", "100.0", "-100.0", 2, "[{adc-out-of-range 1}]"},
		report.NoProtocol + "/" + report.NoScanner: {report.NoProtocol, report.NoScanner, 1, 0, "0.0", "nil", "nil", 0, "[{audit-failed 1}]"},
	}
	if len(got) != len(want) {
		t.Errorf("groups %v, want %d", got, len(want))
	}
	for k, w := range want {
		if g := got[k]; g != w {
			t.Errorf("%s:\n got %+v\nwant %+v", k, g, w)
		}
	}
}

func TestATopRuleListKeepsTheThreeMostFrequent(t *testing.T) {
	loc := quellvander(t)
	s, _ := newStore(t, loc, nil)
	var recs []store.AuditRecord
	counts := map[string]int{"missing-b0": 3, "low-snr": 2, "bvalue-mismatch": 2, "b0-only-hotspot": 1}
	i := 0
	for rule, n := range counts {
		for range n {
			i++
			recs = append(recs, audit(t, newStudy(i), 1, time.Date(2026, 12, 3, 9, i, 0, 0, loc), "brain", "hv-mr1", false,
				finding(rule, rules.SeverityWarning, "", 2, 1.0, 2.0)))
		}
	}
	saveAudits(t, s, recs...)
	c, err := report.BuildCompliance(s, "2026-12-03", "2026-12-03", loc, time.Now())
	if err != nil {
		t.Fatal(err)
	}
	// Ties are broken by name.
	if got := fmt.Sprint(c.Overall.TopRules); got != "[{missing-b0 3} {bvalue-mismatch 2} {low-snr 2}]" {
		t.Errorf("top rules %s", got)
	}
}

func TestABadComplianceRangeIsRefused(t *testing.T) {
	b := complianceFixture(t)
	for _, c := range []struct {
		name, from, to string
		want           error
	}{
		{"to before from", "2026-12-10", "2026-12-01", report.ErrBadRange},
		{"longer than a year", "2024-01-01", "2026-01-01", report.ErrBadRange},
		{"a day that is not a date", "2026-12-32", "2026-12-31", report.ErrBadDay},
	} {
		t.Run(c.name, func(t *testing.T) {
			if _, err := b.Compliance(c.from, c.to); !errors.Is(err, c.want) {
				t.Errorf("err %v, want %v", err, c.want)
			}
		})
	}
}
