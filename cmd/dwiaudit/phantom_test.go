package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"dwiaudit/audit/phantom"
)

func TestPhantomCommand(t *testing.T) {
	t.Run("--list prints every case with its description", func(t *testing.T) {
		r := runCLI(t, "phantom", "--list")
		if r.code != exitOK {
			t.Fatalf("exit %d", r.code)
		}
		lines := strings.Split(strings.TrimSpace(r.stdout), "\n")
		if len(lines) != len(phantom.Cases()) {
			t.Fatalf("%d lines for %d cases", len(lines), len(phantom.Cases()))
		}
		for i, c := range phantom.Cases() {
			f := strings.Fields(lines[i])
			if len(f) < 2 || f[0] != string(c) || !strings.Contains(lines[i], c.Description()) {
				t.Errorf("line %q, want case %s and its description", lines[i], c)
			}
		}
	})
	t.Run("--help lists the flags", func(t *testing.T) {
		r := runCLI(t, "phantom", "--help")
		for _, flag := range []string{"-out", "-case", "-matrix", "-slices", "-seed", "-multiframe", "-list"} {
			if !strings.Contains(r.stderr, flag) {
				t.Errorf("usage does not list %s", flag)
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
