package web

import (
	"html"
	"net/http"
	"regexp"
	"strings"
	"testing"
	"time"

	"dwiaudit/audit/phantom"
	"dwiaudit/store"
)

// cautionHTML is Caution as html/template writes it.
var cautionHTML = html.EscapeString(Caution)

// noIdentifiers checks that a page shows no patient name and no patient
// ID in full (the phantoms' are invented: TEST^SYNTHETIC, QOH-SYN-...).
func noIdentifiers(t *testing.T, page, body string) {
	t.Helper()
	if !strings.Contains(body, cautionHTML) {
		t.Errorf("%s lacks the caution", page)
	}
	for _, id := range []string{"SYNTHETIC", "QOH-SYN-"} {
		if strings.Contains(body, id) {
			t.Errorf("%s shows %q", page, id)
		}
	}
}

func TestDailyListPage(t *testing.T) {
	st := newTestStore(t)
	a := putPhantom(t, st, phantom.Options{Case: phantom.CaseNoB0, Seed: 1, PatientID: "QOH-SYN-0101"}, "qoh-mr1-1.5t")
	b := putPhantom(t, st, phantom.Options{Case: phantom.CaseClean, Seed: 2, PatientID: "QOH-SYN-0202"}, "qoh-mr1-1.5t")
	today := time.Date(2025, 3, 20, 9, 0, 0, 0, qoh)
	saveAudit(t, st, store.AuditRecord{AuditTime: today, StudyInstanceUID: b.StudyUID, SeriesUID: dwiSeries(t, b), Scanner: "qoh-mr1-1.5t", TestPatient: true},
		[]map[string]any{{"rule": "low-snr", "severity": "warning", "series_number": 2, "series_description": "DWI", "message": "b0 SNR low", "measured": 8.0, "expected": 10.0}}, nil)
	saveAudit(t, st, store.AuditRecord{AuditTime: today.Add(time.Hour), StudyInstanceUID: a.StudyUID, SeriesUID: dwiSeries(t, a), Scanner: "qoh-mr1-1.5t"},
		[]map[string]any{{"rule": "missing-b0", "severity": "error", "series_number": 2, "series_description": "DWI", "message": "no b0 <here>", "measured": []float64{1000}, "expected": []float64{0}}}, nil)
	// An audit three days before, for the links to other days.
	saveAudit(t, st, store.AuditRecord{AuditTime: today.AddDate(0, 0, -3), StudyInstanceUID: "2.25.77", SeriesUID: "2.25.77.2"}, nil, nil)
	h := newPages(t, st, nil)

	code, body := getPage(t, h, "/")
	if code != http.StatusOK {
		t.Fatalf("GET /: %d\n%s", code, body)
	}
	noIdentifiers(t, "today's list", body)
	for _, want := range []string{
		"Today&#39;s discrepancies (2025-03-20)",
		`<code class="rule">missing-b0</code>`, `<code class="rule">low-snr</code>`,
		`href="/studies/` + a.StudyUID + `#series-` + dwiSeries(t, a) + `"`,
		"*********101",          // the masked patient ID (report.PatientIDMasked)
		"no b0 &lt;here&gt;",    // messages are escaped
		"1000 s/mm²", "0 s/mm²", // b-values with their unit (report.Value)
		`<span class="test">test</span>`,
		`href="/days/2025-03-17"`,
		"<strong>2</strong> studies audited",
	} {
		if !strings.Contains(body, want) {
			t.Errorf("today's list lacks %q", want)
		}
	}
	if e, w := strings.Index(body, "missing-b0</code>"), strings.Index(body, "low-snr</code>"); e < 0 || w < 0 || e > w {
		t.Errorf("the error row (at %d) should come before the warning row (at %d), though audited later", e, w)
	}

	t.Run("a past day shows its own list and links back", func(t *testing.T) {
		code, body := getPage(t, h, "/days/2025-03-17")
		if code != http.StatusOK || !strings.Contains(body, "Discrepancies of 2025-03-17") || strings.Contains(body, "missing-b0</code>") ||
			!strings.Contains(body, "every audited series passed") || !strings.Contains(body, `href="/days/2025-03-18"`) {
			t.Errorf("GET /days/2025-03-17: %d\n%s", code, body)
		}
		noIdentifiers(t, "a past day", body)
	})
	for _, bad := range []string{"/days/2025-13-01", "/days/yesterday", "/days/2025-3-4"} {
		t.Run("a malformed day "+bad+" is a 400 page with the caution", func(t *testing.T) {
			code, body := getPage(t, h, bad)
			if code != http.StatusBadRequest || !strings.Contains(body, "YYYY-MM-DD") {
				t.Errorf("GET %s: %d", bad, code)
			}
			noIdentifiers(t, bad, body)
		})
	}
}

func TestStudyPage(t *testing.T) {
	st := newTestStore(t)
	ph := putPhantom(t, st, phantom.Options{Case: phantom.CaseB0ArtifactAliasing, Seed: 3, PatientID: "QOH-SYN-0303", B0Series: true}, "qoh-mr1-1.5t")
	dwi := dwiSeries(t, ph)
	var b0 string
	for _, s := range ph.Series {
		if s.Number == 1 {
			b0 = s.UID
		}
	}
	at := time.Date(2025, 3, 20, 9, 0, 0, 0, qoh)
	saveAudit(t, st, store.AuditRecord{AuditTime: at, StudyInstanceUID: ph.StudyUID, SeriesUID: dwi, Scanner: "qoh-mr1-1.5t"},
		[]map[string]any{{"rule": "b0-only-hotspot", "severity": "error", "message": "b0 alone brighter", "measured": 0.00108, "expected": 0.0007,
			"region": map[string]any{"slices": []int{1}, "box_pixels": []int{4, 4, 6, 6}}}},
		map[string]any{"series_number": 2, "protocol": "brain", "bvalues": []float64{0, 1000}, "tissue_adc_median": 0.00079, "csf_adc": 0.00301,
			"b0_snr": 41.26, "high_b_tissue_snr": 12.0, "volumes": []map[string]any{
				{"bvalue": 0, "bvalue_measured": 0.0020000000717118383, "kind": "b0", "direction": nil, "images": 24, "slices": 12},
				{"bvalue": 1000, "bvalue_measured": 999.9979999999283, "kind": "direction", "direction": []float64{0, 0.6, 0.8}, "images": 12, "slices": 12},
			}})
	// Audited twice: the newer audit stands.
	saveAudit(t, st, store.AuditRecord{AuditTime: at.Add(-time.Hour), StudyInstanceUID: ph.StudyUID, SeriesUID: b0}, nil, nil)
	saveAudit(t, st, store.AuditRecord{AuditTime: at, StudyInstanceUID: ph.StudyUID, SeriesUID: b0}, nil,
		map[string]any{"series_number": 1, "cannot_compute": "no diffusion-weighted image"})
	h := newPages(t, st, nil)

	code, body := getPage(t, h, "/studies/"+ph.StudyUID)
	if code != http.StatusOK {
		t.Fatalf("GET study: %d\n%s", code, body)
	}
	noIdentifiers(t, "the study page", body)
	for _, want := range []string{
		`id="series-` + dwi + `"`, `id="series-` + b0 + `"`,
		`<img src="/api/v1/series/` + dwi + `/preview.png?slice=1"`,
		"0.79 ×10⁻³ mm²/s", "3.01 ×10⁻³ mm²/s", "41.3", // measures, ADC as ×10⁻³ mm²/s
		"1.08 ×10⁻³ mm²/s", "0.70 ×10⁻³ mm²/s", // the finding's measured and expected
		"b0-only-hotspot", "0, 1000 s/mm²", "brain", `href="/scanners/qoh-mr1-1.5t"`,
		"*******303",
		"The maps could not be computed: no diffusion-weighted image",
		"2 audits, the newest stands",
		// The gradient table: nominal b-values, the measured one beside.
		"Gradient table", `<tr class="kind-b0"><td class="num">0</td><td>b0</td><td class="num">—</td><td class="num">24</td><td class="num">12</td><td class="num">0.002</td></tr>`,
		`<tr class="kind-direction"><td class="num">1000</td><td>direction</td><td class="num">(0.000, 0.600, 0.800)</td><td class="num">12</td><td class="num">12</td><td class="num">999.998</td></tr>`,
	} {
		if !strings.Contains(body, want) {
			t.Errorf("the study page lacks %q", want)
		}
	}
	if n := strings.Count(body, "<img "); n != 1 {
		t.Errorf("%d preview images, want 1 (the series that could not be computed has none)", n)
	}

	t.Run("an unknown study is a 404 page", func(t *testing.T) {
		code, body := getPage(t, h, "/studies/2.25.999")
		if code != http.StatusNotFound || !strings.Contains(body, "no such study") {
			t.Errorf("GET unknown study: %d", code)
		}
		noIdentifiers(t, "the 404 page", body)
	})
}

func TestStudyPageNamesTheKindOfADerivedSeries(t *testing.T) {
	st := newTestStore(t)
	ph := putPhantom(t, st, phantom.Options{Case: phantom.CaseClean, Seed: 4, PatientID: "QOH-SYN-0404", B0Series: true}, "qoh-mr1-1.5t")
	dwi := dwiSeries(t, ph)
	var other string
	for _, s := range ph.Series {
		if s.UID != dwi {
			other = s.UID
		}
	}
	// The other series stands for a series of FA maps: the DWI series'
	// audit names it (record.Measures.Derived), and it has no audit.
	saveAudit(t, st, store.AuditRecord{AuditTime: time.Date(2025, 3, 20, 9, 0, 0, 0, qoh), StudyInstanceUID: ph.StudyUID, SeriesUID: dwi}, nil,
		map[string]any{"series_number": 2, "bvalues": []float64{0, 1000},
			"derived": []map[string]any{{"series_uid": other, "series_number": 1, "kind": "FA map", "images": 12}}})
	code, body := getPage(t, newPages(t, st, nil), "/studies/"+ph.StudyUID)
	if code != http.StatusOK {
		t.Fatalf("GET study: %d\n%s", code, body)
	}
	if !strings.Contains(body, `not audited: <span class="kind">FA map</span>, a map derived by the scanner`) {
		t.Errorf("the study page does not name the derived series' kind:\n%s", body)
	}
	if strings.Count(body, "not audited") != 1 {
		t.Errorf("%d series not audited, want the derived one only", strings.Count(body, "not audited"))
	}
}

func TestScannerPages(t *testing.T) {
	st := newTestStore(t)
	mk := func(c phantom.Case, seed int64, day int, label string) *phantom.Study {
		return putPhantom(t, st, phantom.Options{Case: c, Seed: seed, PatientID: "QOH-SYN-0400", StudyDate: time.Date(2025, 3, day, 8, 0, 0, 0, time.UTC)}, label)
	}
	auditAt := testNow.Add(-2 * time.Hour)
	brain := func(ph *phantom.Study, adc float64, test bool) {
		saveAudit(t, st, store.AuditRecord{AuditTime: auditAt, StudyInstanceUID: ph.StudyUID, SeriesUID: dwiSeries(t, ph), TestPatient: test}, nil,
			map[string]any{"series_number": 2, "tissue_adc_median": adc, "csf_adc": 0.003})
		auditAt = auditAt.Add(time.Minute)
	}
	water := func(ph *phantom.Study, adc float64) {
		saveAudit(t, st, store.AuditRecord{AuditTime: auditAt, StudyInstanceUID: ph.StudyUID, SeriesUID: dwiSeries(t, ph)}, nil,
			map[string]any{"series_number": 2, "protocol": "ice water", "tissue_adc_median": adc, "phantom_adc": adc, "phantom_expected_adc": 0.0011})
		auditAt = auditAt.Add(time.Minute)
	}
	brain(mk(phantom.CaseClean, 1, 10, "qoh-mr1-1.5t"), 0.00079, false)
	brain(mk(phantom.CaseClean, 2, 12, "qoh-mr1-1.5t"), 0.00081, false)
	brain(mk(phantom.CaseClean, 3, 14, "qoh-mr1-1.5t"), 0.00150, true) // a test patient: left out
	water(mk(phantom.CaseIceWater0C, 4, 11, "qoh-mr1-1.5t"), 0.00110)
	water(mk(phantom.CaseIceWaterWarm, 5, 13, "qoh-mr1-1.5t"), 0.00126) // +14.5%: outside ±3.6%
	brain(mk(phantom.CaseClean, 6, 12, "qoh-mr2-3t"), 0.00070, false)   // another scanner
	h := newPages(t, st, func(o *Options) { o.PhantomTolerance = func(string) float64 { return 0 } })

	code, body := getPage(t, h, "/scanners/qoh-mr1-1.5t")
	if code != http.StatusOK {
		t.Fatalf("GET scanner: %d\n%s", code, body)
	}
	noIdentifiers(t, "the scanner page", body)
	plots := regexp.MustCompile(`(?s)<figure class="trend">.*?</figure>`).FindAllString(body, -1)
	if len(plots) != 3 {
		t.Fatalf("%d plots, want 3", len(plots))
	}
	count := func(s, sub string) int { return strings.Count(s, sub) }
	// Parenchyma: the two department series (not the test patient's, not
	// the phantoms', not the other scanner's).
	if c := count(plots[0], `<circle class="pt"`); c != 2 {
		t.Errorf("parenchyma plot has %d points, want 2", c)
	}
	// Phantom: one point in the band, one square outside it, and the
	// band of 1.10e-3 ± 3.6% (DefaultPhantomTolerance, from memory).
	if c, o := count(plots[2], `<circle class="pt"`), count(plots[2], `<rect class="pt out"`); c != 1 || o != 1 {
		t.Errorf("phantom plot has %d points in the band and %d outside, want 1 and 1", c, o)
	}
	if !strings.Contains(plots[2], `<rect class="band"`) || !strings.Contains(body, "±3.6%") {
		t.Errorf("the phantom plot lacks its band or the tolerance in words")
	}
	if !strings.Contains(body, "1 test-patient series left out") || !strings.Contains(body, "(outside the band)") {
		t.Errorf("the page does not say what it left out or which point is outside the band")
	}
	// The two series were acquired on 10 and 12 March (study dates),
	// though audited minutes apart today.
	if !strings.Contains(plots[0], ">10 Mar") || !strings.Contains(plots[0], ">12 Mar") {
		t.Errorf("the x axis is not dated by the study dates (10-12 Mar 2025): %s", plots[0])
	}

	t.Run("the list of scanners has the configured and the seen labels", func(t *testing.T) {
		code, body := getPage(t, h, "/scanners")
		for _, want := range []string{`href="/scanners/qoh-mr1-1.5t"`, `href="/scanners/qoh-mr2-3t"`, "not a configured peer", `href="/scanners/qoh-mr3-3t"`, "nothing received yet"} {
			if code != http.StatusOK || !strings.Contains(body, want) {
				t.Errorf("GET /scanners: %d, lacks %q", code, want)
			}
		}
	})
	t.Run("a span outside 1 to 3650 days is a 400", func(t *testing.T) {
		for _, q := range []string{"0", "3651", "ten"} {
			if code, _ := getPage(t, h, "/scanners/qoh-mr1-1.5t?days="+q); code != http.StatusBadRequest {
				t.Errorf("days=%s: %d", q, code)
			}
		}
	})
	t.Run("a scanner without audits shows empty plots", func(t *testing.T) {
		code, body := getPage(t, h, "/scanners/qoh-mr3-3t")
		if code != http.StatusOK || strings.Count(body, "No values in this span.") != 3 || strings.Contains(body, "<svg") {
			t.Errorf("GET empty scanner: %d", code)
		}
	})
}

func TestTheStylesheetIsServedAndThePagesLoadNothingElse(t *testing.T) {
	h := newPages(t, newTestStore(t), nil)
	code, css := getPage(t, h, "/assets/style.css")
	if code != http.StatusOK || !strings.Contains(css, "@media print") {
		t.Errorf("GET style.css: %d", code)
	}
	_, body := getPage(t, h, "/scanners")
	// Every src and href is on this node.
	for _, m := range regexp.MustCompile(`(?:src|href)="([^"]*)"`).FindAllStringSubmatch(body+css, -1) {
		if !strings.HasPrefix(m[1], "/") && !strings.HasPrefix(m[1], "#") && !strings.HasPrefix(m[1], "?") {
			t.Errorf("the page refers to %q, off this node", m[1])
		}
	}
	if strings.Contains(body, "<script") || strings.Contains(css, "@import") || strings.Contains(css, "url(") {
		t.Errorf("the page loads a script or the stylesheet loads something")
	}
}
