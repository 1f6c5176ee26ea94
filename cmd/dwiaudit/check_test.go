package main

import (
	"bytes"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"dwiaudit/audit"
	"dwiaudit/audit/analysis"
	"dwiaudit/audit/dwi"
	"dwiaudit/audit/phantom"
	"dwiaudit/audit/report"
	"dwiaudit/internal/testtool"
	"dwiaudit/rules"
	"dwiaudit/scp/part10"
)

// checkStudy writes a small phantom study for the check tests.
func checkStudy(t *testing.T, c phantom.Case) string {
	t.Helper()
	return checkStudySeed(t, c, 3)
}

// checkStudySeed is checkStudy with another seed: another study (the
// UIDs depend on the seed).
func checkStudySeed(t *testing.T, c phantom.Case, seed int64) string {
	t.Helper()
	st, err := phantom.Write(filepath.Join(t.TempDir(), string(c)), phantom.Options{Case: c, Matrix: 64, Slices: 8, Seed: seed})
	if err != nil {
		t.Fatal(err)
	}
	return st.Dir
}

// compressedStudy is a clean study with one file claiming JPEG Baseline
// (PS3.5 A.4, PS3.6 Table A-1: 1.2.840.10008.1.2.4.50) over native
// pixels: the audit gives audit-failed, at severity warning
// (rules.AuditFailed), and nothing else.
func compressedStudy(t *testing.T) string {
	t.Helper()
	dir := checkStudySeed(t, phantom.CaseClean, 5)
	var files []string
	filepath.WalkDir(dir, func(p string, d os.DirEntry, err error) error {
		if err == nil && d.Type().IsRegular() {
			files = append(files, p)
		}
		return nil
	})
	slices.Sort(files)
	path := files[len(files)/2]
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	meta, off, err := part10.ReadMeta(bytes.NewReader(b))
	if err != nil {
		t.Fatal(err)
	}
	meta.TransferSyntaxUID = "1.2.840.10008.1.2.4.50"
	var out bytes.Buffer
	if err := part10.WriteHeader(&out, meta); err != nil {
		t.Fatal(err)
	}
	out.Write(b[off:])
	if err := os.WriteFile(path, out.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	return dir
}

func TestCheckExitCodes(t *testing.T) {
	clean := checkStudy(t, phantom.CaseClean)
	noB0 := checkStudy(t, phantom.CaseNoB0)
	compressed := compressedStudy(t)
	cfg := filepath.Join(t.TempDir(), "node.yaml")
	if err := os.WriteFile(cfg, []byte("audit:\n  rules:\n    missing-b0: {severity: warning}\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	badCfg := filepath.Join(t.TempDir(), "bad.yaml")
	if err := os.WriteFile(badCfg, []byte("audit:\n  workers: 0\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		name string
		args []string
		want int
	}{
		{"a clean study exits 0", []string{clean}, exitOK},
		{"an error finding exits 1", []string{noB0}, exitFailure},
		{"a warning does not fail by default", []string{compressed}, exitOK},
		{"a warning fails with --fail-on warning", []string{"--fail-on", "warning", compressed}, exitFailure},
		{"a severity lowered in the configuration no longer fails", []string{"--config", cfg, noB0}, exitOK},
		{"no path is a usage error", nil, exitUsage},
		{"an unknown format is a usage error", []string{"--format", "xml", clean}, exitUsage},
		{"--fail-on info is a usage error", []string{"--fail-on", "info", clean}, exitUsage},
		{"an invalid configuration is a usage error", []string{"--config", badCfg, clean}, exitUsage},
		{"a missing configuration file is a usage error", []string{"--config", filepath.Join(t.TempDir(), "none.yaml"), clean}, exitUsage},
		{"a path that is not there is a usage error", []string{filepath.Join(t.TempDir(), "nowhere")}, exitUsage},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			r := runCLI(t, append([]string{"check"}, tt.args...)...)
			if r.code != tt.want {
				t.Errorf("exit code %d, want %d", r.code, tt.want)
			}
		})
	}
}

func TestCheckTextShowsSeriesFindingsAndTheCaution(t *testing.T) {
	r := runCLI(t, "check", checkStudy(t, phantom.CaseNoB0), checkStudy(t, phantom.CaseClean))
	for _, want := range []string{
		"2 diffusion series in 2 studies",
		"SERIES", "DESCRIPTION", "TISSUE ADC", "CSF ADC", "B0 SNR",
		"DWI b0 b1000 3dir", "brain", "0,1000",
		"SEVERITY", "RULE", "error", rules.IDMissingB0,
		"1 error",
		// docs/references.md#safety-wording: every report that shows findings.
		"dwiaudit checks acquisitions; it does not diagnose. Clinical decisions rest with the radiologist and local policy.",
	} {
		if !strings.Contains(r.stdout, want) {
			t.Errorf("text output lacks %q:\n%s", want, r.stdout)
		}
	}
	if r := runCLI(t, "check", checkStudy(t, phantom.CaseClean)); !strings.Contains(r.stdout, "No findings.") || !strings.Contains(r.stdout, cautionLine) {
		t.Errorf("clean text output:\n%s", r.stdout)
	}
}

// The key set of `dwiaudit check --format json` (issue 5, item 4): a
// stable interface, exactly these names.
var (
	checkTopKeys     = []string{"findings", "series"}
	checkSeriesKeys  = []string{"bvalues", "measures", "protocol", "scanner", "series_description", "series_number", "series_uid", "study_uid", "volumes"}
	checkMeasureKeys = []string{"b0_snr", "csf_adc", "tissue_adc_median"}
	checkVolumeKeys  = []string{"bvalue", "bvalue_measured", "direction", "images", "kind", "slices"}
	checkFindingKeys = []string{"expected", "measured", "message", "rule", "series_uid", "severity", "study_uid"}
)

// TestCheckJSONIsStable pins the key set and the types of every value,
// on a real run: a computed series, one not computed (nulls), findings.
func TestCheckJSONIsStable(t *testing.T) {
	r := runCLI(t, "check", "--format", "json", checkStudy(t, phantom.CaseClean), checkStudy(t, phantom.CaseNoB0), compressedStudy(t))
	if r.code != exitFailure {
		t.Errorf("exit code %d, want 1 (missing-b0 is an error)", r.code)
	}
	var top map[string]any
	if err := json.Unmarshal([]byte(r.stdout), &top); err != nil {
		t.Fatalf("not JSON: %v\n%s", err, r.stdout)
	}
	wantKeys(t, "top level", top, checkTopKeys)
	series, _ := top["series"].([]any)
	findings, _ := top["findings"].([]any)
	if len(series) != 3 || len(findings) < 2 {
		t.Fatalf("%d series and %d findings, want 3 and at least 2", len(series), len(findings))
	}
	sawNull, sawNumber := false, false
	for _, s := range series {
		m, ok := s.(map[string]any)
		if !ok {
			t.Fatalf("series entry %T", s)
		}
		wantKeys(t, "series", m, checkSeriesKeys)
		for _, k := range []string{"study_uid", "series_uid", "series_description", "scanner", "protocol"} {
			wantType[string](t, "series."+k, m[k])
		}
		wantType[float64](t, "series.series_number", m["series_number"])
		for _, b := range wantType[[]any](t, "series.bvalues", m["bvalues"]) {
			wantType[float64](t, "series.bvalues[]", b)
		}
		for _, v := range wantType[[]any](t, "series.volumes", m["volumes"]) {
			vol := wantType[map[string]any](t, "series.volumes[]", v)
			wantKeys(t, "series.volumes[]", vol, checkVolumeKeys)
			for _, k := range []string{"bvalue", "bvalue_measured", "images", "slices"} {
				wantType[float64](t, "series.volumes[]."+k, vol[k])
			}
			wantType[string](t, "series.volumes[].kind", vol["kind"])
			if d := vol["direction"]; d != nil {
				if xyz := wantType[[]any](t, "series.volumes[].direction", d); len(xyz) != 3 {
					t.Errorf("direction %v, want [x, y, z]", xyz)
				}
			}
		}
		meas := wantType[map[string]any](t, "series.measures", m["measures"])
		wantKeys(t, "series.measures", meas, checkMeasureKeys)
		for _, k := range checkMeasureKeys {
			switch v := meas[k].(type) {
			case nil:
				sawNull = true
			case float64:
				sawNumber = true
			default:
				t.Errorf("measures.%s is %T, want a number or null", k, v)
			}
		}
		if adc, ok := meas["tissue_adc_median"].(float64); ok && !(adc > 0.0005 && adc < 0.001) {
			t.Errorf("tissue_adc_median %v: want mm²/s, about 0.0007 for the phantom's white matter (Helenius 2002 via references.md#helenius-2002)", adc)
		}
	}
	if !sawNull || !sawNumber {
		t.Errorf("measures: saw null %v, number %v; want both (a computed series and one not computed)", sawNull, sawNumber)
	}
	for _, f := range findings {
		m := wantType[map[string]any](t, "finding", f)
		wantKeys(t, "finding", m, checkFindingKeys)
		for _, k := range []string{"rule", "severity", "study_uid", "series_uid", "message"} {
			wantType[string](t, "finding."+k, m[k])
		}
		if sev := m["severity"]; sev != "info" && sev != "warning" && sev != "error" {
			t.Errorf("severity %v", sev)
		}
	}
}

func wantKeys(t *testing.T, what string, m map[string]any, want []string) {
	t.Helper()
	var got []string
	for k := range m {
		got = append(got, k)
	}
	slices.Sort(got)
	if !slices.Equal(got, want) {
		t.Errorf("%s keys %v, want exactly %v", what, got, want)
	}
}

func wantType[T any](t *testing.T, what string, v any) T {
	t.Helper()
	x, ok := v.(T)
	if !ok {
		var zero T
		t.Errorf("%s is %T (%v), want %T", what, v, v, zero)
	}
	return x
}

// TestCheckJSONGolden pins the bytes of the JSON for a fixed report:
// names, order, number formatting, null for NaN, [] for no b-values.
// Regenerate testdata/check.golden.json only for a deliberate format
// change (`go test ./cmd/dwiaudit -run TestCheckJSONGolden -update`).
func TestCheckJSONGolden(t *testing.T) {
	nan := math.NaN()
	rep := &audit.Report{
		Series: []audit.SeriesReport{
			{
				StudyUID: "2.25.1", SeriesUID: "2.25.1.2", SeriesNumber: 2, SeriesDescription: "DWI b0 b1000 3dir",
				Scanner: "QOH-MR1", Protocol: "brain", BValues: []float64{0, 1000},
				PhantomExpectedADC: nan, // not a phantom series (the engine's NaN)
				Measures:           analysis.Measures{ParenchymaMedianADC: 0.00079, CSFADC: 0.00301, B0SNR: 58.25},
				Volumes: []dwi.TableRow{
					{BValue: 0, BValueMeasured: 0.0020000000717118383, Weighting: dwi.WeightingB0, Images: 40, Slices: 20, Combined: dwi.CombinedMean},
					{BValue: 1000, BValueMeasured: 999.9979999999283, Weighting: dwi.WeightingTrace, Images: 20, Slices: 20},
					{BValue: 1000, BValueMeasured: 1000, Weighting: dwi.WeightingDirection, Direction: &dwi.Direction{0, 0, 1}, Images: 20, Slices: 20},
				},
			},
			{
				StudyUID: "2.25.1", SeriesUID: "2.25.1.3", SeriesNumber: 3, SeriesDescription: "DWI b1000",
				PhantomExpectedADC: nan,
				Measures:           analysis.Measures{ParenchymaMedianADC: nan, CSFADC: nan, B0SNR: math.Inf(1)}, CannotCompute: "no b0",
			},
		},
		Findings: []rules.Finding{
			{Rule: rules.IDMissingB0, Severity: rules.SeverityError, StudyUID: "2.25.1", SeriesUID: "2.25.1.3", SeriesNumber: 3,
				Message: "no b0", Measured: []float64{1000}, Expected: 0.0},
			{Rule: rules.IDADCOutOfRange, Severity: rules.SeverityWarning, StudyUID: "2.25.1", SeriesUID: "2.25.1.2", SeriesNumber: 2,
				Message: "CSF ADC low", Measured: 0.0021, Expected: []float64{0.00255, 0.00345}},
			{Rule: rules.IDAuditFailed, Severity: rules.SeverityInfo, StudyUID: "2.25.1", SeriesUID: "2.25.1.2",
				Message: "odd", Measured: nan, Expected: "a series the audit can read and compute"},
		},
	}
	var buf bytes.Buffer
	enc := json.NewEncoder(&buf)
	enc.SetIndent("", "  ")
	if err := enc.Encode(report.CheckBody(rep)); err != nil {
		t.Fatal(err)
	}
	testtool.Golden(t, filepath.Join("testdata", "check.golden.json"), buf.Bytes())
	if t.Failed() {
		t.Logf("the JSON written:\n%s", buf.String())
	}
}

// TestCheckJSONGivesTheGradientTable runs check on a clean phantom (b0,
// three orthogonal directions and the scanner's trace at b 1000, 8
// slices; audit/phantom) and reads its gradient table back.
func TestCheckJSONGivesTheGradientTable(t *testing.T) {
	r := runCLI(t, "check", "--format", "json", checkStudy(t, phantom.CaseClean))
	var body report.CheckResponse
	if err := json.Unmarshal([]byte(r.stdout), &body); err != nil {
		t.Fatalf("not JSON: %v\n%s", err, r.stdout)
	}
	if len(body.Series) != 1 {
		t.Fatalf("%d series, want 1", len(body.Series))
	}
	kinds := map[string]int{}
	dirs := 0
	for _, v := range body.Series[0].Volumes {
		kinds[v.Kind]++
		// Nominal b-values only, the measured one beside it.
		if v.BValue != 0 && v.BValue != 1000 || math.Abs(v.BValueMeasured-v.BValue) > 5 {
			t.Errorf("volume %+v: want nominal 0 or 1000 with the measured value within tolerance", v)
		}
		if v.Images != 8 || v.Slices != 8 {
			t.Errorf("volume %+v: want 8 images on 8 slices", v)
		}
		switch {
		case v.Kind == "direction" && v.Direction != nil:
			dirs++
			// A unit vector (PS3.3 C.8.13.5.9: direction cosines).
			if n := math.Sqrt(v.Direction[0]*v.Direction[0] + v.Direction[1]*v.Direction[1] + v.Direction[2]*v.Direction[2]); math.Abs(n-1) > 1e-9 {
				t.Errorf("direction %v has length %v", *v.Direction, n)
			}
		case v.Kind != "direction" && v.Direction != nil:
			t.Errorf("volume %+v: a %s volume has no direction", v, v.Kind)
		}
	}
	if kinds["b0"] != 1 || kinds["trace"] != 1 || kinds["direction"] != 3 || dirs != 3 || len(kinds) != 3 {
		t.Errorf("kinds %v with %d directions; want one b0, one trace, three directions", kinds, dirs)
	}
}

// TestCheckTextListsDerivedSeriesAndIgnoredObjects adds to a clean
// phantom an FA series (Image Type value 4 FA, common practice) and a
// private non-image object (MR Image Storage, PS3.4 B.5, replaced by a
// private SOP Class of the same length), both patched copies of its
// files: they are listed, and nothing fails.
func TestCheckTextListsDerivedSeriesAndIgnoredObjects(t *testing.T) {
	dir := checkStudy(t, phantom.CaseClean)
	var files []string
	filepath.WalkDir(dir, func(p string, d os.DirEntry, err error) error {
		if err == nil && d.Type().IsRegular() && strings.Contains(p, "dwi") {
			files = append(files, p)
		}
		return nil
	})
	slices.Sort(files)
	if len(files) < 2 {
		t.Fatalf("DWI files %v", files)
	}
	patch := func(src, name string, pairs ...string) {
		b, err := os.ReadFile(src)
		if err != nil {
			t.Fatal(err)
		}
		for i := 0; i < len(pairs); i += 2 {
			if !bytes.Contains(b, []byte(pairs[i])) || len(pairs[i]) != len(pairs[i+1]) {
				t.Fatalf("cannot patch %q in %s", pairs[i], src)
			}
			b = bytes.ReplaceAll(b, []byte(pairs[i]), []byte(pairs[i+1]))
		}
		if err := os.WriteFile(filepath.Join(dir, name), b, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	series := func(path string) string {
		r := runCLI(t, "check", "--format", "json", path)
		var body report.CheckResponse
		if err := json.Unmarshal([]byte(r.stdout), &body); err != nil || len(body.Series) != 1 {
			t.Fatalf("check of %s: %v\n%s", path, err, r.stdout)
		}
		return body.Series[0].SeriesUID
	}
	uid := series(dir)
	faUID := uid[:len(uid)-1] + string("12"[(uid[len(uid)-1]-'0')%2])
	patch(files[0], "fa.dcm", `ORIGINAL\PRIMARY\DIFFUSION\NONE `, `DERIVED\PRIMARY\DIFFUSION\FA    `, uid, faUID)
	patch(files[1], "csa.dcm", "1.2.840.10008.5.1.4.1.1.4\x00", "1.3.12.2.1107.5.9.1.0.0.1\x00")

	r := runCLI(t, "check", dir)
	if r.code != exitOK {
		t.Errorf("exit %d, want 0:\n%s", r.code, r.stdout)
	}
	for _, want := range []string{"FA map, 1 image, not audited", "1 DICOM file ignored, not images the audit reads (SOP Class 1.3.12.2.1107.5.9.1.0.0.1)", "No findings."} {
		if !strings.Contains(r.stdout, want) {
			t.Errorf("text output lacks %q:\n%s", want, r.stdout)
		}
	}
}
