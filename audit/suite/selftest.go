package suite

// The installation self-test: the suite sent once, compared rule by
// rule.

import (
	"context"
	"crypto/rand"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"text/tabwriter"
	"time"

	"dwiaudit/audit/phantom"
	"dwiaudit/audit/report"
	"dwiaudit/rules"
	"dwiaudit/scp"
)

// Selftest sends the suite to a node, once, under a test Patient ID,
// and compares the node's audits with what each study planted.
type Selftest struct {
	To        string        // the node's DICOM address host:port
	Server    string        // the node's HTTP address, http://host:port
	Dialer    *scp.Dialer   // the calling and called AE titles
	PatientID string        // one of the node's audit.test_patient_ids
	Timeout   time.Duration // the wait for the audits
}

// selftestStudy is one study of the suite as written.
type selftestStudy struct {
	plant    plant
	studyUID string
}

// Run writes the suite into a temporary folder, sends it, awaits the
// audits and prints one line per study and the verdict on w. It reports
// whether every study was audited as planted; an error means the suite
// could not be written, sent or its audits asked for (the verdict, FAIL,
// is printed then too, when it is known).
func (s *Selftest) Run(ctx context.Context, w io.Writer) (bool, error) {
	client := newFindingsClient(s.Server)
	dir, err := os.MkdirTemp("", "dwiaudit-selftest-")
	if err != nil {
		return false, err
	}
	defer os.RemoveAll(dir)

	// A fresh seed every run gives fresh UIDs (phantom.Options.Seed
	// fixes them), so a node that saw an earlier run audits anew.
	var b [8]byte
	rand.Read(b[:])
	seed := int64(binary.LittleEndian.Uint64(b[:]) >> 1)
	now := time.Now()
	suite := append(rulePlants(), cleanPlant())
	var studies []selftestStudy
	for i, p := range suite {
		st, err := writePlant(filepath.Join(dir, fmt.Sprintf("%02d-%s", i, p.name)), p, phantom.Options{
			Matrix: suiteMatrix, Slices: suiteSlices, Seed: seed + int64(i),
			StudyDate: now, PatientID: s.PatientID, PatientName: "TEST^SELFTEST",
		})
		if err != nil {
			return false, err
		}
		studies = append(studies, selftestStudy{plant: p, studyUID: st.StudyUID})
	}
	fmt.Fprintf(w, "dwiaudit selftest: %d synthetic studies (%dx%d, %d slices, Patient ID %s), one per rule and a clean one, to %s as %s\n",
		len(studies), suiteMatrix, suiteMatrix, suiteSlices, s.PatientID, s.To, s.Dialer.CallingAETitle)
	sum, err := sendStudies(ctx, s.Dialer, s.To, []string{dir})
	if err != nil {
		fmt.Fprintln(w, "selftest: FAIL (the suite could not be sent)")
		return false, fmt.Errorf("sending: %w", err)
	}
	fmt.Fprintf(w, "sent %d files in %v; waiting for the audits (at most %v)\n", sum.Files, sum.Duration.Round(10*time.Millisecond), s.Timeout)

	var uids []string
	for _, st := range studies {
		uids = append(uids, st.studyUID)
	}
	audits, err := awaitAudits(ctx, client, []string{""}, uids, time.Now().Add(s.Timeout))
	if err != nil && !errors.Is(err, errAuditsTimeout) {
		fmt.Fprintln(w, "selftest: FAIL (the node's API did not answer)")
		return false, fmt.Errorf("asking for the audits: %w", err)
	}
	if err != nil {
		fmt.Fprintln(w, "note:", err, "(is the node's settle time longer than --timeout?)")
	}
	return s.report(w, studies, audits), nil
}

// report prints one line per study, expected against found, and the
// verdict; it reports whether every study was as expected.
func (s *Selftest) report(w io.Writer, studies []selftestStudy, audits []auditView) bool {
	byStudy := map[string][]rules.Finding{}
	audited := map[string]bool{}
	for _, a := range audits {
		audited[a.StudyUID] = true
		byStudy[a.StudyUID] = append(byStudy[a.StudyUID], a.findings...)
	}
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "rule\tplanted\texpected\tfound\tresult\t")
	failed := 0
	for _, st := range studies {
		fs := byStudy[st.studyUID]
		var result, expected, found string
		switch {
		case st.plant.rule != "":
			expected = st.plant.rule
			i := slices.IndexFunc(fs, func(f rules.Finding) bool { return f.Rule == st.plant.rule })
			if i >= 0 {
				found = fmt.Sprintf("%s (%s)", fs[i].Rule, fs[i].Severity)
				result = "PASS"
			} else {
				found = "no " + st.plant.rule
				result = "FAIL"
			}
		default:
			expected = "no warning or error"
			var bad []string
			for _, f := range fs {
				if f.Severity >= rules.SeverityWarning && !slices.Contains(bad, f.Rule) {
					bad = append(bad, f.Rule)
				}
			}
			found, result = "no warning or error", "PASS"
			if len(bad) > 0 {
				found, result = strings.Join(bad, ", "), "FAIL"
			}
		}
		if !audited[st.studyUID] {
			found, result = "not audited", "FAIL"
		}
		if result == "FAIL" {
			failed++
		}
		rule := st.plant.rule
		if rule == "" {
			rule = "(clean)"
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t\n", rule, st.plant.name, expected, found, result)
	}
	tw.Flush()
	fmt.Fprintln(w, report.Caution)
	if failed > 0 {
		fmt.Fprintf(w, "selftest: FAIL, %d of %d studies not as expected (a rule switched off in the node's audit.rules, or the node not auditing)\n", failed, len(studies))
		return false
	}
	fmt.Fprintf(w, "selftest: PASS, all %d studies as expected\n", len(studies))
	return true
}
