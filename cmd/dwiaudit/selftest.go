package main

// `dwiaudit selftest`: proves that an installed node audits. It writes a
// planted-defect suite (one synthetic study per rule and a clean one,
// fresh UIDs every run, under the test Patient ID the node leaves out of
// compliance reports and drift metrics), sends it with C-STORE like a
// scanner would, waits for the node's audits over its HTTP API and
// compares, rule by rule.

import (
	"context"
	"crypto/rand"
	"encoding/binary"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"text/tabwriter"
	"time"

	"dwiaudit/audit/phantom"
	"dwiaudit/config"
	"dwiaudit/rules"
	"dwiaudit/scp"
)

// Defaults of the self-test's flags.
const (
	// defaultSelftestTimeout bounds the wait for the audits: the node's
	// default settle is 30 s, and the suite audits in seconds.
	defaultSelftestTimeout = 3 * time.Minute
	// selftestCallingAE is the calling AE title the suite is sent as
	// (at most 16 characters, PS3.5 6.2 AE).
	selftestCallingAE = "DWIAUDIT_SELFTST"
)

func runSelftest(ctx context.Context, env *cliEnv, args []string) int {
	fs := newFlagSet(env, "selftest", "--to HOST:PORT --server URL [flags]")
	to := fs.String("to", "127.0.0.1:11112", "the node's DICOM address host:port")
	server := fs.String("server", "http://127.0.0.1:8080", "the node's HTTP address")
	calling := fs.String("calling-ae", selftestCallingAE, "our calling AE title (a peer the node knows, if it lists peers)")
	called := fs.String("called-ae", scp.DefaultAETitle, "the node's AE title")
	patientID := fs.String("patient-id", config.DefaultTestPatientID, "Patient ID of the suite: one of the node's audit.test_patient_ids, so that compliance reports and drift metrics leave it out")
	timeout := fs.Duration("timeout", defaultSelftestTimeout, "how long to wait for the audits (the node's settle time plus a little)")
	if code := parseFlags(fs, args); code >= 0 {
		return code
	}
	var problems []string
	if fs.NArg() != 0 {
		problems = append(problems, fmt.Sprintf("unexpected argument %q", fs.Arg(0)))
	}
	if !strings.HasPrefix(*server, "http://") && !strings.HasPrefix(*server, "https://") {
		problems = append(problems, fmt.Sprintf("--server %q: want a URL such as http://127.0.0.1:8080", *server))
	}
	if *to == "" {
		problems = append(problems, "--to: empty; want host:port")
	}
	if *timeout <= 0 {
		problems = append(problems, fmt.Sprintf("--timeout %v: want a positive duration", *timeout))
	}
	if *patientID == "" || len(*patientID) > 64 { // LO, PS3.5 6.2
		problems = append(problems, fmt.Sprintf("--patient-id %q: want 1 to 64 characters", *patientID))
	}
	for _, ae := range []struct{ flag, v string }{{"--calling-ae", *calling}, {"--called-ae", *called}} {
		if ae.v == "" || len(ae.v) > 16 { // AE, PS3.5 6.2
			problems = append(problems, fmt.Sprintf("%s %q: want 1 to 16 characters", ae.flag, ae.v))
		}
	}
	if len(problems) > 0 {
		for _, p := range problems {
			fmt.Fprintln(env.stderr, "dwiaudit selftest:", p)
		}
		fs.Usage()
		return exitUsage
	}
	st := &selftest{
		env: env, to: *to, patientID: *patientID, timeout: *timeout,
		dialer: &scp.Dialer{CallingAETitle: *calling, CalledAETitle: *called},
		client: newFindingsClient(*server),
	}
	return st.run(ctx)
}

type selftest struct {
	env       *cliEnv
	to        string
	patientID string
	timeout   time.Duration
	dialer    *scp.Dialer
	client    *findingsClient
}

// selftestStudy is one study of the suite as written.
type selftestStudy struct {
	plant    plant
	studyUID string
}

func (s *selftest) run(ctx context.Context) int {
	w := s.env.stdout
	dir, err := os.MkdirTemp("", "dwiaudit-selftest-")
	if err != nil {
		fmt.Fprintln(s.env.stderr, "dwiaudit selftest:", err)
		return exitFailure
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
			StudyDate: now, PatientID: s.patientID, PatientName: "TEST^SELFTEST",
		})
		if err != nil {
			fmt.Fprintln(s.env.stderr, "dwiaudit selftest:", err)
			return exitFailure
		}
		studies = append(studies, selftestStudy{plant: p, studyUID: st.StudyUID})
	}
	fmt.Fprintf(w, "dwiaudit selftest: %d synthetic studies (%dx%d, %d slices, Patient ID %s), one per rule and a clean one, to %s as %s\n",
		len(studies), suiteMatrix, suiteMatrix, suiteSlices, s.patientID, s.to, s.dialer.CallingAETitle)
	sum, err := sendStudies(ctx, s.dialer, s.to, []string{dir})
	if err != nil {
		fmt.Fprintln(s.env.stderr, "dwiaudit selftest: sending:", err)
		fmt.Fprintln(w, "selftest: FAIL (the suite could not be sent)")
		return exitFailure
	}
	fmt.Fprintf(w, "sent %d files in %v; waiting for the audits (at most %v)\n", sum.Files, sum.Duration.Round(10*time.Millisecond), s.timeout)

	var uids []string
	for _, st := range studies {
		uids = append(uids, st.studyUID)
	}
	audits, err := awaitAudits(ctx, s.client, []string{""}, uids, time.Now().Add(s.timeout))
	if err != nil && !errors.Is(err, errAuditsTimeout) {
		fmt.Fprintln(s.env.stderr, "dwiaudit selftest: asking for the audits:", err)
		fmt.Fprintln(w, "selftest: FAIL (the node's API did not answer)")
		return exitFailure
	}
	if err != nil {
		fmt.Fprintln(w, "note:", err, "(is the node's settle time longer than --timeout?)")
	}
	return s.report(studies, audits)
}

// report prints one line per study, expected against found, and the
// verdict; it returns the exit code.
func (s *selftest) report(studies []selftestStudy, audits []auditView) int {
	w := s.env.stdout
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
	fmt.Fprintln(w, cautionLine)
	if failed > 0 {
		fmt.Fprintf(w, "selftest: FAIL, %d of %d studies not as expected (a rule switched off in the node's audit.rules, or the node not auditing)\n", failed, len(studies))
		return exitFailure
	}
	fmt.Fprintf(w, "selftest: PASS, all %d studies as expected\n", len(studies))
	return exitOK
}
