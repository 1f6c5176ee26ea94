package suite

// The demonstration's scenario: four days of synthetic studies from the
// three scanners of the invented Quellvander Ostmire Hospital, sent to
// a running node over the real DICOM path; each day's discrepancy list
// as the node serves it, the findings per rule with the planted defect
// behind each, the drifting scanner's phantom ADC, and where to look in
// the web pages.

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"path/filepath"
	"slices"
	"strings"
	"sync/atomic"
	"text/tabwriter"
	"time"

	"dwiaudit/audit/phantom"
	"dwiaudit/audit/report"
	"dwiaudit/rules"
	"dwiaudit/scp"
)

// accessionOf is the Accession Number phantom.Write gives a study of
// seed (audit/phantom/phantom.go), for the reader to find the study in
// the daily list.
func accessionOf(seed int64) string { return fmt.Sprintf("QOHSYN%06d", uint64(seed)%1000000) }

// demoDays is how many audit days the scenario covers, the last one
// today.
const demoDays = 4

// demoAuditTimeout bounds the wait for one day's audits: the day's
// studies audit in a few seconds on two cores; a minute means the node
// is stuck.
const demoAuditTimeout = 2 * time.Minute

// Scanner is one of the invented hospital's scanners as a peer of the
// node.
type Scanner struct {
	Label   string // scanner label (metrics, reports, web pages)
	AETitle string // the scanner's calling AE title
	Profile phantom.ScannerProfile
}

// Hospital is Quellvander Ostmire Hospital's three scanners: the
// station identities phantom.Scanners writes, with a label and an AE
// title each.
func Hospital() []Scanner {
	p := phantom.Scanners()
	return []Scanner{
		{"qoh-mr1-1.5t", "QOH_MR1", p[0]},
		{"qoh-mr2-3t", "QOH_MR2", p[1]},
		{"qoh-mr3-3t", "QOH_MR3", p[2]},
	}
}

// demoStudy is one study of the scenario and what its audit must show.
type demoStudy struct {
	day     int // 0 .. demoDays-1
	scanner int // index in Hospital
	plant   plant
	// bScale is the weighting the scanner applies relative to its
	// header (phantom.Options.AppliedBScale); 0 for exact.
	bScale float64
	// expect: each of these rules gives a finding of warning or above.
	expect []string
	// clean: no finding of warning or above at all.
	clean bool
	// silent: none of these rules gives any finding.
	silent []string
}

// name is how the output names the study's planted defect.
func (s demoStudy) name() string {
	if s.bScale != 0 {
		return fmt.Sprintf("%s(b%+.1f%%)", s.plant.name, 100*(s.bScale-1))
	}
	return s.plant.name
}

// driftScales is the weighting scanner qoh-mr1-1.5t applies relative to
// its header on each day, its gradient calibration drifting upward: the
// ice-water phantom reads its ADC that much high. Inside the ice-water
// profile's ±3.6% (from memory, docs/references.md#phantom-tolerance) for three days, outside it
// on the fourth.
func driftScales() [demoDays]float64 { return [demoDays]float64{1.005, 1.015, 1.03, 1.05} }

// demoScenario is the four days of studies: clean brains, at least one
// planted defect for every rule, two true lesions that must not be taken
// for artifacts, and a daily ice-water QA scan on the 1.5 T scanner
// whose weighting drifts upward.
func demoScenario() []demoStudy {
	byName := map[string]plant{}
	for _, p := range rulePlants() {
		byName[p.name] = p
	}
	ruleStudy := func(day, scanner int, name string) demoStudy {
		p := byName[name]
		return demoStudy{day: day, scanner: scanner, plant: p, expect: []string{p.rule}}
	}
	clean := func(day, scanner int) demoStudy {
		return demoStudy{day: day, scanner: scanner, plant: cleanPlant(), clean: true}
	}
	lesion := func(day, scanner int, name string, c phantom.Case) demoStudy {
		// A true lesion is pathology, not an acquisition defect: the ADC
		// map is right, so neither artifact rule may call it one.
		return demoStudy{day: day, scanner: scanner, plant: plant{name, "", c, damageNone},
			silent: []string{rules.HotspotID, rules.IDADCOutOfRange}}
	}
	drift := driftScales()
	qa := func(day int) demoStudy {
		s := demoStudy{day: day, scanner: 0, plant: plant{"ice-water-qa", "", phantom.CaseIceWater0C, damageNone}, bScale: drift[day]}
		if math.Abs(drift[day]-1) > 0.036 { // the ice-water profile's tolerance (from memory, docs/references.md#phantom-tolerance)
			s.expect = []string{rules.IDPhantomADCBias}
		} else {
			s.clean = true
		}
		return s
	}
	return []demoStudy{
		// Day 1.
		clean(0, 0), qa(0),
		clean(0, 1), ruleStudy(0, 1, "no-b0"),
		lesion(0, 2, "restriction-lesion", phantom.CaseRestrictionLesion), ruleStudy(0, 2, "bvalue-set-differs"),
		// Day 2.
		qa(1), ruleStudy(1, 0, "b0-artifact-dropout"),
		ruleStudy(1, 1, "missing-slices"),
		{day: 1, scanner: 1, plant: plant{"scanner-adc-correct", "", phantom.CaseScannerADCCorrect, damageNone}, clean: true},
		clean(1, 2), ruleStudy(1, 2, "low-snr"),
		// Day 3.
		qa(2), ruleStudy(2, 0, "bvalue-header-wrong"),
		ruleStudy(2, 1, "slice-positions-differ"), ruleStudy(2, 1, "truncated-file"),
		ruleStudy(2, 2, "scanner-adc-misscaled"), lesion(2, 2, "t2-shine-through", phantom.CaseT2ShineThrough),
		// Day 4.
		qa(3), clean(3, 0),
		{day: 3, scanner: 1, plant: plant{"b0-artifact-aliasing", rules.HotspotID, phantom.CaseB0ArtifactAliasing, damageNone}, expect: []string{rules.HotspotID}},
		{day: 3, scanner: 1, plant: plant{"compressed-file", rules.IDAuditFailed, phantom.CaseClean, damageCompressed}, expect: []string{rules.IDAuditFailed}},
		ruleStudy(3, 2, "ice-water-warm"), clean(3, 2),
	}
}

// demoClock is the node's clock during the demo. While the scenario
// runs it is a whole number of days back from the day the demo started,
// at a time of day that leaves the scenario far from midnight (the real
// time of day, at the latest demoLatestHour), moving on with the real
// clock: each scenario day's studies are received and audited on that
// day even if the real midnight passes meanwhile. Once the scenario is
// done (live) it is the real clock, for whatever the node receives next.
type demoClock struct {
	daysBack atomic.Int64
	live     atomic.Bool
	origin   time.Time // the scenario's first instant, on the demo's start day (set by begin)
	began    time.Time // the real time begin was called: the clock moves on from origin with it
}

// demoLatestHour is the latest hour of the day the scenario clock starts
// at: the demo takes well under a minute, so it stays before midnight.
const demoLatestHour = 22

// begin anchors the scenario clock at now (the real time, or a test's),
// in loc.
func (c *demoClock) begin(now time.Time, loc *time.Location) {
	now = now.In(loc)
	c.began, c.origin = time.Now(), now
	if now.Hour() >= demoLatestHour {
		y, m, d := now.Date()
		c.origin = time.Date(y, m, d, demoLatestHour, 0, 0, 0, loc)
	}
}

func (c *demoClock) Now() time.Time {
	if c.live.Load() {
		return time.Now()
	}
	return c.origin.Add(time.Since(c.began)).AddDate(0, 0, -int(c.daysBack.Load()))
}

// Node is where the demonstration's node listens, and how it is set.
type Node struct {
	DICOMAddr string        // host:port of its DICOM acceptor
	HTTPAddr  string        // host:port of its HTTP listener
	AETitle   string        // its AE title
	Settle    time.Duration // its audit.settle, for the output
}

// Scenario is one run of the demonstration's four days against a node.
// Its clock (Now) is the node's: the scenario walks the node through
// the days.
type Scenario struct {
	studiesDir string
	loc        *time.Location
	scanners   []Scanner
	scenario   []demoStudy
	clock      demoClock

	node Node
	w    io.Writer
	// Filled day by day.
	days    []string            // audit day of each scenario day
	studies map[string]int      // study UID -> index in scenario
	series  map[string]int      // series UID -> index in scenario
	audits  map[int][]auditView // scenario day -> the audits of its studies
}

// NewScenario is the scenario writing its studies under studiesDir, in
// the node's time zone loc; its clock starts demoDays-1 days back.
func NewScenario(studiesDir string, loc *time.Location) *Scenario {
	d := &Scenario{studiesDir: studiesDir, loc: loc, scanners: Hospital(), scenario: demoScenario()}
	d.clock.begin(time.Now(), loc)
	d.clock.daysBack.Store(demoDays - 1)
	return d
}

// Now is the node's clock during the scenario: each scenario day in
// turn, then the real clock once Run is done.
func (d *Scenario) Now() time.Time { return d.clock.Now() }

// Run sends each day's studies to the node, awaits their audits and
// prints the day's discrepancy list, then the summary, on w. It reports
// whether every study showed what it planted.
func (d *Scenario) Run(ctx context.Context, w io.Writer, node Node) (bool, error) {
	d.w, d.node = w, node
	d.studies, d.series, d.audits = map[string]int{}, map[string]int{}, map[int][]auditView{}
	client := newFindingsClient("http://" + node.HTTPAddr)
	for day := range demoDays {
		d.clock.daysBack.Store(int64(demoDays - 1 - day))
		if err := d.runDay(ctx, client, day); err != nil {
			return false, fmt.Errorf("day %d: %w", day+1, err)
		}
	}
	d.clock.live.Store(true)
	return d.printSummary(w), nil
}

// runDay writes, sends and awaits the audits of one scenario day's
// studies, then prints that day's list.
func (d *Scenario) runDay(ctx context.Context, client *findingsClient, day int) error {
	w := d.w
	now := d.clock.Now().In(d.loc)
	dayName := now.Format(time.DateOnly)
	d.days = append(d.days, dayName)
	fmt.Fprintf(w, "\n== %s, day %d of %d\n", dayName, day+1, demoDays)

	// Write the day's studies, one folder per scanner so that each
	// scanner sends its own over its own associations.
	perScanner := make([][]string, len(d.scanners))
	var uids []string
	nth := make([]int, len(d.scanners))
	for i, s := range d.scenario {
		if s.day != day {
			continue
		}
		sc := d.scanners[s.scanner]
		at := time.Date(now.Year(), now.Month(), now.Day(), 8, 0, 0, 0, time.UTC).Add(time.Duration(nth[s.scanner]) * 35 * time.Minute)
		nth[s.scanner]++
		dir := filepath.Join(d.studiesDir, fmt.Sprintf("day%d", day+1), sc.Label, fmt.Sprintf("%02d-%s", i, s.plant.name))
		opt := phantom.Options{
			Matrix: suiteMatrix, Slices: suiteSlices, Seed: int64(1000 + i),
			Scanner: sc.Profile, StudyDate: at, AppliedBScale: s.bScale,
			PatientID: fmt.Sprintf("QOH-SYN-%04d", i+1), PatientName: "TEST^SYNTHETIC",
		}
		if s.plant.cse == phantom.CaseIceWater0C || s.plant.cse == phantom.CaseIceWaterWarm {
			opt.PatientName = "QA^ICEWATER"
		}
		st, err := writePlant(dir, s.plant, opt)
		if err != nil {
			return err
		}
		perScanner[s.scanner] = append(perScanner[s.scanner], dir)
		uids = append(uids, st.StudyUID)
		d.studies[st.StudyUID] = i
		for _, se := range st.Series {
			d.series[se.UID] = i
		}
		fmt.Fprintf(w, "  sent  %-13s %s  %-22s accession %s  study %s\n", sc.Label, at.Format("15:04"), s.name(), accessionOf(opt.Seed), st.StudyUID)
	}

	sendStart := time.Now()
	files := 0
	for i, dirs := range perScanner {
		if len(dirs) == 0 {
			continue
		}
		sc := d.scanners[i]
		dialer := &scp.Dialer{CallingAETitle: sc.AETitle, CalledAETitle: d.node.AETitle}
		sum, err := sendStudies(ctx, dialer, d.node.DICOMAddr, dirs)
		if err != nil {
			return fmt.Errorf("sending from %s: %w", sc.Label, err)
		}
		files += sum.Files
	}
	sent := time.Since(sendStart)

	audits, err := awaitAudits(ctx, client, []string{dayName}, uids, time.Now().Add(demoAuditTimeout))
	if err != nil {
		return err
	}
	d.audits[day] = audits
	fmt.Fprintf(w, "  %d studies, %d files sent with C-STORE in %v; audited %v after the last file (settle %v)\n",
		len(uids), files, sent.Round(10*time.Millisecond), time.Since(sendStart.Add(sent)).Round(10*time.Millisecond), d.node.Settle)
	fmt.Fprintln(w)
	return d.printDailyList(ctx, w, client, dayName)
}

// printDailyList prints the day's discrepancy list as the node serves
// it (GET /api/v1/reports/daily/<day>.json, built by audit/report),
// rendered with audit/report's text renderer.
func (d *Scenario) printDailyList(ctx context.Context, w io.Writer, client *findingsClient, day string) error {
	var raw json.RawMessage
	if err := client.get(ctx, "/api/v1/reports/daily/"+day+".json", &raw); err != nil {
		return err
	}
	list, err := report.ParseDailyList(raw)
	if err != nil {
		return err
	}
	return list.WriteText(w)
}

// studyResult is what the audits of one scenario study show.
type studyResult struct {
	fired    map[string]bool // rules with a finding of warning or above
	count    map[string]int  // findings of warning or above per rule
	any      map[string]bool // rules with any finding
	worst    rules.Severity
	hasWorst bool
	studyUID string
	phantom  *float64 // central phantom ADC, mm²/s, when measured
	expected *float64 // its profile's value
}

// results gathers the audits per scenario study.
func (d *Scenario) results() map[int]*studyResult {
	out := map[int]*studyResult{}
	for _, audits := range d.audits {
		for _, a := range audits {
			i, ok := d.studies[a.StudyUID]
			if !ok {
				continue
			}
			r := out[i]
			if r == nil {
				r = &studyResult{fired: map[string]bool{}, count: map[string]int{}, any: map[string]bool{}, studyUID: a.StudyUID}
				out[i] = r
			}
			for _, f := range a.findings {
				r.any[f.Rule] = true
				if f.Severity >= rules.SeverityWarning {
					r.fired[f.Rule] = true
					r.count[f.Rule]++
				}
				if !r.hasWorst || f.Severity > r.worst {
					r.worst, r.hasWorst = f.Severity, true
				}
			}
			if a.measures.PhantomADC != nil {
				r.phantom = a.measures.PhantomADC
			}
			if a.measures.PhantomExpectedADC != nil {
				r.expected = a.measures.PhantomExpectedADC
			}
		}
	}
	return out
}

// printSummary prints the findings per rule, the drifting scanner's
// phantom ADC, the scenario check and the URLs to look at; it reports
// whether every study showed what it planted.
func (d *Scenario) printSummary(w io.Writer) bool {
	res := d.results()
	where := func(i int) string {
		s := d.scenario[i]
		return fmt.Sprintf("%s (%s, %s)", s.name(), d.scanners[s.scanner].Label, d.days[s.day])
	}

	fmt.Fprintf(w, "\n== Findings per rule over the %d days (warning or above)\n", demoDays)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "  rule\tfindings\tstudies\ton the planted studies\t")
	for _, id := range RuleIDs() {
		var on []string
		n := 0
		for i := range d.scenario {
			if r := res[i]; r != nil && r.fired[id] {
				on = append(on, where(i))
				n += r.count[id]
			}
		}
		fmt.Fprintf(tw, "  %s\t%d\t%d\t%s\t\n", id, n, len(on), strings.Join(on, "; "))
	}
	tw.Flush()

	drift := driftScales()
	label := d.scanners[0].Label
	fmt.Fprintf(w, "\n== Ice-water phantom on %s, day by day (its gradient calibration drifts: weighting %+.1f%% to %+.1f%%)\n",
		label, 100*(drift[0]-1), 100*(drift[demoDays-1]-1))
	for i, s := range d.scenario {
		if s.plant.name != "ice-water-qa" {
			continue
		}
		r := res[i]
		if r == nil || r.phantom == nil || r.expected == nil {
			fmt.Fprintf(w, "  %s  no phantom ADC measured\n", d.days[s.day])
			continue
		}
		verdict := "within tolerance"
		if r.fired[rules.IDPhantomADCBias] {
			verdict = "phantom-adc-bias"
		}
		fmt.Fprintf(w, "  %s  central ADC %.3fe-3 mm²/s, expected %.2fe-3 (%+.1f%%)  %s\n",
			d.days[s.day], 1e3**r.phantom, 1e3**r.expected, 100*(*r.phantom / *r.expected - 1), verdict)
	}

	fmt.Fprintln(w, "\n== Scenario check: what each study planted against what the node found")
	allOK := true
	tw = tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	for i, s := range d.scenario {
		r := res[i]
		var problems []string
		if r == nil {
			problems = append(problems, "no audit")
			r = &studyResult{fired: map[string]bool{}, any: map[string]bool{}}
		}
		want := "no warning or error"
		for _, id := range s.expect {
			want = id
			if !r.fired[id] {
				problems = append(problems, id+" did not fire")
			}
		}
		if s.clean && r.hasWorst && r.worst >= rules.SeverityWarning {
			problems = append(problems, "expected no warning or error")
		}
		if len(s.silent) > 0 {
			want = "neither " + strings.Join(s.silent, " nor ")
		}
		for _, id := range s.silent {
			if r.any[id] {
				problems = append(problems, id+" fired")
			}
		}
		var found []string
		for id := range r.fired {
			found = append(found, id)
		}
		slices.Sort(found)
		got := strings.Join(found, ", ")
		if got == "" {
			got = "no warning or error"
		}
		verdict := "ok"
		if len(problems) > 0 {
			verdict = "NOT AS PLANTED: " + strings.Join(problems, "; ")
			allOK = false
		}
		fmt.Fprintf(tw, "  %s\t%s\t%s\twant %s\tfound %s\t%s\t\n", d.days[s.day], d.scanners[s.scanner].Label, s.name(), want, got, verdict)
	}
	tw.Flush()
	if allOK {
		fmt.Fprintln(w, "  every rule fired on its planted study; the clean studies and the true lesions gave no artifact finding")
	}

	// One flagged study for the study page: the first with an error.
	flagged := ""
	for i := range d.scenario {
		if r := res[i]; r != nil && r.hasWorst && r.worst >= rules.SeverityError {
			flagged = r.studyUID
			break
		}
	}
	base := "http://" + d.node.HTTPAddr
	last := d.days[len(d.days)-1]
	fmt.Fprintln(w, "\n== Where to look (the web pages and metrics of this node)")
	fmt.Fprintf(w, "  overview              %s/\n", base)
	fmt.Fprintf(w, "  the last day          %s/days/%s\n", base, last)
	if flagged != "" {
		fmt.Fprintf(w, "  a flagged study       %s/studies/%s\n", base, flagged)
	}
	fmt.Fprintf(w, "  the drifting scanner  %s/scanners/%s\n", base, label)
	fmt.Fprintf(w, "  Prometheus metrics    %s/metrics\n", base)
	fmt.Fprintf(w, "  printable daily list  %s/api/v1/reports/daily/%s.html\n", base, last)
	fmt.Fprintf(w, "  findings as JSON      %s/api/v1/findings?day=%s\n", base, last)
	return allOK
}
