package deploy

import (
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"dwiaudit/rules"
)

// readDoc reads a documentation file by its path from the repository root.
func readDoc(t *testing.T, path string) string {
	t.Helper()
	b, err := os.ReadFile(filepath.Join("..", filepath.FromSlash(path)))
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

// section is the body of the "## title" section of a Markdown document,
// up to the next second-level heading.
func section(t *testing.T, doc, name, title string) string {
	t.Helper()
	i := strings.Index(doc, "\n"+title+"\n")
	if i < 0 {
		t.Fatalf("%s has no %q section", name, title)
	}
	body := doc[i+len(title)+2:]
	if j := strings.Index(body, "\n## "); j >= 0 {
		body = body[:j]
	}
	return body
}

// saysItDoesNotDiagnose reports whether text holds the caution, with its
// words joined by single spaces: the sentence may wrap.
func saysItDoesNotDiagnose(text string) bool {
	return strings.Contains(strings.Join(strings.Fields(text), " "), "dwiaudit checks acquisitions; it does not diagnose.")
}

// The operator documentation (README.md and the docs/ pages it links
// to) must keep up with the rules and the alerts: a rule or an alert it
// does not describe is one an operator meets without explanation.
func TestTheReadmeDescribesEveryRuleAndEveryAlert(t *testing.T) {
	checks := readDoc(t, "docs/checks.md")
	metrics := readDoc(t, "docs/metrics.md")
	ids := []string{rules.IDAuditFailed}
	for _, r := range rules.All() {
		ids = append(ids, r.ID())
	}
	for _, id := range ids {
		t.Run("rule "+id+" has a row in the Rules table and a section of its own", func(t *testing.T) {
			if !strings.Contains(checks, "\n| `"+id+"` |") {
				t.Errorf("docs/checks.md has no Rules table row for %s", id)
			}
			if !strings.Contains(checks, "\n#### `"+id+"`\n") {
				t.Errorf("docs/checks.md has no section for %s", id)
			}
		})
	}
	for _, name := range alertNames(t) {
		t.Run("alert "+name+" has a row in the alerts table", func(t *testing.T) {
			if !strings.Contains(metrics, "| `"+name+"` |") {
				t.Errorf("docs/metrics.md has no alerts table row for %s", name)
			}
		})
	}
	t.Run("the rules and alerts are described as checks of acquisitions, not diagnoses", func(t *testing.T) {
		for _, c := range []struct{ path, title string }{
			{"docs/checks.md", "## What it checks"},
			{"docs/installation.md", "## Installing as a service"},
			{"docs/metrics.md", "## Alerts"},
		} {
			if !saysItDoesNotDiagnose(section(t, readDoc(t, c.path), c.path, c.title)) {
				t.Errorf("%s, section %q, does not say that dwiaudit checks acquisitions and does not diagnose", c.path, c.title)
			}
		}
	})
	t.Run("the README's job paragraph says it checks acquisitions and does not diagnose", func(t *testing.T) {
		readme := readDoc(t, "README.md")
		first := readme[:strings.Index(readme, "\n## ")]
		if !saysItDoesNotDiagnose(first) || !strings.Contains(strings.Join(strings.Fields(first), " "), "rest with the radiologist and local policy") {
			t.Errorf("README.md's first paragraph lost the caution")
		}
	})
}

// Every relative link in the README, DEVELOPERS.md and docs/ must reach a
// file of the repository, and every "#anchor" an anchor of that file:
// text was moved between these pages, and a link left behind points at
// nothing.
func TestTheDocumentationLinksResolve(t *testing.T) {
	pages := []string{"README.md", "DEVELOPERS.md"}
	docs, err := filepath.Glob(filepath.Join("..", "docs", "*.md"))
	if err != nil {
		t.Fatal(err)
	}
	for _, d := range docs {
		pages = append(pages, filepath.ToSlash(strings.TrimPrefix(d, ".."+string(filepath.Separator))))
	}
	if len(pages) < 8 {
		t.Fatalf("found only %v: the docs/ pages are missing", pages)
	}
	link := regexp.MustCompile(`\]\(([^)\s]+)\)`)
	for _, page := range pages {
		text := readDoc(t, page)
		for _, m := range link.FindAllStringSubmatch(text, -1) {
			target := m[1]
			if strings.Contains(target, "://") || strings.HasPrefix(target, "mailto:") {
				continue
			}
			file, anchor, _ := strings.Cut(target, "#")
			path := page
			if file != "" {
				path = filepath.ToSlash(filepath.Join(filepath.Dir(page), file))
			}
			if strings.HasPrefix(path, "../") {
				t.Errorf("%s links outside the repository: %s", page, target)
				continue
			}
			b, err := os.ReadFile(filepath.Join("..", filepath.FromSlash(path)))
			if err != nil {
				t.Errorf("%s links to %s: %v", page, target, err)
				continue
			}
			if anchor != "" && !hasAnchor(string(b), anchor) {
				t.Errorf("%s links to %s: %s has no anchor %q", page, target, path, anchor)
			}
		}
	}
}

// hasAnchor reports whether a Markdown document defines anchor, as an
// <a id> or as the GitHub slug of a heading.
func hasAnchor(doc, anchor string) bool {
	if strings.Contains(doc, `<a id="`+anchor+`">`) {
		return true
	}
	drop := regexp.MustCompile("[^a-z0-9 _-]")
	for _, line := range strings.Split(doc, "\n") {
		if !strings.HasPrefix(line, "#") {
			continue
		}
		h := strings.ToLower(strings.TrimSpace(strings.TrimLeft(line, "#")))
		if strings.ReplaceAll(drop.ReplaceAllString(h, ""), " ", "-") == anchor {
			return true
		}
	}
	return false
}

// Every source note in the repository points inside it: a citation of a
// notes file outside the repository is one whoever clones the project
// cannot read, and a pointer into docs/references.md must reach an entry
// that is there.
func TestEverySourceNotePointsInsideTheRepository(t *testing.T) {
	refs := readDoc(t, "docs/references.md")
	outside := []string{"DOMAIN" + ".md", "../" + "shared/"}
	pointer := regexp.MustCompile(`references\.md#([A-Za-z0-9_-]+)`)
	files := 0
	err := filepath.WalkDir("..", func(path string, d os.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if d.IsDir() {
			if d.Name() == ".git" || d.Name() == "fuzz" {
				return filepath.SkipDir
			}
			return nil
		}
		b, err := os.ReadFile(path)
		if err != nil {
			return err
		}
		if strings.IndexByte(string(b), 0) >= 0 {
			return nil // binary fixtures
		}
		files++
		text := string(b)
		for _, o := range outside {
			if i := strings.Index(text, o); i >= 0 {
				t.Errorf("%s:%d cites %s, outside the repository; point at docs/references.md", path, 1+strings.Count(text[:i], "\n"), o)
			}
		}
		for _, m := range pointer.FindAllStringSubmatchIndex(text, -1) {
			if anchor := text[m[2]:m[3]]; !hasAnchor(refs, anchor) {
				t.Errorf("%s:%d points at docs/references.md#%s, which has no such entry", path, 1+strings.Count(text[:m[0]], "\n"), anchor)
			}
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if files < 100 {
		t.Fatalf("walked only %d files from the repository root: the walk is broken", files)
	}
}
