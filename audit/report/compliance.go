package report

import (
	"encoding/json"
	"fmt"
	"sort"
	"time"

	"dwiaudit/audit/record"
	"dwiaudit/store"
)

// Compliance limits.
const (
	// maxComplianceDays bounds a compliance range: a year, the longest
	// period a department compares (with the year before it, two years
	// of audits are read).
	maxComplianceDays = 366
	// TopRules is how many of the most frequent rules a group lists.
	TopRules = 3
)

// Names of groups whose series had no protocol or scanner label.
const (
	NoProtocol = "(no protocol)"
	NoScanner  = "(unknown scanner)"
)

// Compliance is the compliance report for [From, To] (whole days in the
// node's time zone), with the period of equal length just before it
// ([PreviousFrom, PreviousTo]) for the trend. Test studies are left out.
type Compliance struct {
	From         string    `json:"from"`
	To           string    `json:"to"`
	Days         int       `json:"days"`
	PreviousFrom string    `json:"previous_from"`
	PreviousTo   string    `json:"previous_to"`
	TimeZone     string    `json:"time_zone"`
	GeneratedAt  time.Time `json:"generated_at"`
	Caution      string    `json:"caution"`
	// TestStudiesExcluded counts the test studies of [From, To] left out.
	TestStudiesExcluded int `json:"test_studies_excluded"`
	// Overall counts every study once, whatever its protocols and
	// scanners (Protocol and Scanner "all").
	Overall ComplianceGroup `json:"overall"`
	// Groups has one entry per protocol and scanner seen in either
	// period, sorted by protocol, then scanner.
	Groups []ComplianceGroup `json:"groups"`
}

// ComplianceGroup is one protocol on one scanner. A study is counted in
// every group one of its audited series falls in, and is compliant in a
// group when none of that group's series has a finding of severity
// warning or error.
type ComplianceGroup struct {
	Protocol  string `json:"protocol"`
	Scanner   string `json:"scanner"`
	Studies   int    `json:"studies"`
	Compliant int    `json:"compliant_studies"`
	// SharePercent is Compliant/Studies in percent; nil without studies.
	SharePercent *float64 `json:"share_percent"`
	// TopRules are the rules with a warning or error in most of the
	// group's studies (at most TopRules, most studies first, then by
	// name).
	TopRules []RuleCount `json:"top_rules"`
	// The same for the previous period.
	PreviousStudies      int      `json:"previous_studies"`
	PreviousCompliant    int      `json:"previous_compliant_studies"`
	PreviousSharePercent *float64 `json:"previous_share_percent"`
	// DeltaPoints is SharePercent - PreviousSharePercent in percentage
	// points; nil unless both are defined.
	DeltaPoints *float64 `json:"delta_points"`
}

// RuleCount is how many studies of a group broke a rule.
type RuleCount struct {
	Rule    string `json:"rule"`
	Studies int    `json:"studies"`
}

// ComplianceSource is what the compliance report reads (*store.Store
// has it).
type ComplianceSource interface {
	Findings(day string) ([]store.AuditRecord, error)
}

// groupKey names a group.
type groupKey struct{ protocol, scanner string }

// tally is one period's counts.
type tally struct {
	// per group, per study: the rules with a warning or worse
	groups map[groupKey]map[string]map[string]bool
	// per study, overall
	studies map[string]map[string]bool
	tests   map[string]bool
}

// Compliance builds the compliance report for [from, to] (YYYY-MM-DD,
// inclusive) from the Builder's Source.
func (b *Builder) Compliance(from, to string) (*Compliance, error) {
	return BuildCompliance(b.Source, from, to, b.loc(), b.now())
}

// BuildCompliance builds the compliance report for [from, to] from src
// (days in loc; now is GeneratedAt).
func BuildCompliance(src ComplianceSource, from, to string, loc *time.Location, now time.Time) (*Compliance, error) {
	if loc == nil {
		loc = time.Local
	}
	f, err := parseDay(from, loc)
	if err != nil {
		return nil, fmt.Errorf("from: %w", err)
	}
	t, err := parseDay(to, loc)
	if err != nil {
		return nil, fmt.Errorf("to: %w", err)
	}
	if t.Before(f) {
		return nil, fmt.Errorf("%w: from %s is after to %s", ErrBadRange, from, to)
	}
	days := daysBetween(f, t) + 1
	if days > maxComplianceDays {
		return nil, fmt.Errorf("%w: %d days, at most %d", ErrBadRange, days, maxComplianceDays)
	}
	pf, pt := f.AddDate(0, 0, -days), f.AddDate(0, 0, -1)
	cur, err := count(src, f, days)
	if err != nil {
		return nil, err
	}
	prev, err := count(src, pf, days)
	if err != nil {
		return nil, err
	}
	c := &Compliance{
		From: from, To: to, Days: days,
		PreviousFrom:        pf.Format(dayLayout),
		PreviousTo:          pt.Format(dayLayout),
		TimeZone:            zoneName(loc, now),
		GeneratedAt:         now.In(loc).Truncate(time.Second),
		Caution:             Caution,
		TestStudiesExcluded: len(cur.tests),
		Groups:              []ComplianceGroup{},
	}
	c.Overall = group("all", "all", cur.studies, prev.studies)
	keys := map[groupKey]bool{}
	for k := range cur.groups {
		keys[k] = true
	}
	for k := range prev.groups {
		keys[k] = true
	}
	for k := range keys {
		c.Groups = append(c.Groups, group(k.protocol, k.scanner, cur.groups[k], prev.groups[k]))
	}
	sort.Slice(c.Groups, func(i, j int) bool {
		a, b := c.Groups[i], c.Groups[j]
		if a.Protocol != b.Protocol {
			return a.Protocol < b.Protocol
		}
		return a.Scanner < b.Scanner
	})
	return c, nil
}

// daysBetween counts calendar days from a to b (midnights in the same
// zone; a DST change makes a day 23 or 25 hours).
func daysBetween(a, b time.Time) int {
	ua := time.Date(a.Year(), a.Month(), a.Day(), 0, 0, 0, 0, time.UTC)
	ub := time.Date(b.Year(), b.Month(), b.Day(), 0, 0, 0, 0, time.UTC)
	return int(ub.Sub(ua) / (24 * time.Hour))
}

// count reads days days of audits from first on.
func count(src ComplianceSource, first time.Time, days int) (*tally, error) {
	t := &tally{groups: map[groupKey]map[string]map[string]bool{}, studies: map[string]map[string]bool{}, tests: map[string]bool{}}
	for i := range days {
		day := first.AddDate(0, 0, i).Format(dayLayout)
		recs, err := src.Findings(day)
		if err != nil {
			return nil, fmt.Errorf("report: audits of %s: %w", day, err)
		}
		for _, rec := range recs {
			if rec.TestPatient {
				t.tests[rec.StudyInstanceUID] = true
				continue
			}
			m, _, err := record.DecodeMeasures(rec.Measures)
			if err != nil {
				return nil, fmt.Errorf("%w: measures of an audit of %s: %v", errBadRecord, day, err)
			}
			var fs []finding
			if err := json.Unmarshal(rec.Findings, &fs); err != nil {
				return nil, fmt.Errorf("%w: findings of an audit of %s: %v", errBadRecord, day, err)
			}
			k := groupKey{firstNonEmpty(m.Protocol, NoProtocol), firstNonEmpty(rec.Scanner, NoScanner)}
			g := t.groups[k]
			if g == nil {
				g = map[string]map[string]bool{}
				t.groups[k] = g
			}
			inGroup, overall := g[rec.StudyInstanceUID], t.studies[rec.StudyInstanceUID]
			if inGroup == nil {
				inGroup = map[string]bool{}
				g[rec.StudyInstanceUID] = inGroup
			}
			if overall == nil {
				overall = map[string]bool{}
				t.studies[rec.StudyInstanceUID] = overall
			}
			for _, f := range fs {
				if SeverityRank(f.Severity) >= SeverityRank("warning") {
					inGroup[f.Rule] = true
					overall[f.Rule] = true
				}
			}
		}
	}
	return t, nil
}

// group sums one group's studies (study UID -> rules broken) of both
// periods.
func group(protocol, scanner string, cur, prev map[string]map[string]bool) ComplianceGroup {
	g := ComplianceGroup{Protocol: protocol, Scanner: scanner, TopRules: []RuleCount{}}
	rules := map[string]int{}
	for _, broken := range cur {
		g.Studies++
		if len(broken) == 0 {
			g.Compliant++
		}
		for r := range broken {
			rules[r]++
		}
	}
	for _, broken := range prev {
		g.PreviousStudies++
		if len(broken) == 0 {
			g.PreviousCompliant++
		}
	}
	g.SharePercent = share(g.Compliant, g.Studies)
	g.PreviousSharePercent = share(g.PreviousCompliant, g.PreviousStudies)
	if g.SharePercent != nil && g.PreviousSharePercent != nil {
		d := *g.SharePercent - *g.PreviousSharePercent
		g.DeltaPoints = &d
	}
	for r, n := range rules {
		g.TopRules = append(g.TopRules, RuleCount{Rule: r, Studies: n})
	}
	sort.Slice(g.TopRules, func(i, j int) bool {
		if g.TopRules[i].Studies != g.TopRules[j].Studies {
			return g.TopRules[i].Studies > g.TopRules[j].Studies
		}
		return g.TopRules[i].Rule < g.TopRules[j].Rule
	})
	if len(g.TopRules) > TopRules {
		g.TopRules = g.TopRules[:TopRules]
	}
	return g
}

func share(n, of int) *float64 {
	if of == 0 {
		return nil
	}
	v := 100 * float64(n) / float64(of)
	return &v
}
