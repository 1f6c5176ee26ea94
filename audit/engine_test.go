package audit_test

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io/fs"
	"log/slog"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"slices"
	"strings"
	"testing"

	"dwiaudit/audit"
	"dwiaudit/audit/dwi"
	"dwiaudit/audit/header"
	"dwiaudit/audit/phantom"
	"dwiaudit/rules"
	"dwiaudit/scp/part10"
)

// writeStudy writes a small phantom study for the engine's tests.
func writeStudy(t *testing.T, dir string, opt phantom.Options) *phantom.Study {
	t.Helper()
	if opt.Matrix == 0 {
		opt.Matrix, opt.Slices = 64, 8
	}
	st, err := phantom.Write(dir, opt)
	if err != nil {
		t.Fatalf("phantom.Write: %v", err)
	}
	return st
}

func newEngine() *audit.Engine {
	e := audit.NewEngine(rules.All(), rules.DefaultConfig())
	e.Workers = 2
	return e
}

func TestValidateNamesEveryProblem(t *testing.T) {
	e := audit.NewEngine([]rules.Rule{panicRule{}, panicRule{}, nil}, nil)
	e.Workers = 0
	e.Analysis.CSFPercentile = 0
	e.Tolerances.BValue = -1
	e.Extract.PrivateSources = []header.PrivateSource{{Name: "x", Creator: "ACME", Group: 0x0018}}
	err := e.Validate()
	if !errors.Is(err, audit.ErrInvalidEngine) {
		t.Fatalf("Validate() = %v, want ErrInvalidEngine", err)
	}
	for _, want := range []string{"Config: nil", "Rules[1]: ID \"test-panics\" is also Rules[0]'s", "Rules[2]: nil",
		"Analysis:", "Tolerances:", "Extract.PrivateSources[0]:", "Workers: 0, want 1.."} {
		if !strings.Contains(err.Error(), want) {
			t.Errorf("Validate() does not say %q:\n%v", want, err)
		}
	}
	if err := newEngine().Validate(); err != nil {
		t.Errorf("the default engine is invalid: %v", err)
	}
}

func TestAuditFilesRefusesAnInvalidEngine(t *testing.T) {
	e := newEngine()
	e.Workers = audit.MaxWorkers + 1
	if _, err := e.AuditFiles(t.Context(), []string{t.TempDir()}); !errors.Is(err, audit.ErrInvalidEngine) {
		t.Errorf("AuditFiles = %v, want ErrInvalidEngine", err)
	}
}

func TestAuditFilesSkipsWhatIsNotDICOMAndCountsIt(t *testing.T) {
	dir := t.TempDir()
	st := writeStudy(t, filepath.Join(dir, "study"), phantom.Options{})
	for _, name := range []string{"README.txt", "study/notes.md"} {
		if err := os.WriteFile(filepath.Join(dir, name), []byte("not DICOM\n"), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	rep, err := newEngine().AuditFiles(t.Context(), []string{dir})
	if err != nil {
		t.Fatal(err)
	}
	if rep.NotDICOM != 2 || rep.Files != len(st.Files)+2 {
		t.Errorf("files %d, not DICOM %d; want %d and 2", rep.Files, rep.NotDICOM, len(st.Files)+2)
	}
	if len(rep.Series) != 1 || rep.Series[0].SeriesUID == "" || rep.Series[0].Protocol != "brain" {
		t.Errorf("series %+v, want the one DWI series matched to the brain protocol", rep.Series)
	}
	for _, f := range rep.Findings {
		if f.Severity >= rules.SeverityWarning {
			t.Errorf("clean study gave %s %s: %s", f.Severity, f.Rule, f.Message)
		}
	}
}

func TestSeriesReportCarriesIdentityBValuesAndMeasures(t *testing.T) {
	st := writeStudy(t, t.TempDir(), phantom.Options{Seed: 4})
	rep, err := newEngine().AuditFiles(t.Context(), []string{st.Dir})
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.Series) != 1 {
		t.Fatalf("%d series, want 1", len(rep.Series))
	}
	s := rep.Series[0]
	var dwiInfo phantom.SeriesInfo
	for _, si := range st.Series {
		if si.Role == phantom.RoleDWI {
			dwiInfo = si
		}
	}
	if s.StudyUID != st.StudyUID || s.SeriesUID != dwiInfo.UID || s.SeriesNumber != dwiInfo.Number || s.SeriesDescription != dwiInfo.Description {
		t.Errorf("identity %+v, want study %s series %s #%d %q", s, st.StudyUID, dwiInfo.UID, dwiInfo.Number, dwiInfo.Description)
	}
	if s.Scanner != phantom.Scanners()[0].Station {
		t.Errorf("scanner %q, want the station name %q (no label configured)", s.Scanner, phantom.Scanners()[0].Station)
	}
	if !slices.Equal(s.BValues, []float64{0, 1000}) {
		t.Errorf("b-values %v, want [0 1000]", s.BValues)
	}
	// The phantom's white matter is 0.70e-3 mm²/s (Helenius 2002 via
	// docs/references.md#helenius-2002) and most of the parenchyma; its cortex 0.89e-3.
	if m := s.Measures.ParenchymaMedianADC; !(m > 0.6e-3 && m < 0.9e-3) {
		t.Errorf("tissue ADC %v, want the phantom's parenchyma (0.70-0.89e-3 mm²/s)", m)
	}
	if s.CannotCompute != "" {
		t.Errorf("cannot compute %q", s.CannotCompute)
	}
}

func TestAFileOfUnknownStudyGivesAFileLevelFinding(t *testing.T) {
	st := writeStudy(t, t.TempDir(), phantom.Options{})
	// A transfer syntax nobody knows: the header cannot be read, so the
	// study is unknown (PS3.10 7.1: the meta is readable, the data set
	// is not).
	path := st.Files[0]
	rewriteSyntax(t, path, "1.2.826.0.1.3680043.10.9999.1")
	rep, err := newEngine().AuditFiles(t.Context(), []string{st.Dir})
	if err != nil {
		t.Fatal(err)
	}
	i := slices.IndexFunc(rep.Findings, func(f rules.Finding) bool { return f.Rule == rules.IDAuditFailed && f.StudyUID == "" })
	if i < 0 {
		t.Fatalf("no file-level audit-failed finding among %v", rep.Findings)
	}
	if f := rep.Findings[i]; !strings.Contains(f.Message, path) || f.SeriesUID != "" {
		t.Errorf("file-level finding %+v, want the path and no series", f)
	}
	if i != 0 {
		t.Errorf("the file-level finding is at %d, want it first", i)
	}
}

func TestASeriesNoneOfWhoseFilesReadStillGetsItsSeriesAndFinding(t *testing.T) {
	st := writeStudy(t, t.TempDir(), phantom.Options{})
	var dwiInfo phantom.SeriesInfo
	for _, si := range st.Series {
		if si.Role == phantom.RoleDWI {
			dwiInfo = si
		}
	}
	for _, p := range dwiInfo.Files {
		info, err := os.Stat(p)
		if err != nil {
			t.Fatal(err)
		}
		if err := os.Truncate(p, info.Size()-10); err != nil {
			t.Fatal(err)
		}
	}
	rep, err := newEngine().AuditFiles(t.Context(), []string{st.Dir})
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.Series) != 1 || rep.Series[0].SeriesUID != dwiInfo.UID || rep.Series[0].SeriesNumber != dwiInfo.Number ||
		rep.Series[0].SeriesDescription != dwiInfo.Description || rep.Series[0].CannotCompute == "" {
		t.Fatalf("series %+v, want the DWI series from its headers, not computed", rep.Series)
	}
	if len(rep.Findings) != 1 || rep.Findings[0].Rule != rules.IDAuditFailed || rep.Findings[0].SeriesUID != dwiInfo.UID ||
		!strings.Contains(rep.Findings[0].Message, "cannot be read") {
		t.Errorf("findings %+v, want one audit-failed on the series", rep.Findings)
	}
}

func TestAB0OnlySeriesThatLendsItsB0IsNoAuditFailure(t *testing.T) {
	st := writeStudy(t, t.TempDir(), phantom.Options{B0Series: true})
	rep, err := newEngine().AuditFiles(t.Context(), []string{st.Dir})
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.Series) != 2 {
		t.Fatalf("%d series, want the b0 series and the DWI series", len(rep.Series))
	}
	for _, f := range rep.Findings {
		if f.Severity >= rules.SeverityWarning {
			t.Errorf("%s %s on series %d: %s", f.Severity, f.Rule, f.SeriesNumber, f.Message)
		}
	}
}

func TestSeverityOverridesAndSwitchesApply(t *testing.T) {
	st := writeStudy(t, t.TempDir(), phantom.Options{Case: phantom.CaseNoB0})
	info := rules.SeverityInfo
	off := false
	tests := []struct {
		name     string
		settings rules.RuleSettings
		want     []rules.Severity // severities of missing-b0's findings
	}{
		{"the rule's own severity stands without settings", rules.RuleSettings{}, []rules.Severity{rules.SeverityError}},
		{"a configured severity replaces it", rules.RuleSettings{Severity: &info}, []rules.Severity{rules.SeverityInfo}},
		{"a disabled rule gives nothing", rules.RuleSettings{Enabled: &off}, nil},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			cfg := rules.DefaultConfig()
			cfg.Rules = map[string]rules.RuleSettings{rules.IDMissingB0: tt.settings}
			e := audit.NewEngine(rules.All(), cfg)
			rep, err := e.AuditFiles(t.Context(), []string{st.Dir})
			if err != nil {
				t.Fatal(err)
			}
			var got []rules.Severity
			for _, f := range rep.Findings {
				if f.Rule == rules.IDMissingB0 {
					got = append(got, f.Severity)
				}
			}
			if !slices.Equal(got, tt.want) {
				t.Errorf("missing-b0 severities %v, want %v", got, tt.want)
			}
		})
	}
}

func TestFindingsAreOrderedByStudySeriesAndRule(t *testing.T) {
	root := t.TempDir()
	for _, c := range []phantom.Case{phantom.CaseSlicePositions, phantom.CaseNoB0, phantom.CaseBValueSetDiffers, phantom.CaseMissingSlices} {
		writeStudy(t, filepath.Join(root, string(c)), phantom.Options{Case: c, Seed: 9})
	}
	e := newEngine()
	rep, err := e.AuditFiles(t.Context(), []string{root})
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.Findings) < 4 {
		t.Fatalf("%d findings, want one or more per study", len(rep.Findings))
	}
	sorted := slices.IsSortedFunc(rep.Findings, func(a, b rules.Finding) int {
		if c := strings.Compare(a.StudyUID, b.StudyUID); c != 0 {
			return c
		}
		if a.SeriesNumber != b.SeriesNumber {
			return a.SeriesNumber - b.SeriesNumber
		}
		if c := strings.Compare(a.SeriesUID, b.SeriesUID); c != 0 {
			return c
		}
		return strings.Compare(a.Rule, b.Rule)
	})
	if !sorted {
		t.Error("findings are not ordered by study, series number, series and rule")
	}
	again, err := newEngine().AuditFiles(t.Context(), []string{root})
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(findingKeys(rep), findingKeys(again)) {
		t.Error("a second audit of the same files gives other findings or another order")
	}
}

// findingKeys is what must not change between two audits of the same
// files.
func findingKeys(rep *audit.Report) []string {
	var out []string
	for _, f := range rep.Findings {
		out = append(out, strings.Join([]string{f.StudyUID, f.SeriesUID, f.Rule, f.Severity.String(), f.Message}, "|"))
	}
	return out
}

func TestAuditFramesGivesWhatAuditFilesGives(t *testing.T) {
	st := writeStudy(t, t.TempDir(), phantom.Options{Case: phantom.CaseMissingSlices, MultiFrame: true})
	var frames []dwi.Frame
	for _, p := range st.Files {
		fr, err := header.ExtractFile(p, header.ExtractOptions{LoadPixels: true})
		if err != nil {
			t.Fatal(err)
		}
		frames = append(frames, fr...)
	}
	e := newEngine()
	fromFrames, err := e.AuditFrames(t.Context(), frames)
	if err != nil {
		t.Fatal(err)
	}
	fromFiles, err := e.AuditFiles(t.Context(), []string{st.Dir})
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(findingKeys(fromFrames), findingKeys(fromFiles)) {
		t.Errorf("frames gave\n%v\nfiles gave\n%v", findingKeys(fromFrames), findingKeys(fromFiles))
	}
	if len(fromFrames.Studies) != 1 || fromFrames.Studies[0].StudyUID != st.StudyUID || len(fromFiles.Studies) != 0 {
		t.Errorf("studies kept: frames %d, files %d; want 1 and 0 (KeepStudies off)", len(fromFrames.Studies), len(fromFiles.Studies))
	}
	if !slices.ContainsFunc(fromFrames.Findings, func(f rules.Finding) bool { return f.Rule == rules.IDIncompleteSeries }) {
		t.Error("incomplete-series did not fire on the missing-slices case")
	}
}

func TestKeepStudiesKeepsThem(t *testing.T) {
	st := writeStudy(t, t.TempDir(), phantom.Options{})
	e := newEngine()
	e.KeepStudies = true
	rep, err := e.AuditFiles(t.Context(), []string{st.Dir})
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.Studies) != 1 || len(rep.Studies[0].Series) != 1 || !rep.Studies[0].Series[0].Computed() {
		t.Errorf("studies %+v, want the one computed study", rep.Studies)
	}
}

func TestAuditFilesReportsPathsThatAreNotThere(t *testing.T) {
	_, err := newEngine().AuditFiles(t.Context(), []string{filepath.Join(t.TempDir(), "nowhere")})
	if !errors.Is(err, fs.ErrNotExist) {
		t.Errorf("AuditFiles = %v, want fs.ErrNotExist", err)
	}
}

func TestAuditFilesStopsWhenCancelled(t *testing.T) {
	st := writeStudy(t, t.TempDir(), phantom.Options{})
	ctx, cancel := context.WithCancel(t.Context())
	cancel()
	if _, err := newEngine().AuditFiles(ctx, []string{st.Dir}); !errors.Is(err, context.Canceled) {
		t.Errorf("AuditFiles = %v, want context.Canceled", err)
	}
}

func TestNotComputedMeasuresAreNaN(t *testing.T) {
	st := writeStudy(t, t.TempDir(), phantom.Options{Case: phantom.CaseNoB0})
	rep, err := newEngine().AuditFiles(t.Context(), []string{st.Dir})
	if err != nil {
		t.Fatal(err)
	}
	m := rep.Series[0].Measures
	if !math.IsNaN(m.ParenchymaMedianADC) || !math.IsNaN(m.CSFADC) || !math.IsNaN(m.B0SNR) || rep.Series[0].CannotCompute == "" {
		t.Errorf("measures %+v, cannot compute %q; want NaN and a reason", m, rep.Series[0].CannotCompute)
	}
}

// rewriteSyntax rewrites a file's Transfer Syntax UID (0002,0010).
func rewriteSyntax(t *testing.T, path, ts string) {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	meta, off, err := part10.ReadMeta(bytes.NewReader(b))
	if err != nil {
		t.Fatal(err)
	}
	meta.TransferSyntaxUID = ts
	var out bytes.Buffer
	if err := part10.WriteHeader(&out, meta); err != nil {
		t.Fatal(err)
	}
	out.Write(b[off:])
	if err := os.WriteFile(path, out.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
}

func TestOneBadStudyDoesNotStopTheOthers(t *testing.T) {
	root := t.TempDir()
	bad := writeStudy(t, filepath.Join(root, "bad"), phantom.Options{Seed: 1})
	for _, p := range bad.Files {
		if err := os.Truncate(p, 200); err != nil { // the header is cut too
			t.Fatal(err)
		}
	}
	good := writeStudy(t, filepath.Join(root, "good"), phantom.Options{Case: phantom.CaseNoB0, Seed: 2})
	rep, err := newEngine().AuditFiles(t.Context(), []string{root})
	if err != nil {
		t.Fatal(err)
	}
	if !slices.ContainsFunc(rep.Findings, func(f rules.Finding) bool { return f.Rule == rules.IDMissingB0 && f.StudyUID == good.StudyUID }) {
		t.Error("the good study's missing-b0 is missing")
	}
	if n := len(slices.DeleteFunc(slices.Clone(rep.Findings), func(f rules.Finding) bool { return f.Rule != rules.IDAuditFailed })); n == 0 {
		t.Error("the bad files gave no audit-failed finding")
	}
}

func TestAPanickingRuleIsLoggedWithoutPatientData(t *testing.T) {
	st := writeStudy(t, t.TempDir(), phantom.Options{})
	var logs bytes.Buffer
	e := audit.NewEngine(append(rules.All(), panicRule{}), rules.DefaultConfig())
	e.Logger = slog.New(slog.NewTextHandler(&logs, nil))
	rep, err := e.AuditFiles(t.Context(), []string{st.Dir})
	if err != nil {
		t.Fatal(err)
	}
	if !slices.ContainsFunc(rep.Findings, func(f rules.Finding) bool { return f.Rule == rules.IDAuditFailed }) {
		t.Error("no audit-failed finding for the panicking rule")
	}
	if !strings.Contains(logs.String(), "rule panicked") || !strings.Contains(logs.String(), panicRuleID) {
		t.Errorf("log lacks the panic:\n%s", logs.String())
	}
	// The phantom's invented patient (phantom.Options defaults).
	if strings.Contains(logs.String(), "SYNTHETIC^CASE") || strings.Contains(logs.String(), "QOH-SYN-0001") {
		t.Error("the log carries patient identifiers")
	}
}

func TestPhantomSeriesReportTheirCentralADC(t *testing.T) {
	cases := []struct {
		name   string
		c      phantom.Case
		lo, hi float64 // mm²/s
	}{
		// Ice water at 0 °C: 1.10e-3 mm²/s (QIBA DWI profile; Malyarenko
		// et al., JMRI 2013;37:1238; docs/references.md#malyarenko-2013). The phantom plants it.
		{"an ice-water phantom at 0 C reports about 1.10e-3", phantom.CaseIceWater0C, 1.10e-3 * 0.98, 1.10e-3 * 1.02},
		// The warm case is above the ±3.6% tolerance by construction.
		{"a warm ice-water phantom reports more than 3.6% above it", phantom.CaseIceWaterWarm, 1.10e-3 * 1.036, 1.6e-3},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			st := writeStudy(t, t.TempDir(), phantom.Options{Case: c.c, Seed: 2})
			rep, err := newEngine().AuditFiles(t.Context(), []string{st.Dir})
			if err != nil {
				t.Fatal(err)
			}
			if len(rep.Series) != 1 {
				t.Fatalf("%d series, want 1", len(rep.Series))
			}
			s := rep.Series[0]
			if s.PhantomExpectedADC != 1.10e-3 {
				t.Errorf("expected ADC %v, want the ice-water profile's 1.10e-3", s.PhantomExpectedADC)
			}
			if !(s.PhantomADC >= c.lo && s.PhantomADC <= c.hi) {
				t.Errorf("central ADC %v, want %v..%v", s.PhantomADC, c.lo, c.hi)
			}
		})
	}
	t.Run("a brain series has no phantom ADC", func(t *testing.T) {
		st := writeStudy(t, t.TempDir(), phantom.Options{Seed: 2})
		rep, err := newEngine().AuditFiles(t.Context(), []string{st.Dir})
		if err != nil {
			t.Fatal(err)
		}
		if s := rep.Series[0]; !math.IsNaN(s.PhantomADC) || !math.IsNaN(s.PhantomExpectedADC) {
			t.Errorf("phantom ADC %v expected %v, want NaN for a brain series", s.PhantomADC, s.PhantomExpectedADC)
		}
	})
}

// copyPatched copies src into dir with every old byte string replaced by
// its new one of the same length (the element lengths stay right).
// The name of the copy says how many strings were replaced.
func copyPatched(t *testing.T, src, dir string, pairs ...string) string {
	t.Helper()
	b, err := os.ReadFile(src)
	if err != nil {
		t.Fatal(err)
	}
	for i := 0; i < len(pairs); i += 2 {
		if len(pairs[i]) != len(pairs[i+1]) || !bytes.Contains(b, []byte(pairs[i])) {
			t.Fatalf("cannot patch %q into %q in %s", pairs[i], pairs[i+1], src)
		}
		b = bytes.ReplaceAll(b, []byte(pairs[i]), []byte(pairs[i+1]))
	}
	dst := filepath.Join(dir, fmt.Sprintf("patched-%d-%s", len(pairs), filepath.Base(src)))
	if err := os.WriteFile(dst, b, 0o644); err != nil {
		t.Fatal(err)
	}
	return dst
}

func TestDerivedSeriesAndNonImageObjectsAreListedNeverFailed(t *testing.T) {
	st := writeStudy(t, t.TempDir(), phantom.Options{})
	var dwiInfo phantom.SeriesInfo
	for _, si := range st.Series {
		if si.Role == phantom.RoleDWI {
			dwiInfo = si
		}
	}
	// An FA series beside the DWI: Image Type value 4 FA (common
	// practice; dwi.Classify), another Series Instance UID of the same
	// length.
	faUID := dwiInfo.UID[:len(dwiInfo.UID)-1] + string("12"[(dwiInfo.UID[len(dwiInfo.UID)-1]-'0')%2])
	for _, p := range dwiInfo.Files[:3] {
		copyPatched(t, p, st.Dir, `ORIGINAL\PRIMARY\DIFFUSION\NONE `, `DERIVED\PRIMARY\DIFFUSION\FA    `, dwiInfo.UID, faUID)
	}
	// A private non-image object in the DWI series: MR Image Storage
	// (PS3.4 B.5) replaced by a private SOP Class of the same length.
	copyPatched(t, dwiInfo.Files[0], st.Dir, "1.2.840.10008.5.1.4.1.1.4\x00", "1.3.12.2.1107.5.9.1.0.0.1\x00")

	rep, err := newEngine().AuditFiles(t.Context(), []string{st.Dir})
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.Derived) != 1 || rep.Derived[0].SeriesUID != faUID || rep.Derived[0].Kind != "FA map" || rep.Derived[0].Images != 3 {
		t.Errorf("derived %+v, want the FA series with its 3 images", rep.Derived)
	}
	if len(rep.Ignored) != 1 || rep.Ignored[0].SOPClassUID != "1.3.12.2.1107.5.9.1.0.0.1" || rep.Ignored[0].SeriesUID != dwiInfo.UID {
		t.Errorf("ignored %+v, want the non-image object", rep.Ignored)
	}
	if len(rep.Series) != 1 || rep.Series[0].SeriesUID != dwiInfo.UID || rep.Series[0].CannotCompute != "" {
		t.Errorf("series %+v, want the DWI series computed", rep.Series)
	}
	for _, f := range rep.Findings {
		if f.Severity >= rules.SeverityWarning {
			t.Errorf("%s %s on series %s: %s", f.Severity, f.Rule, f.SeriesUID, f.Message)
		}
	}
}

func TestAnUnreadableImageFailsOnlyItself(t *testing.T) {
	st := writeStudy(t, t.TempDir(), phantom.Options{})
	var dwiInfo phantom.SeriesInfo
	for _, si := range st.Series {
		if si.Role == phantom.RoleDWI {
			dwiInfo = si
		}
	}
	p := dwiInfo.Files[len(dwiInfo.Files)/3]
	info, err := os.Stat(p)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.Truncate(p, info.Size()-10); err != nil {
		t.Fatal(err)
	}
	rep, err := newEngine().AuditFiles(t.Context(), []string{st.Dir})
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.Series) != 1 || rep.Series[0].CannotCompute != "" || math.IsNaN(rep.Series[0].Measures.ParenchymaMedianADC) {
		t.Fatalf("series %+v, want the DWI series computed from the images that read", rep.Series)
	}
	var failed, incomplete int
	for _, f := range rep.Findings {
		switch f.Rule {
		case rules.IDAuditFailed:
			failed++
			if !strings.Contains(f.Message, filepath.Base(p)) || !strings.Contains(f.Message, "left out") {
				t.Errorf("audit-failed %q does not name the unreadable file as left out", f.Message)
			}
		case rules.IDIncompleteSeries:
			incomplete++
		}
	}
	if failed != 1 || incomplete != 1 {
		t.Errorf("%d audit-failed and %d incomplete-series findings, want one each: %+v", failed, incomplete, rep.Findings)
	}
}

// dwiSeriesOf is the phantom's DWI series.
func dwiSeriesOf(t *testing.T, st *phantom.Study) phantom.SeriesInfo {
	t.Helper()
	for _, si := range st.Series {
		if si.Role == phantom.RoleDWI {
			return si
		}
	}
	t.Fatal("the phantom has no DWI series")
	return phantom.SeriesInfo{}
}

func TestRepeatedImagesAreAveragedIntoTheADCNeverDropped(t *testing.T) {
	dir := t.TempDir()
	st := writeStudy(t, filepath.Join(dir, "study"), phantom.Options{})
	single, err := newEngine().AuditFiles(t.Context(), []string{st.Dir})
	if err != nil {
		t.Fatal(err)
	}
	// A second average of every image: the same b-value, direction and
	// slice under another SOP Instance UID (of the same length).
	dwiInfo := dwiSeriesOf(t, st)
	for _, p := range dwiInfo.Files {
		id, err := header.ReadFile(p)
		if err != nil {
			t.Fatal(err)
		}
		uid := id.SOPInstanceUID
		other := uid[:len(uid)-1] + string("12"[(uid[len(uid)-1]-'0')%2])
		copyPatched(t, p, st.Dir, uid, other)
	}
	rep, err := newEngine().AuditFiles(t.Context(), []string{st.Dir})
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.Series) != 1 || len(single.Series) != 1 {
		t.Fatalf("%d and %d series, want the DWI series", len(rep.Series), len(single.Series))
	}
	got, want := rep.Series[0], single.Series[0]
	if len(got.Volumes) != len(want.Volumes) || len(got.Volumes) == 0 {
		t.Fatalf("gradient table %+v, want the rows of %+v", got.Volumes, want.Volumes)
	}
	for i, v := range got.Volumes {
		if v.Images != 2*want.Volumes[i].Images || v.Slices != want.Volumes[i].Slices {
			t.Errorf("row %d: %d images on %d slices, want %d on %d (every repeat counted)", i, v.Images, v.Slices, 2*want.Volumes[i].Images, want.Volumes[i].Slices)
		}
	}
	// Identical repeats average to the same images: the same ADC.
	if a, b := got.Measures.ParenchymaMedianADC, want.Measures.ParenchymaMedianADC; math.IsNaN(a) || math.Abs(a-b) > 1e-12 {
		t.Errorf("tissue ADC %v with repeats, %v without", a, b)
	}
	for _, f := range rep.Findings {
		if f.Severity >= rules.SeverityWarning {
			t.Errorf("%s %s: %s", f.Severity, f.Rule, f.Message)
		}
	}
}

func TestImagesThatLostTheirDirectionGetUnknownDirections(t *testing.T) {
	st := writeStudy(t, t.TempDir(), phantom.Options{})
	// Diffusion Gradient Orientation (0018,9089), PS3.3 C.8.13.5.9,
	// moved to group 0019 (Explicit VR Little Endian tag bytes): the
	// images keep their b-value and DIRECTIONAL but give no direction.
	dwiInfo := dwiSeriesOf(t, st)
	moved := 0
	for _, p := range dwiInfo.Files {
		b, err := os.ReadFile(p)
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Contains(b, []byte("\x18\x00\x89\x90FD")) {
			continue
		}
		if err := os.WriteFile(p, bytes.ReplaceAll(b, []byte("\x18\x00\x89\x90FD"), []byte("\x19\x00\x89\x90FD")), 0o644); err != nil {
			t.Fatal(err)
		}
		moved++
	}
	if moved == 0 {
		t.Fatal("no image of the phantom carries a Diffusion Gradient Orientation to remove")
	}
	rep, err := newEngine().AuditFiles(t.Context(), []string{st.Dir})
	if err != nil {
		t.Fatal(err)
	}
	var found []rules.Finding
	for _, f := range rep.Findings {
		if f.Rule == rules.IDUnknownDirections {
			found = append(found, f)
		}
	}
	if len(found) != 1 || found[0].Measured != float64(moved) || !strings.Contains(found[0].Message, "b = 1000 s/mm²") {
		t.Errorf("unknown-directions findings %+v, want one counting the %d images", found, moved)
	}
	if len(rep.Series) != 1 {
		t.Fatalf("%d series", len(rep.Series))
	}
	kinds := map[string]int{}
	for _, v := range rep.Series[0].Volumes {
		kinds[v.Weighting.String()] += v.Images
	}
	if kinds["isotropic"] != moved {
		t.Errorf("gradient table %+v: want the %d images without direction kept in one isotropic volume", rep.Series[0].Volumes, moved)
	}
}

func TestAnImageWithoutGeometryFailsOnlyItself(t *testing.T) {
	st := writeStudy(t, t.TempDir(), phantom.Options{})
	p := dwiSeriesOf(t, st).Files[1]
	b, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	// Image Position (Patient) (0020,0032), PS3.3 C.7.6.2, moved to group
	// 0021 (Explicit VR Little Endian tag bytes): the image has no place.
	ipp := []byte("\x20\x00\x32\x00DS")
	if !bytes.Contains(b, ipp) {
		t.Fatal("the phantom's image has no Image Position (Patient)")
	}
	if err := os.WriteFile(p, bytes.ReplaceAll(b, ipp, []byte("\x21\x00\x32\x00DS")), 0o644); err != nil {
		t.Fatal(err)
	}
	rep, err := newEngine().AuditFiles(t.Context(), []string{st.Dir})
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.Series) != 1 || rep.Series[0].CannotCompute != "" {
		t.Fatalf("series %+v, want the DWI series computed without the image", rep.Series)
	}
	n := 0
	for _, f := range rep.Findings {
		if f.Rule == rules.IDAuditFailed {
			n++
			if !strings.Contains(f.Message, "Image Position and Orientation") || !strings.Contains(f.Message, "left out") {
				t.Errorf("audit-failed %q does not say the image without geometry was left out", f.Message)
			}
		}
	}
	if n != 1 {
		t.Errorf("%d audit-failed findings, want one: %+v", n, rep.Findings)
	}
}
