package main

import (
	"encoding/json"
	"regexp"
	"strings"
	"testing"

	"dwiaudit/rules"
)

// demoSentLine is how the demo names each study it sends:
// "sent  <scanner>  <HH:MM>  <planted>  accession <A>  study <UID>".
var demoSentLine = regexp.MustCompile(`(?m)^\s+sent\s+(\S+)\s+\d\d:\d\d\s+(\S+)\s+accession \S+\s+study (\S+)$`)

// demoDayLine is the heading of each scenario day.
var demoDayLine = regexp.MustCompile(`(?m)^== (\d{4}-\d\d-\d\d), day \d of \d$`)

// TestDemoExitShowsEveryRuleOnItsPlantedStudyAndNothingOnTheCleanOnes is
// what CI runs as "demo --exit from a clean clone": the whole demo, real
// node, real C-STORE, real data folder; then the data folder is read back
// independently of the demo's own output and judged against this test's
// own table of which planted study must fire which rule (the pairs of
// audit/acceptance_test.go, which name their sources).
func TestDemoExitShowsEveryRuleOnItsPlantedStudyAndNothingOnTheCleanOnes(t *testing.T) {
	data := t.TempDir()
	r := runCLI(t, "demo", "--exit", "--data", data)
	if r.code != exitOK {
		// Go on: the checks below say what differed.
		t.Errorf("demo --exit exited %d", r.code)
	}
	out := r.stdout

	t.Run("the output names every rule and carries the caution", func(t *testing.T) {
		for _, id := range []string{rules.IDMissingB0, rules.IDBValueMismatch, rules.IDIncompleteSeries, rules.IDGeometryMismatch,
			rules.IDADCOutOfRange, rules.HotspotID, rules.IDLowSNR, rules.IDScannerADCDisagrees, rules.IDPhantomADCBias, rules.IDAuditFailed} {
			if !strings.Contains(out, id) {
				t.Errorf("the output does not name %s", id)
			}
		}
		if !strings.Contains(out, cautionLine) {
			t.Error("the output lacks the caution line")
		}
		// One list per day, as the node's report endpoint serves it.
		if n := strings.Count(out, "Daily discrepancy list "); n != 4 {
			t.Errorf("%d daily lists in the output, want 4", n)
		}
		for _, path := range []string{"/days/", "/studies/", "/scanners/qoh-mr1-1.5t", "/metrics"} {
			if !strings.Contains(out, path) {
				t.Errorf("the output gives no %s URL", path)
			}
		}
	})

	// Study UID -> planted name, and scanner label, from the output.
	planted, scanner := map[string]string{}, map[string]string{}
	for _, m := range demoSentLine.FindAllStringSubmatch(out, -1) {
		scanner[m[3]], planted[m[3]] = m[1], m[2]
	}
	days := demoDayLine.FindAllStringSubmatch(out, -1)
	if len(planted) < 12 || len(days) != 4 {
		t.Fatalf("the output names %d studies over %d days; want a dozen or more over 4", len(planted), len(days))
	}

	// What the node stored, read from its data folder.
	st := openStoreReadOnly(t, data)
	// fired: planted name -> rules with a finding of warning or above.
	fired := map[string]map[string]bool{}
	audited := map[string]bool{}
	auditDays := map[string]bool{}
	for _, d := range days {
		recs, err := st.Findings(d[1])
		if err != nil {
			t.Fatal(err)
		}
		for _, rec := range recs {
			name, ok := planted[rec.StudyInstanceUID]
			if !ok {
				t.Errorf("an audit of study %s the output never named", rec.StudyInstanceUID)
				continue
			}
			audited[rec.StudyInstanceUID] = true
			auditDays[d[1]] = true
			if rec.Scanner != scanner[rec.StudyInstanceUID] {
				t.Errorf("audit of %s (%s) under scanner %q, want the peer's label %q", rec.SeriesUID, name, rec.Scanner, scanner[rec.StudyInstanceUID])
			}
			var fs []rules.Finding
			if err := json.Unmarshal(rec.Findings, &fs); err != nil {
				t.Fatal(err)
			}
			if fired[name] == nil {
				fired[name] = map[string]bool{}
			}
			for _, f := range fs {
				if f.Severity >= rules.SeverityWarning {
					fired[name][f.Rule] = true
				}
			}
		}
	}
	if len(audited) != len(planted) {
		t.Errorf("%d of the %d studies sent have audits", len(audited), len(planted))
	}
	if len(auditDays) != 4 {
		t.Errorf("audits fell on %d days, want 4 (the injected clock)", len(auditDays))
	}

	// Each rule on the study that plants its defect
	// (audit/acceptance_test.go's pairs; the ice-water-qa study whose
	// weighting drifted 5% up is this scenario's own, past the ice-water
	// profile's ±3.6%, from memory, docs/references.md#phantom-tolerance).
	for _, c := range []struct{ rule, on string }{
		{rules.IDMissingB0, "no-b0"},
		{rules.IDBValueMismatch, "bvalue-set-differs"},
		{rules.IDIncompleteSeries, "missing-slices"},
		{rules.IDGeometryMismatch, "slice-positions-differ"},
		{rules.IDADCOutOfRange, "bvalue-header-wrong"},
		{rules.HotspotID, "b0-artifact-dropout"},
		{rules.HotspotID, "b0-artifact-aliasing"},
		{rules.IDLowSNR, "low-snr"},
		{rules.IDScannerADCDisagrees, "scanner-adc-misscaled"},
		{rules.IDPhantomADCBias, "ice-water-warm"},
		{rules.IDPhantomADCBias, "ice-water-qa(b+5.0%)"},
		{rules.IDAuditFailed, "truncated-file"},
		{rules.IDAuditFailed, "compressed-file"},
	} {
		t.Run(c.rule+" fires on "+c.on, func(t *testing.T) {
			if !fired[c.on][c.rule] {
				t.Errorf("%s did not fire on %s; it gave %v", c.rule, c.on, fired[c.on])
			}
		})
	}

	t.Run("the clean studies have no warning or error", func(t *testing.T) {
		n := 0
		for uid, name := range planted {
			// clean, a correct scanner ADC map and ice water within
			// tolerance: audit/acceptance_test.go's clean cases.
			if name != "clean" && name != "scanner-adc-correct" && !strings.HasPrefix(name, "ice-water-qa(b+0.5") && !strings.HasPrefix(name, "ice-water-qa(b+1.5") {
				continue
			}
			n++
			if len(fired[name]) > 0 {
				t.Errorf("clean study %s (%s) gave %v", uid, name, fired[name])
			}
		}
		if n < 6 {
			t.Errorf("only %d clean studies in the scenario", n)
		}
	})

	t.Run("true lesions are no artifact", func(t *testing.T) {
		sent := map[string]bool{}
		for _, name := range planted {
			sent[name] = true
		}
		for _, name := range []string{"restriction-lesion", "t2-shine-through"} {
			if !sent[name] {
				t.Errorf("no %s study in the scenario", name)
			}
			for _, id := range []string{rules.HotspotID, rules.IDADCOutOfRange} {
				if fired[name][id] {
					t.Errorf("%s fired on %s", id, name)
				}
			}
		}
	})
}

func TestDemoRefusesAFolderThatHoldsData(t *testing.T) {
	data := t.TempDir()
	if r := runCLI(t, "demo", "--exit", "--data", "."); r.code != exitUsage || !strings.Contains(r.stderr, "not empty") {
		t.Errorf("demo --data . (this package's folder) exited %d, stderr %q; want 2 and a word on the folder", r.code, r.stderr)
	}
	if r := runCLI(t, "demo", "--exit", "--data", data, "extra"); r.code != exitUsage {
		t.Errorf("demo with an argument exited %d, want 2", r.code)
	}
}

// BenchmarkDemo measures the whole `dwiaudit demo --exit`: writing the
// 24 studies, sending them over C-STORE, the settle times and the audits
// (target: well under 60 s on two cores).
func BenchmarkDemo(b *testing.B) {
	for b.Loop() {
		r := runCLI(b, "demo", "--exit", "--data", b.TempDir())
		if r.code != exitOK {
			b.Fatalf("demo exited %d", r.code)
		}
	}
}
