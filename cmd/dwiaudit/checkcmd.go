package main

// `dwiaudit check`: audit DICOM files on disk with no server, for a
// technologist at a workstation and for scripts (--format json, exit
// status by --fail-on). The report itself is audit/report's (check.go).

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"

	"dwiaudit/audit/report"
	"dwiaudit/config"
	"dwiaudit/rules"
)

// cautionLine ends every text report (docs/references.md#safety-wording).
const cautionLine = report.Caution

func runCheck(ctx context.Context, env *cliEnv, args []string) int {
	flags := newFlagSet(env, "check", "[--config FILE] [--format text|json] [--fail-on warning|error] PATH...")
	configPath := flags.String("config", "", "take the audit settings from the audit: section of this node configuration file (other sections are not used)")
	format := flags.String("format", "text", "text (tables for people) or json (a stable interface for scripts)")
	failOn := flags.String("fail-on", "error", "exit 1 when a finding of this severity or above exists: warning or error")
	if code := parseFlags(flags, args); code >= 0 {
		return code
	}
	if flags.NArg() == 0 {
		fmt.Fprintln(env.stderr, "dwiaudit check: name at least one file or folder")
		flags.Usage()
		return exitUsage
	}
	if *format != "text" && *format != "json" {
		fmt.Fprintf(env.stderr, "dwiaudit check: --format %q: use text or json\n", *format)
		return exitUsage
	}
	threshold, err := parseFailOn(*failOn)
	if err != nil {
		fmt.Fprintln(env.stderr, "dwiaudit check:", err)
		return exitUsage
	}
	ac := config.Default().Audit
	if *configPath != "" {
		if ac, err = config.LoadAuditFile(*configPath); err != nil {
			fmt.Fprintln(env.stderr, "dwiaudit check:", err)
			return exitUsage
		}
	}
	eng, err := ac.Engine(nil)
	if err != nil {
		fmt.Fprintln(env.stderr, "dwiaudit check:", err)
		return exitUsage
	}
	rep, err := eng.AuditFiles(ctx, flags.Args())
	switch {
	case errors.Is(err, fs.ErrNotExist):
		fmt.Fprintln(env.stderr, "dwiaudit check:", err)
		return exitUsage
	case err != nil:
		fmt.Fprintln(env.stderr, "dwiaudit check:", err)
		return exitFailure
	}

	if *format == "json" {
		enc := json.NewEncoder(env.stdout)
		enc.SetIndent("", "  ")
		if err := enc.Encode(report.CheckBody(rep)); err != nil {
			fmt.Fprintln(env.stderr, "dwiaudit check:", err)
			return exitFailure
		}
	} else {
		report.PrintCheck(env.stdout, rep)
	}
	for _, f := range rep.Findings {
		if f.Severity >= threshold {
			return exitFailure
		}
	}
	return exitOK
}

// parseFailOn reads --fail-on: warning or error (info findings never
// fail a check: they are notes).
func parseFailOn(s string) (rules.Severity, error) {
	switch s {
	case "warning":
		return rules.SeverityWarning, nil
	case "error":
		return rules.SeverityError, nil
	}
	return 0, fmt.Errorf("--fail-on %q: use warning or error", s)
}
