package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"dwiaudit/audit/phantom"
)

func TestPhantomCommand(t *testing.T) {
	t.Run("--list prints every case and every layout with its description", func(t *testing.T) {
		r := runCLI(t, "phantom", "--list")
		if r.code != exitOK {
			t.Fatalf("exit %d", r.code)
		}
		cases, layouts, ok := strings.Cut(strings.TrimSpace(r.stdout), "\n\nlayouts (--layout):\n")
		if !ok {
			t.Fatalf("no layouts section in %q", r.stdout)
		}
		lines := strings.Split(cases, "\n")
		if len(lines) != len(phantom.Cases()) {
			t.Fatalf("%d lines for %d cases", len(lines), len(phantom.Cases()))
		}
		for i, c := range phantom.Cases() {
			f := strings.Fields(lines[i])
			if len(f) < 2 || f[0] != string(c) || !strings.Contains(lines[i], c.Description()) {
				t.Errorf("line %q, want case %s and its description", lines[i], c)
			}
		}
		lines = strings.Split(layouts, "\n")
		if len(lines) != len(phantom.Layouts()) {
			t.Fatalf("%d layout lines for %d layouts", len(lines), len(phantom.Layouts()))
		}
		for i, l := range phantom.Layouts() {
			f := strings.Fields(lines[i])
			if len(f) < 2 || f[0] != string(l) || !strings.Contains(lines[i], l.Description()) {
				t.Errorf("line %q, want layout %s and its description", lines[i], l)
			}
		}
	})
	t.Run("--help lists the flags", func(t *testing.T) {
		r := runCLI(t, "phantom", "--help")
		for _, flag := range []string{"-out", "-case", "-matrix", "-slices", "-seed", "-multiframe", "-layout", "-list"} {
			if !strings.Contains(r.stderr, flag) {
				t.Errorf("usage does not list %s", flag)
			}
		}
		for _, l := range phantom.Layouts() {
			if !strings.Contains(r.stderr, string(l)) {
				t.Errorf("usage does not name layout %s", l)
			}
		}
		if r.code != exitOK {
			t.Fatalf("exit %d", r.code)
		}
	})
	for _, multi := range []bool{false, true} {
		name := "a case is written as classic images"
		args := []string{}
		if multi {
			name, args = "a case is written as multi-frame instances", []string{"--multiframe"}
		}
		t.Run(name, func(t *testing.T) {
			out := filepath.Join(t.TempDir(), "study")
			r := runCLI(t, append([]string{"phantom", "--out", out, "--case", "scanner-adc-misscaled", "--matrix", "32", "--slices", "3", "--seed", "9"}, args...)...)
			if r.code != exitOK {
				t.Fatalf("exit %d", r.code)
			}
			files, err := filepath.Glob(filepath.Join(out, "*", "*.dcm"))
			if err != nil {
				t.Fatal(err)
			}
			// The same options through the Go API write the same files.
			st, err := phantom.Write(filepath.Join(t.TempDir(), "api"), phantom.Options{Case: phantom.CaseScannerADCScaled, Matrix: 32, Slices: 3, Seed: 9, MultiFrame: multi})
			if err != nil {
				t.Fatal(err)
			}
			if len(files) == 0 || len(files) != len(st.Files) {
				t.Fatalf("%d files, the API writes %d", len(files), len(st.Files))
			}
			for _, f := range st.Files {
				rel, _ := filepath.Rel(st.Dir, f)
				a, err1 := os.ReadFile(f)
				b, err2 := os.ReadFile(filepath.Join(out, rel))
				if err1 != nil || err2 != nil || string(a) != string(b) {
					t.Fatalf("%s differs between the command and the API (%v, %v)", rel, err1, err2)
				}
			}
			for _, want := range []string{"scanner-adc-misscaled", "planted:", "series 3 adc"} {
				if !strings.Contains(r.stdout, want) {
					t.Errorf("stdout lacks %q", want)
				}
			}
		})
	}
	refusals := []struct {
		name string
		args []string
		code int
		want string
	}{
		{"without --out it exits 2", []string{"phantom", "--case", "clean"}, exitUsage, "want --out"},
		{"an unknown case exits 2", []string{"phantom", "--out", "OUT", "--case", "no-such-case"}, exitUsage, "unknown case"},
		{"a matrix out of range exits 2", []string{"phantom", "--out", "OUT", "--matrix", "4"}, exitUsage, "Matrix 4"},
		{"an unknown station exits 2", []string{"phantom", "--out", "OUT", "--station", "XYZ"}, exitUsage, "unknown --station"},
		{"an unknown layout exits 2 naming the layouts", []string{"phantom", "--out", "OUT", "--layout", "siemens"}, exitUsage, `unknown --layout "siemens" (want one of standard, enhanced, siemens-mosaic, ge, philips, canon, uih)`},
		{"a maker's layout with --multiframe exits 2", []string{"phantom", "--out", "OUT", "--layout", "philips", "--multiframe"}, exitUsage, "MultiFrame with layout philips"},
	}
	for _, c := range refusals {
		t.Run(c.name, func(t *testing.T) {
			out := filepath.Join(t.TempDir(), "study")
			for i, a := range c.args {
				if a == "OUT" {
					c.args[i] = out
				}
			}
			r := runCLI(t, c.args...)
			if r.code != c.code || !strings.Contains(r.stderr, c.want) {
				t.Fatalf("exit %d, stderr %q; want %d and %q", r.code, r.stderr, c.code, c.want)
			}
		})
	}
	for _, l := range phantom.Layouts() {
		t.Run("layout "+string(l)+" writes what the API writes", func(t *testing.T) {
			out := filepath.Join(t.TempDir(), "study")
			r := runCLI(t, "phantom", "--out", out, "--layout", string(l), "--matrix", "16", "--slices", "2", "--seed", "4")
			if r.code != exitOK || !strings.Contains(r.stdout, "layout "+string(l)) {
				t.Fatalf("exit %d, stdout %q, stderr %q", r.code, r.stdout, r.stderr)
			}
			st, err := phantom.Write(filepath.Join(t.TempDir(), "api"), phantom.Options{Layout: l, Matrix: 16, Slices: 2, Seed: 4})
			if err != nil {
				t.Fatal(err)
			}
			for _, f := range st.Files {
				rel, _ := filepath.Rel(st.Dir, f)
				a, err1 := os.ReadFile(f)
				b, err2 := os.ReadFile(filepath.Join(out, rel))
				if err1 != nil || err2 != nil || string(a) != string(b) {
					t.Fatalf("%s differs between the command and the API (%v, %v)", rel, err1, err2)
				}
			}
		})
	}
	t.Run("a folder that holds files exits 1 and is left alone", func(t *testing.T) {
		dir := t.TempDir()
		keep := filepath.Join(dir, "keep.txt")
		if err := os.WriteFile(keep, []byte("x"), 0o644); err != nil {
			t.Fatal(err)
		}
		r := runCLI(t, "phantom", "--out", dir, "--matrix", "16", "--slices", "1")
		if r.code != exitFailure || !strings.Contains(r.stderr, "not empty") {
			t.Fatalf("exit %d, stderr %q", r.code, r.stderr)
		}
		if entries, _ := os.ReadDir(dir); len(entries) != 1 {
			t.Fatalf("folder now holds %d entries", len(entries))
		}
	})
}

// checkSummary is what `check --format json` says of each series and
// which rules fired, in a stable order.
func checkSummary(t *testing.T, dir string) []string {
	t.Helper()
	r := runCLI(t, "check", "--format", "json", "--fail-on", "error", dir)
	if r.code != exitOK && r.code != exitFailure {
		t.Fatalf("check %s: exit %d", dir, r.code)
	}
	var out struct {
		Series []struct {
			SeriesNumber int             `json:"series_number"`
			BValues      []float64       `json:"bvalues"`
			Measures     json.RawMessage `json:"measures"`
		} `json:"series"`
		Findings []struct {
			Rule     string `json:"rule"`
			Severity string `json:"severity"`
		} `json:"findings"`
	}
	if err := json.Unmarshal([]byte(r.stdout), &out); err != nil {
		t.Fatalf("check output is not JSON: %v\n%s", err, r.stdout)
	}
	var lines []string
	for _, s := range out.Series {
		var m bytes.Buffer
		if err := json.Compact(&m, s.Measures); err != nil {
			t.Fatal(err)
		}
		lines = append(lines, fmt.Sprintf("series %d b-values %v measures %s", s.SeriesNumber, s.BValues, m.String()))
	}
	for _, f := range out.Findings {
		lines = append(lines, "finding "+f.Rule+" "+f.Severity)
	}
	slices.Sort(lines)
	return lines
}

func TestPhantomLayoutsAuditAlike(t *testing.T) {
	for _, c := range []phantom.Case{phantom.CaseClean, phantom.CaseScannerADCCorrect} {
		opt := phantom.Options{Case: c, Matrix: 64, Slices: 8, Seed: 3}
		std, err := phantom.Write(filepath.Join(t.TempDir(), "standard"), opt)
		if err != nil {
			t.Fatal(err)
		}
		want := checkSummary(t, std.Dir)
		if len(want) == 0 || !strings.Contains(want[0], "b-values [0 1000]") {
			t.Fatalf("the standard layout audits as %q", want)
		}
		for _, l := range phantom.Layouts()[1:] {
			t.Run(fmt.Sprintf("case %s in layout %s gives the standard layout's b-values, measures and findings", c, l), func(t *testing.T) {
				o := opt
				o.Layout = l
				st, err := phantom.Write(filepath.Join(t.TempDir(), string(l)), o)
				if err != nil {
					t.Fatal(err)
				}
				// The same pixels read through another encoding: the same
				// ADC, to the last digit.
				if got := checkSummary(t, st.Dir); !slices.Equal(got, want) {
					t.Fatalf("audits as\n%s\nthe standard layout as\n%s", strings.Join(got, "\n"), strings.Join(want, "\n"))
				}
			})
		}
	}
}
