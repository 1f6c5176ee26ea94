package main

// The web pages in a real browser: Debian's chromium, headless, driven
// over the DevTools protocol (chromedp), against a real `dwiaudit serve`
// that received synthetic phantom studies over DICOM and audited them.

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/chromedp"

	"dwiaudit/audit/phantom"
	"dwiaudit/audit/web"
	"dwiaudit/internal/testtool"
	"dwiaudit/rules"
)

// browserTimeout bounds the whole browser part of the test: start,
// three pages with their previews, three screenshots. It takes 9-18 s
// here; a fresh CI machine's first Chromium start builds its font cache,
// and the bound is a guard against a hang, not a speed target.
const browserTimeout = 90 * time.Second

// artifactDir is where the test keeps its screenshots: $DWIAUDIT_ARTIFACTS
// when set, else a temporary folder.
func artifactDir(t *testing.T) string {
	t.Helper()
	if d := os.Getenv("DWIAUDIT_ARTIFACTS"); d != "" {
		if err := os.MkdirAll(d, 0o755); err != nil {
			t.Fatal(err)
		}
		return d
	}
	return t.TempDir()
}

// browserStudy is one synthetic study the browser test sends.
type browserStudy struct {
	opt     phantom.Options
	calling string // the calling AE title, hence the scanner label
	study   *phantom.Study
}

// writeAndSend writes the phantom and sends it to the node.
func (b *browserStudy) writeAndSend(t *testing.T, n *node) {
	t.Helper()
	st, err := phantom.Write(t.TempDir(), b.opt)
	if err != nil {
		t.Fatal(err)
	}
	b.study = st
	if r := runCLI(t, "send", "--to", n.dicomAddr, "--called-ae", testAE, "--calling-ae", b.calling, "--quiet", st.Dir); r.code != exitOK {
		t.Fatalf("send %s exited %d", b.opt.Case, r.code)
	}
}

// dwi is the study's diffusion series (series number 2, phantom.go).
func (b *browserStudy) dwi(t *testing.T) phantom.SeriesInfo {
	t.Helper()
	for _, s := range b.study.Series {
		if s.Number == 2 {
			return s
		}
	}
	t.Fatalf("%s: no series 2 in %+v", b.opt.Case, b.study.Series)
	return phantom.SeriesInfo{}
}

// awaitBrowserAudits polls the findings API until every series holds an audit.
func awaitBrowserAudits(t *testing.T, n *node, series []string, within time.Duration) map[string][]string {
	t.Helper()
	deadline := time.Now().Add(within)
	for {
		_, got := findingRules(t, n)
		missing := slices.DeleteFunc(slices.Clone(series), func(s string) bool { _, ok := got[s]; return ok })
		if len(missing) == 0 {
			return got
		}
		if time.Now().After(deadline) {
			t.Fatalf("series %v not audited within %v; audits: %v", missing, within, got)
		}
		time.Sleep(100 * time.Millisecond)
	}
}

func TestBrowserShowsTheListTheStudyAndTheScannerTrends(t *testing.T) {
	chromium := testtool.FirstPath(t, "chromium", "chromium", "chromium-browser")
	cfg := filepath.Join(t.TempDir(), "node.yaml")
	conf := `peers:
  - {ae_title: QOH_MR1, scanner: qoh-mr1-1.5t}
  - {ae_title: QOH_QA, scanner: qoh-mr2-3t}
`
	if err := os.WriteFile(cfg, []byte(conf), 0o644); err != nil {
		t.Fatal(err)
	}
	n := startNode(t, t.TempDir(), "--config", cfg, "--settle", "1s")

	// Invented patients of the invented Quellvander Ostmire Hospital.
	day := func(d int) time.Time { return time.Date(2025, 3, d, 9, 30, 0, 0, time.UTC) }
	clinical := func(c phantom.Case, seed int64, d int, matrix, slices int) *browserStudy {
		return &browserStudy{calling: "QOH_MR1", opt: phantom.Options{Case: c, Matrix: matrix, Slices: slices, Seed: seed,
			StudyDate: day(d), PatientName: "TEST^SYNTHETIC", PatientID: fmt.Sprintf("QOH-SYN-%04d", seed)}}
	}
	clean := clinical(phantom.CaseClean, 11, 10, 32, 6)
	noB0 := clinical(phantom.CaseNoB0, 12, 11, 32, 6)
	// The b0-only-hotspot needs through-plane context: 64x64x12 as in
	// audit/acceptance_test.go.
	hotspot := clinical(phantom.CaseB0ArtifactAliasing, 13, 12, 64, 12)
	studies := []*browserStudy{clean, noB0, hotspot}
	// Ice-water phantoms on the QA scanner on three days, one warm
	// (its ADC above the 0 °C band).
	for i, c := range []phantom.Case{phantom.CaseIceWater0C, phantom.CaseIceWater0C, phantom.CaseIceWaterWarm} {
		studies = append(studies, &browserStudy{calling: "QOH_QA", opt: phantom.Options{Case: c, Matrix: 32, Slices: 4, Seed: int64(21 + i),
			StudyDate: day(3 + 7*i), PatientName: "TEST^SYNTHETIC", PatientID: fmt.Sprintf("QOH-QA-%04d", 21+i)}})
	}
	var dwis []string
	for _, s := range studies {
		s.writeAndSend(t, n)
		dwis = append(dwis, s.dwi(t).UID)
	}
	got := awaitBrowserAudits(t, n, dwis, 30*time.Second)
	if !slices.Contains(got[noB0.dwi(t).UID], rules.IDMissingB0) || !slices.Contains(got[hotspot.dwi(t).UID], rules.HotspotID) {
		t.Fatalf("the audits lack the planted findings: %v", got)
	}

	art := artifactDir(t)
	ctx, cancel := context.WithTimeout(t.Context(), browserTimeout)
	defer cancel()
	alloc, cancelAlloc := chromedp.NewExecAllocator(ctx,
		chromedp.ExecPath(chromium),
		chromedp.Flag("headless", true),
		chromedp.NoSandbox,
		chromedp.DisableGPU,
		chromedp.Flag("disable-quic", true),
		chromedp.NoFirstRun,
		chromedp.NoDefaultBrowserCheck,
		chromedp.Flag("disable-background-networking", true),
		chromedp.Flag("disable-component-update", true),
		chromedp.Flag("disable-sync", true),
		chromedp.Flag("disable-dev-shm-usage", true),
		chromedp.Flag("hide-scrollbars", true),
		chromedp.UserDataDir(t.TempDir()),
		chromedp.WindowSize(1280, 900),
	)
	defer cancelAlloc()
	bctx, cancelBrowser := chromedp.NewContext(alloc)
	defer cancelBrowser()

	// Open the browser now, outside the subtests: the first Run starts it
	// and ties it to bctx.
	if err := chromedp.Do(bctx, chromedp.Navigate("about:blank")); err != nil {
		t.Fatal(err)
	}
	shot := func(t *testing.T, name string) {
		png, err := chromedp.Run(bctx, chromedp.FullScreenshot(100)) // quality 100: PNG
		if err != nil {
			t.Fatal(err)
		}
		p := filepath.Join(art, name)
		if err := os.WriteFile(p, png, 0o644); err != nil {
			t.Fatal(err)
		}
		t.Logf("screenshot %s", p)
	}
	load := func(t *testing.T, path, ready string) string {
		t.Helper()
		if err := chromedp.Do(bctx, chromedp.Navigate(n.httpURL+path), chromedp.WaitVisible(chromedp.CSS(ready))); err != nil {
			t.Fatalf("loading %s: %v", path, err)
		}
		return browserEval[string](t, bctx, `document.body.innerText`)
	}
	// Every page says what the auditor is and is not.
	caution := func(t *testing.T, page, body string) {
		if !strings.Contains(body, web.Caution) {
			t.Errorf("%s: the caution %q is not on the page", page, web.Caution)
		}
		// No patient names on any page; IDs masked (the last three
		// characters only).
		if strings.Contains(body, "SYNTHETIC") || strings.Contains(body, "QOH-SYN-") || strings.Contains(body, "QOH-QA-") {
			t.Errorf("%s shows a patient name or an unmasked patient ID", page)
		}
	}

	t.Run("the daily list shows the planted findings by rule", func(t *testing.T) {
		body := load(t, "/", "table.daylist")
		rulesShown := browserEval[[]string](t, bctx, `Array.from(document.querySelectorAll("table.daylist code.rule")).map(e => e.textContent)`)
		shot(t, "daily-list.png")
		for _, r := range []string{rules.IDMissingB0, rules.HotspotID, rules.IDPhantomADCBias} {
			if !slices.Contains(rulesShown, r) {
				t.Errorf("rule %s not in the list's rows %v", r, rulesShown)
			}
		}
		caution(t, "the daily list", body)
		if !strings.Contains(body, "*********013") {
			t.Errorf("the hotspot study's masked patient ID *********013 is not shown")
		}
	})

	t.Run("a row's series link opens the study page at that series", func(t *testing.T) {
		series := hotspot.dwi(t).UID
		link := fmt.Sprintf(`table.daylist a[href="/studies/%s#series-%s"]`, hotspot.study.StudyUID, series)
		if err := chromedp.Do(bctx, chromedp.Click(chromedp.CSS(link)), chromedp.WaitVisible(chromedp.CSS("section.series"))); err != nil {
			t.Fatalf("following the row's link: %v", err)
		}
		// :target is the series the link named (the page styles it).
		target := browserEval[string](t, bctx, `(document.querySelector("section.series:target") || {id: ""}).id`)
		if target != "series-"+series {
			t.Errorf("the link's target is %q, want series-%s", target, series)
		}
	})

	t.Run("the study page shows its series, measures, findings and previews", func(t *testing.T) {
		series := hotspot.dwi(t).UID
		body := load(t, "/studies/"+hotspot.study.StudyUID+"#series-"+series, "section.series")
		anchor := browserEval[bool](t, bctx, fmt.Sprintf(`document.getElementById(%q) !== null`, "series-"+series))
		// Wait until every preview has loaded or failed.
		if _, err := chromedp.Run(bctx, chromedp.Poll[bool](`Array.from(document.images).every(i => i.complete)`, chromedp.WithPollingTimeout(20*time.Second))); err != nil {
			t.Fatal(err)
		}
		widths := browserEval[[]int](t, bctx, `Array.from(document.images).map(i => i.naturalWidth)`)
		shot(t, "study.png")
		if !anchor {
			t.Errorf("no element with id series-%s for the daily list's link", series)
		}
		if len(widths) == 0 || slices.Contains(widths, 0) {
			t.Errorf("preview widths %v: want at least one, each loaded (naturalWidth > 0)", widths)
		}
		// The gradient table of the DWI series as check --format json
		// gives it: b0, the scanner's trace and three directions at 1000
		// (audit/phantom writes them), 12 slices each.
		kinds := browserEval[[]string](t, bctx, fmt.Sprintf(`Array.from(document.getElementById(%q).querySelectorAll("table.gradients tbody tr")).map(r => r.cells[0].textContent + " " + r.cells[1].textContent + " " + r.cells[4].textContent)`, "series-"+series))
		slices.Sort(kinds)
		if want := []string{"0 b0 12", "1000 direction 12", "1000 direction 12", "1000 direction 12", "1000 trace 12"}; !slices.Equal(kinds, want) {
			t.Errorf("gradient table rows %q, want %q", kinds, want)
		}
		for _, want := range []string{rules.HotspotID, "Parenchyma median ADC", "×10⁻³ mm²/s", "b0 SNR", "qoh-mr1-1.5t", "Gradient table"} {
			if !strings.Contains(body, want) {
				t.Errorf("the study page lacks %q", want)
			}
		}
		caution(t, "the study page", body)
	})

	t.Run("the scanner page plots the phantom ADC with its band", func(t *testing.T) {
		body := load(t, "/scanners/qoh-mr2-3t?days=3650", "svg.plot")
		points := browserEval[map[string]int](t, bctx, `Object.fromEntries(Array.from(document.querySelectorAll("figure.trend")).map(f => [f.querySelector("figcaption strong").textContent, f.querySelectorAll("svg .pt").length]))`)
		bands := browserEval[int](t, bctx, `document.querySelectorAll("svg.plot .band").length`)
		shot(t, "scanner.png")
		if points["Phantom central ADC"] != 3 || bands != 1 {
			t.Errorf("plot points %v and %d band(s): want 3 phantom points and one band", points, bands)
		}
		if !strings.Contains(body, "(outside the band)") {
			t.Errorf("the warm phantom is not marked outside the band")
		}
		caution(t, "the scanner page", body)
	})

	t.Run("the clinical scanner's page plots the parenchyma ADC", func(t *testing.T) {
		load(t, "/scanners/qoh-mr1-1.5t?days=3650", "svg.plot")
		points := browserEval[int](t, bctx, `document.querySelector("figure.trend svg").querySelectorAll(".pt").length`)
		// The clean and the hotspot series have a parenchyma median; the
		// no-b0 series has no ADC at all.
		if points != 2 {
			t.Errorf("%d parenchyma points, want 2", points)
		}
	})
	if code := n.stop(); code != exitOK {
		t.Errorf("exit %d after SIGTERM", code)
	}
}

// browserEval evaluates a JavaScript expression in the page and decodes
// its value.
func browserEval[T any](t *testing.T, ctx context.Context, expr string) T {
	t.Helper()
	v, err := chromedp.Run(ctx, chromedp.Evaluate[T](expr))
	if err != nil {
		t.Fatalf("evaluating %s: %v", expr, err)
	}
	return v
}
