package audit_test

// The acceptance matrix of issue 5: every rule fires on the phantom case
// that plants its defect; the clean cases give no warning or error; a
// true restriction and T2 shine-through give neither b0-only-hotspot
// nor adc-out-of-range. Each in classic and multi-frame, at two matrix
// sizes and three seeds (one seed with -short).

import (
	"bytes"
	"fmt"
	"os"
	"slices"
	"strings"
	"testing"

	"dwiaudit/audit"
	"dwiaudit/audit/phantom"
	"dwiaudit/rules"
)

// The matrix.
var (
	acceptanceMatrices = []int{64, 128}
	acceptanceSeeds    = []int64{1, 2, 3}
)

// acceptanceSlices: enough slices for the rules' through-plane
// neighbourhoods and for the missing-slices case (two central slices),
// few enough to keep the matrix fast.
const acceptanceSlices = 12

// expectation is what one case must give.
type expectation struct {
	name    string // reads as a sentence after the case name
	phantom phantom.Case
	// fires: each of these rules gives a finding of warning or above.
	fires []string
	// clean: no finding of warning or above at all.
	clean bool
	// silent: none of these rules gives any finding.
	silent []string
	// corrupt, when set, damages the written study before the audit.
	corrupt func(t *testing.T, st *phantom.Study)
	// extra rules run besides rules.All().
	extra []rules.Rule
	// also checks the report further.
	also func(t *testing.T, rep *audit.Report)
}

func acceptanceTable() []expectation {
	return []expectation{
		{name: "missing-b0 fires when there is no b0", phantom: phantom.CaseNoB0, fires: []string{rules.IDMissingB0}},
		{name: "bvalue-mismatch fires when b800 replaces b1000", phantom: phantom.CaseBValueSetDiffers, fires: []string{rules.IDBValueMismatch}},
		{name: "adc-out-of-range fires when the header b-value is not the applied one", phantom: phantom.CaseBValueHeaderWrong, fires: []string{rules.IDADCOutOfRange}},
		{name: "b0-only-hotspot fires on aliasing on the b0 alone", phantom: phantom.CaseB0ArtifactAliasing, fires: []string{rules.HotspotID}},
		{name: "b0-only-hotspot fires on dropout on the b0 alone", phantom: phantom.CaseB0ArtifactDropout, fires: []string{rules.HotspotID}},
		{name: "incomplete-series fires when slices are missing from a direction", phantom: phantom.CaseMissingSlices, fires: []string{rules.IDIncompleteSeries}},
		{name: "geometry-mismatch fires when the b0 series lies between the DWI slices", phantom: phantom.CaseSlicePositions, fires: []string{rules.IDGeometryMismatch}},
		{name: "low-snr fires at b0 SNR 4", phantom: phantom.CaseLowSNR, fires: []string{rules.IDLowSNR}},
		{name: "scanner-adc-disagrees fires on a map scaled by ten", phantom: phantom.CaseScannerADCScaled, fires: []string{rules.IDScannerADCDisagrees}},
		{name: "phantom-adc-bias fires on ice water at 4 C", phantom: phantom.CaseIceWaterWarm, fires: []string{rules.IDPhantomADCBias}},
		{
			name: "audit-failed fires on a file with its pixel data cut short, and the node goes on", phantom: phantom.CaseClean,
			corrupt: truncatePixelData, fires: []string{rules.IDAuditFailed},
			also: wantSeriesNamed,
		},
		{
			name: "audit-failed fires on a file whose transfer syntax says compressed", phantom: phantom.CaseClean,
			corrupt: claimEncapsulated, fires: []string{rules.IDAuditFailed},
			also: wantSeriesNamed,
		},
		{
			name: "audit-failed names a rule that panics while the other rules still run", phantom: phantom.CaseNoB0,
			extra: []rules.Rule{panicRule{}}, fires: []string{rules.IDAuditFailed, rules.IDMissingB0},
			also: func(t *testing.T, rep *audit.Report) {
				if !slices.ContainsFunc(rep.Findings, func(f rules.Finding) bool {
					return f.Rule == rules.IDAuditFailed && strings.Contains(f.Message, panicRuleID)
				}) {
					t.Errorf("no audit-failed finding names the rule %s", panicRuleID)
				}
			},
		},
		{name: "the clean brain gives no warning or error", phantom: phantom.CaseClean, clean: true},
		{name: "a correct scanner ADC map gives no warning or error", phantom: phantom.CaseScannerADCCorrect, clean: true},
		{name: "ice water at 0 C gives no warning or error", phantom: phantom.CaseIceWater0C, clean: true},
		{name: "a true restriction is no b0-only hotspot and no ADC out of range", phantom: phantom.CaseRestrictionLesion, silent: []string{rules.HotspotID, rules.IDADCOutOfRange}},
		{name: "T2 shine-through is no b0-only hotspot and no ADC out of range", phantom: phantom.CaseT2ShineThrough, silent: []string{rules.HotspotID, rules.IDADCOutOfRange}},
	}
}

// TestAcceptance runs the matrix: acceptanceTable x classic and
// multi-frame x acceptanceMatrices x acceptanceSeeds (the first seed
// only with -short). Each study is written once, audited once, in
// parallel subtests.
func TestAcceptance(t *testing.T) {
	seeds := acceptanceSeeds
	if testing.Short() {
		seeds = seeds[:1]
	}
	for _, exp := range acceptanceTable() {
		t.Run(exp.name, func(t *testing.T) {
			t.Parallel()
			for _, multi := range []bool{false, true} {
				for _, m := range acceptanceMatrices {
					for _, seed := range seeds {
						t.Run(fmt.Sprintf("%s %dx%d seed %d", modeName(multi), m, m, seed), func(t *testing.T) {
							runExpectation(t, exp, phantom.Options{Case: exp.phantom, Matrix: m, Slices: acceptanceSlices, Seed: seed, MultiFrame: multi})
						})
					}
				}
			}
		})
	}
}

func modeName(multi bool) string {
	if multi {
		return "multi-frame"
	}
	return "classic"
}

func runExpectation(t *testing.T, exp expectation, opt phantom.Options) {
	t.Helper()
	st, err := phantom.Write(t.TempDir(), opt)
	if err != nil {
		t.Fatalf("phantom.Write: %v", err)
	}
	auditWritten(t, st, opt, exp)
}

// auditWritten audits a written study and checks exp on its report,
// which it returns.
func auditWritten(t *testing.T, st *phantom.Study, opt phantom.Options, exp expectation) *audit.Report {
	t.Helper()
	if exp.corrupt != nil {
		exp.corrupt(t, st)
	}
	e := audit.NewEngine(append(rules.All(), exp.extra...), rules.DefaultConfig())
	e.Workers = 1 // the subtests run in parallel already
	rep, err := e.AuditFiles(t.Context(), []string{st.Dir})
	if err != nil {
		t.Fatalf("AuditFiles: %v", err)
	}
	t.Cleanup(func() {
		if t.Failed() {
			for _, f := range rep.Findings {
				t.Logf("finding %s %s series %d: %s", f.Severity, f.Rule, f.SeriesNumber, f.Message)
			}
			for _, s := range rep.Series {
				t.Logf("series %d %q protocol %q b %v tissue ADC %.4g CSF %.4g SNR %.3g %s", s.SeriesNumber, s.SeriesDescription, s.Protocol,
					s.BValues, s.Measures.ParenchymaMedianADC, s.Measures.CSFADC, s.Measures.B0SNR, s.CannotCompute)
			}
		}
	})
	for _, id := range exp.fires {
		if !slices.ContainsFunc(rep.Findings, func(f rules.Finding) bool { return f.Rule == id && f.Severity >= rules.SeverityWarning }) {
			t.Errorf("%s did not fire (warning or error) on %s", id, opt.Case)
		}
	}
	if exp.clean {
		for _, f := range rep.Findings {
			if f.Severity >= rules.SeverityWarning {
				t.Errorf("clean case %s gave %s %s: %s", opt.Case, f.Severity, f.Rule, f.Message)
			}
		}
	}
	for _, id := range exp.silent {
		for _, f := range rep.Findings {
			if f.Rule == id {
				t.Errorf("%s fired on %s: %s", id, opt.Case, f.Message)
			}
		}
	}
	if exp.also != nil {
		exp.also(t, rep)
	}
	return rep
}

// wantSeriesNamed: the audit-failed finding of a damaged file lies on the
// DWI series and says why.
func wantSeriesNamed(t *testing.T, rep *audit.Report) {
	t.Helper()
	for _, f := range rep.Findings {
		if f.Rule == rules.IDAuditFailed && f.SeriesUID != "" && f.StudyUID != "" && f.Message != "" {
			return
		}
	}
	t.Error("no audit-failed finding names its study and series")
}

// dwiFile is the file of the DWI series to damage: a directional
// image's (classic) or the acquired frames' instance (multi-frame, the
// first file of the series).
func dwiFile(t *testing.T, st *phantom.Study) string {
	t.Helper()
	for _, s := range st.Series {
		if s.Role == phantom.RoleDWI && len(s.Files) > 0 {
			return s.Files[len(s.Files)/3]
		}
	}
	t.Fatal("no DWI series written")
	return ""
}

// truncatePixelData cuts the last 1000 bytes off a file: its header
// stays readable, its pixel data ends before the length it declares.
func truncatePixelData(t *testing.T, st *phantom.Study) {
	t.Helper()
	path := dwiFile(t, st)
	info, err := os.Stat(path)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.Truncate(path, info.Size()-1000); err != nil {
		t.Fatal(err)
	}
}

// jpegBaseline is JPEG Baseline (Process 1), an encapsulated transfer
// syntax the data-set parser knows (PS3.5 A.4, PS3.6 Table A-1).
const jpegBaseline = "1.2.840.10008.1.2.4.50"

// claimEncapsulated rewrites a file's meta to say JPEG Baseline over
// its native pixel data: the audit must call it compressed and not
// decode it.
func claimEncapsulated(t *testing.T, st *phantom.Study) {
	t.Helper()
	rewriteSyntax(t, dwiFile(t, st), jpegBaseline)
}

const panicRuleID = "test-panics"

// panicRule is a rule with a bug.
type panicRule struct{}

func (panicRule) ID() string { return panicRuleID }
func (panicRule) Check(*rules.Study, *rules.Config) []rules.Finding {
	var m map[string]int
	m["boom"]++ // a nil-map write: a bug, as a rule might have
	return nil
}

// TestAcceptanceDamageHelpersDamage keeps the damage helpers honest:
// each really damages the file it picks.
func TestAcceptanceDamageHelpersDamage(t *testing.T) {
	for _, tc := range []struct {
		name    string
		corrupt func(*testing.T, *phantom.Study)
	}{{"truncation cuts the file", truncatePixelData}, {"the meta rewrite changes the transfer syntax", claimEncapsulated}} {
		t.Run(tc.name, func(t *testing.T) {
			st, err := phantom.Write(t.TempDir(), phantom.Options{Matrix: 32, Slices: 3, Seed: 1})
			if err != nil {
				t.Fatal(err)
			}
			path := dwiFile(t, st)
			before, _ := os.ReadFile(path)
			tc.corrupt(t, st)
			after, _ := os.ReadFile(path)
			if bytes.Equal(before, after) {
				t.Error("the file is unchanged")
			}
		})
	}
}
