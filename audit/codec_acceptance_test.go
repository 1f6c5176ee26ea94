package audit_test

import (
	"bytes"
	"fmt"
	"io/fs"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"dwiaudit/audit"
	"dwiaudit/audit/phantom"
	"dwiaudit/rules"
	"dwiaudit/scp/scptest"
)

// TestCompressedStudyAuditsAsTheNativeOne re-encodes every file of a
// phantom study (classic and multi-frame) with each DCMTK lossless
// encoder and audits the copy: its series, measures (ADC, eADC, SNR) and
// findings must equal the native study's, since lossless coding gives the
// same samples back (PS3.5 8.2). A copy labelled JPEG 2000, which the
// audit does not decode, must say so by name instead.
func TestCompressedStudyAuditsAsTheNativeOne(t *testing.T) {
	encoders := []struct {
		tool string
		args []string
	}{
		{"dcmcrle", nil},
		{"dcmcjpeg", []string{"+e1"}},
		{"dcmcjpeg", []string{"+el", "+sv", "7"}},
		{"dcmcjpls", []string{"+el"}},
	}
	for _, tool := range []string{"dcmcrle", "dcmcjpeg", "dcmcjpls"} {
		scptest.NeedDCMTK(t, tool)
	}
	for _, multi := range []bool{false, true} {
		dir := t.TempDir()
		st, err := phantom.Write(filepath.Join(dir, "native"), phantom.Options{Matrix: 64, Slices: acceptanceSlices, Seed: 2, MultiFrame: multi})
		if err != nil {
			t.Fatal(err)
		}
		native := auditDir(t, st.Dir)
		if len(native.Series) == 0 {
			t.Fatal("the native study gave no series")
		}
		for i, enc := range encoders {
			t.Run(fmt.Sprintf("%s %s %v", modeName(multi), enc.tool, enc.args), func(t *testing.T) {
				out := filepath.Join(dir, fmt.Sprint(i))
				reencode(t, st.Dir, out, enc.tool, enc.args...)
				got := auditDir(t, out)
				sameAudit(t, got, native)
			})
		}
		t.Run(modeName(multi)+" labelled JPEG 2000 is reported as not decodable by name", func(t *testing.T) {
			out := filepath.Join(dir, "j2k")
			reencode(t, st.Dir, out, "dcmcjpls", "+el")
			relabel(t, out, "1.2.840.10008.1.2.4.80", "1.2.840.10008.1.2.4.90")
			got := auditDir(t, out)
			found := false
			for _, s := range got.Series {
				if strings.Contains(s.CannotCompute, "JPEG 2000 (Lossless Only) (1.2.840.10008.1.2.4.90): the audit cannot decode") {
					found = true
				}
			}
			if !found {
				for _, s := range got.Series {
					t.Logf("series %d: %q", s.SeriesNumber, s.CannotCompute)
				}
				t.Error("no series says the audit cannot decode JPEG 2000")
			}
		})
	}
}

func auditDir(t *testing.T, dir string) *audit.Report {
	t.Helper()
	e := audit.NewEngine(rules.All(), rules.DefaultConfig())
	rep, err := e.AuditFiles(t.Context(), []string{dir})
	if err != nil {
		t.Fatalf("AuditFiles: %v", err)
	}
	return rep
}

// reencode writes every file under src, compressed by tool, to the same
// place under dst.
func reencode(t *testing.T, src, dst, tool string, args ...string) {
	t.Helper()
	path := scptest.NeedDCMTK(t, tool)
	err := filepath.WalkDir(src, func(p string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		rel, _ := filepath.Rel(src, p)
		out := filepath.Join(dst, rel)
		if err := os.MkdirAll(filepath.Dir(out), 0o755); err != nil {
			return err
		}
		if b, err := exec.Command(path, append(append([]string{}, args...), p, out)...).CombinedOutput(); err != nil {
			return fmt.Errorf("%s %s: %v\n%s", tool, rel, err, b)
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
}

// relabel replaces a transfer syntax UID of the same length in every
// file's meta.
func relabel(t *testing.T, dir, from, to string) {
	t.Helper()
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		if !bytes.Contains(b, []byte(from)) {
			return fmt.Errorf("%s does not hold %s", p, from)
		}
		return os.WriteFile(p, bytes.Replace(b, []byte(from), []byte(to), 1), 0o644)
	})
	if err != nil {
		t.Fatal(err)
	}
}

// sameAudit compares two reports series by series (series number, as the
// encoders keep the series UIDs) and finding by finding.
func sameAudit(t *testing.T, got, want *audit.Report) {
	t.Helper()
	if len(got.Series) != len(want.Series) {
		t.Fatalf("%d series, want %d", len(got.Series), len(want.Series))
	}
	for i, g := range got.Series {
		w := want.Series[i]
		if g.SeriesUID != w.SeriesUID || g.CannotCompute != w.CannotCompute {
			t.Errorf("series %d: %s cannot compute %q, want %s %q", g.SeriesNumber, g.SeriesUID, g.CannotCompute, w.SeriesUID, w.CannotCompute)
		}
		gm, wm := g.Measures, w.Measures
		for _, m := range []struct {
			name string
			g, w float64
		}{
			{"parenchyma median ADC", gm.ParenchymaMedianADC, wm.ParenchymaMedianADC},
			{"CSF ADC", gm.CSFADC, wm.CSFADC},
			{"b0 SNR", gm.B0SNR, wm.B0SNR},
			{"fraction negative", gm.FractionNegative, wm.FractionNegative},
		} {
			if m.g != m.w && !(math.IsNaN(m.g) && math.IsNaN(m.w)) {
				t.Errorf("series %d: %s %v, want %v as from the native files", g.SeriesNumber, m.name, m.g, m.w)
			}
		}
		if math.IsNaN(gm.ParenchymaMedianADC) && w.CannotCompute == "" {
			t.Errorf("series %d: no ADC", g.SeriesNumber)
		}
	}
	if len(got.Findings) != len(want.Findings) {
		t.Errorf("%d findings, want %d", len(got.Findings), len(want.Findings))
	}
	for i := range min(len(got.Findings), len(want.Findings)) {
		g, w := got.Findings[i], want.Findings[i]
		if g.Rule != w.Rule || g.Severity != w.Severity || g.Message != w.Message {
			t.Errorf("finding %d: %s %s %q, want %s %s %q", i, g.Severity, g.Rule, g.Message, w.Severity, w.Rule, w.Message)
		}
	}
}
