package rules_test

import (
	"fmt"
	"path/filepath"
	"strings"
	"testing"

	"dwiaudit/audit/analysis"
	"dwiaudit/audit/dwi"
	"dwiaudit/audit/header"
	"dwiaudit/audit/phantom"
	"dwiaudit/rules"
)

// loadPhantomStudy writes a phantom study into a temporary folder, reads
// every file back with the audit's reader (pixels loaded), assembles the
// study, computes every diffusion series and wraps each for the rules,
// matched against cfg (rules.NewSeriesAudit: phantom profiles first).
// Series that fail assembly are included with their error, as the
// pipeline includes them.
func loadPhantomStudy(t testing.TB, opt phantom.Options, cfg *rules.Config) (*rules.Study, *phantom.Study) {
	t.Helper()
	ps, err := phantom.Write(filepath.Join(t.TempDir(), "study"), opt)
	if err != nil {
		t.Fatalf("phantom.Write(%+v): %v", opt, err)
	}
	var frames []dwi.Frame
	for _, path := range ps.Files {
		f, err := header.ExtractFile(path, header.ExtractOptions{LoadPixels: true})
		if err != nil {
			t.Fatalf("ExtractFile(%s): %v", path, err)
		}
		frames = append(frames, f...)
	}
	asm, err := dwi.AssembleStudy(frames, dwi.DefaultTolerances())
	if err != nil {
		t.Fatalf("AssembleStudy: %v", err)
	}
	st := &rules.Study{StudyUID: asm.StudyInstanceUID, Assembly: asm}
	for _, s := range asm.Series {
		res, err := analysis.Analyze(s, analysis.DefaultAnalyzeConfig())
		st.Series = append(st.Series, rules.NewSeriesAudit(cfg, s, res, err))
	}
	for _, failed := range asm.Failed {
		st.Series = append(st.Series, rules.NewSeriesAudit(cfg, nil, nil, failed))
	}
	if len(st.Series) == 0 {
		t.Fatal("no diffusion series assembled")
	}
	return st, ps
}

// ofRule keeps the findings of one rule.
func ofRule(fs []rules.Finding, id string) []rules.Finding {
	var out []rules.Finding
	for _, f := range fs {
		if f.Rule == id {
			out = append(out, f)
		}
	}
	return out
}

// serious keeps the warnings and errors.
func serious(fs []rules.Finding) []rules.Finding {
	var out []rules.Finding
	for _, f := range fs {
		if f.Severity >= rules.SeverityWarning {
			out = append(out, f)
		}
	}
	return out
}

// describe lists findings for a test failure.
func describe(fs []rules.Finding) string {
	if len(fs) == 0 {
		return "no findings"
	}
	var b strings.Builder
	for _, f := range fs {
		fmt.Fprintf(&b, "\n  %s %s series %d: %s (measured %v, expected %v)", f.Severity, f.Rule, f.SeriesNumber, f.Message, f.Measured, f.Expected)
	}
	return b.String()
}

// ownRules are every rule of All but b0-only-hotspot, which has its own
// tests (hotspot_test.go): these tests judge the rules of this file set
// alone.
func ownRules() []rules.Rule {
	var out []rules.Rule
	for _, r := range rules.All() {
		if r.ID() != rules.HotspotID {
			out = append(out, r)
		}
	}
	return out
}
