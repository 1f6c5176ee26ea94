package main

// `dwiaudit selftest`: proves that an installed node audits. It writes a
// planted-defect suite (one synthetic study per rule and a clean one,
// fresh UIDs every run, under the test Patient ID the node leaves out of
// compliance reports and drift metrics), sends it with C-STORE like a
// scanner would, waits for the node's audits over its HTTP API and
// compares, rule by rule.

import (
	"context"
	"fmt"
	"strings"
	"time"

	"dwiaudit/audit/suite"
	"dwiaudit/config"
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
	st := &suite.Selftest{
		To: *to, Server: *server, PatientID: *patientID, Timeout: *timeout,
		Dialer: &scp.Dialer{CallingAETitle: *calling, CalledAETitle: *called},
	}
	ok, err := st.Run(ctx, env.stdout)
	if err != nil {
		fmt.Fprintln(env.stderr, "dwiaudit selftest:", err)
		return exitFailure
	}
	if !ok {
		return exitFailure
	}
	return exitOK
}
