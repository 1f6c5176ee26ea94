package main

// `dwiaudit report`: the daily discrepancy list and the compliance
// report, from the data folder (read-only) when no server holds it,
// otherwise from the server's HTTP API.

import (
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"net/url"
	"time"

	"dwiaudit/audit/report"
	"dwiaudit/audit/web"
	"dwiaudit/config"
	"dwiaudit/store"
)

// Limits of `dwiaudit report`.
const (
	// reportHTTPTimeout bounds the request to a server: a year's
	// compliance report reads two years of audits, seconds at most.
	reportHTTPTimeout = 2 * time.Minute
)

const reportSynopsis = `daily [--date YYYY-MM-DD] [--format text|csv|json|html] [--data DIR | --server URL] [--config FILE]
       dwiaudit report compliance --from YYYY-MM-DD --to YYYY-MM-DD [--format text|csv|json|html] [--data DIR | --server URL] [--config FILE]`

// reportFlags are the flags both reports take.
type reportFlags struct {
	fs         *flag.FlagSet
	format     *string
	data       *string
	server     *string
	configPath *string
}

func newReportFlags(env *cliEnv, name, synopsis string) reportFlags {
	fs := newFlagSet(env, "report "+name, synopsis)
	return reportFlags{
		fs:         fs,
		format:     fs.String("format", "text", "text, csv, json or html"),
		data:       fs.String("data", "", "read the data folder DIR directly (read-only; default node.data_dir, "+config.DefaultDataDir+")"),
		server:     fs.String("server", "", "ask a running dwiaudit serve at URL, e.g. http://127.0.0.1:8080"),
		configPath: fs.String("config", "", "take the data folder, time zone and reports: settings from this configuration file"),
	}
}

func runReport(ctx context.Context, env *cliEnv, args []string) int {
	if len(args) == 0 || args[0] == "-h" || args[0] == "--help" || args[0] == "help" {
		fmt.Fprintf(env.stderr, "Usage: dwiaudit report %s\n\n", reportSynopsis)
		fmt.Fprintln(env.stderr, "The daily discrepancy list (every finding of the studies audited on a day) and the protocol")
		fmt.Fprintln(env.stderr, "compliance report (per protocol and scanner, with the trend against the period before).")
		fmt.Fprintln(env.stderr, report.Caution)
		for _, sub := range []string{"daily", "compliance"} {
			fmt.Fprintf(env.stderr, "\nFlags: (report %s)\n", sub)
			rf := newReportFlags(env, sub, "")
			if sub == "daily" {
				rf.fs.String("date", "", "the day, YYYY-MM-DD in the node's time zone (default today)")
			} else {
				rf.fs.String("from", "", "first day, YYYY-MM-DD")
				rf.fs.String("to", "", "last day, YYYY-MM-DD (inclusive)")
			}
			rf.fs.PrintDefaults()
		}
		if len(args) == 0 {
			return exitUsage
		}
		return exitOK
	}
	switch args[0] {
	case "daily":
		return runReportDaily(ctx, env, args[1:])
	case "compliance":
		return runReportCompliance(ctx, env, args[1:])
	}
	fmt.Fprintf(env.stderr, "dwiaudit report: unknown report %q; use daily or compliance\n", args[0])
	return exitUsage
}

// prepare parses the flags and loads the configuration; a non-negative
// code means stop.
func (rf reportFlags) prepare(env *cliEnv, name string, args []string) (report.Format, config.Config, *time.Location, int) {
	if code := parseFlags(rf.fs, args); code >= 0 {
		return 0, config.Config{}, nil, code
	}
	fail := func(format string, a ...any) (report.Format, config.Config, *time.Location, int) {
		fmt.Fprintf(env.stderr, "dwiaudit report %s: %s\n", name, fmt.Sprintf(format, a...))
		return 0, config.Config{}, nil, exitUsage
	}
	if rf.fs.NArg() != 0 {
		return fail("unexpected argument %q", rf.fs.Arg(0))
	}
	if *rf.data != "" && *rf.server != "" {
		return fail("give --data or --server, not both")
	}
	f, err := report.ParseFormat(*rf.format)
	if err != nil {
		return fail("--format %q: use text, csv, json or html", *rf.format)
	}
	cfg := config.Default()
	if *rf.configPath != "" {
		if cfg, err = config.LoadFile(*rf.configPath); err != nil {
			return fail("%v", err)
		}
	}
	loc, err := config.LoadLocation(cfg.Node.TimeZone)
	if err != nil {
		return fail("node.time_zone: %v", err)
	}
	return f, cfg, loc, -1
}

func runReportDaily(ctx context.Context, env *cliEnv, args []string) int {
	rf := newReportFlags(env, "daily", "[--date YYYY-MM-DD] [--format text|csv|json|html] [--data DIR | --server URL] [--config FILE]")
	date := rf.fs.String("date", "", "the day, YYYY-MM-DD in the node's time zone (default today)")
	f, cfg, loc, code := rf.prepare(env, "daily", args)
	if code >= 0 {
		return code
	}
	day := *date
	if day == "" {
		day = time.Now().In(loc).Format(dayLayout)
	} else if t, err := time.Parse(dayLayout, day); err != nil || t.Format(dayLayout) != day {
		fmt.Fprintf(env.stderr, "dwiaudit report daily: --date %q is not YYYY-MM-DD\n", day)
		return exitUsage
	}
	var l *report.DailyList
	var err error
	if *rf.server != "" {
		var body []byte
		if body, err = askServer(ctx, *rf.server, []string{"api", "v1", "reports", "daily", day + ".json"}, nil); err == nil {
			l, err = report.ParseDailyList(body)
		}
	} else {
		err = withFolder(cfg, *rf.data, loc, func(st *store.Store) (err error) {
			l, err = cfg.Reports.Archive(st, loc, time.Now).Daily(day)
			return err
		})
	}
	if err != nil {
		fmt.Fprintln(env.stderr, "dwiaudit report daily:", err)
		return exitFailure
	}
	if err := l.Write(env.stdout, f); err != nil {
		fmt.Fprintln(env.stderr, "dwiaudit report daily:", err)
		return exitFailure
	}
	return exitOK
}

func runReportCompliance(ctx context.Context, env *cliEnv, args []string) int {
	rf := newReportFlags(env, "compliance", "--from YYYY-MM-DD --to YYYY-MM-DD [--format text|csv|json|html] [--data DIR | --server URL] [--config FILE]")
	from := rf.fs.String("from", "", "first day, YYYY-MM-DD")
	to := rf.fs.String("to", "", "last day, YYYY-MM-DD (inclusive)")
	f, cfg, loc, code := rf.prepare(env, "compliance", args)
	if code >= 0 {
		return code
	}
	for _, d := range []struct{ flag, v string }{{"--from", *from}, {"--to", *to}} {
		if t, err := time.Parse(dayLayout, d.v); err != nil || t.Format(dayLayout) != d.v {
			fmt.Fprintf(env.stderr, "dwiaudit report compliance: %s %q is not YYYY-MM-DD\n", d.flag, d.v)
			return exitUsage
		}
	}
	var c *report.Compliance
	var err error
	if *rf.server != "" {
		var body []byte
		q := url.Values{"from": {*from}, "to": {*to}, "format": {"json"}}
		if body, err = askServer(ctx, *rf.server, []string{"api", "v1", "reports", "compliance"}, q); err == nil {
			c = &report.Compliance{}
			if err = json.Unmarshal(body, c); err != nil {
				err = fmt.Errorf("the server's answer is not a compliance report: %w", err)
			}
		}
	} else {
		err = withFolder(cfg, *rf.data, loc, func(st *store.Store) (err error) {
			c, err = report.BuildCompliance(st, *from, *to, loc, time.Now())
			return err
		})
	}
	if errors.Is(err, report.ErrBadRange) {
		fmt.Fprintln(env.stderr, "dwiaudit report compliance:", err)
		return exitUsage
	}
	if err != nil {
		fmt.Fprintln(env.stderr, "dwiaudit report compliance:", err)
		return exitFailure
	}
	if err := c.Write(env.stdout, f); err != nil {
		fmt.Fprintln(env.stderr, "dwiaudit report compliance:", err)
		return exitFailure
	}
	return exitOK
}

// withFolder opens the data folder read-only for fn. A running server
// holds the index locked; then the answer is to ask it.
func withFolder(cfg config.Config, data string, loc *time.Location, fn func(*store.Store) error) error {
	dir := cfg.Node.DataDir
	if data != "" {
		dir = data
	}
	st, err := store.Open(store.Options{Dir: dir, ReadOnly: true, Location: loc})
	switch {
	case errors.Is(err, store.ErrLocked):
		return fmt.Errorf("a running dwiaudit serve holds the data folder %s; ask it instead: --server http://%s", dir, cfg.Node.HTTPListen)
	case errors.Is(err, store.ErrNoIndex):
		return fmt.Errorf("nothing is stored in %s (no index there; is it the data folder?)", dir)
	case err != nil:
		return err
	}
	defer st.Close()
	return fn(st)
}

// askServer GETs a path of a running node's API with the token of
// $DWIAUDIT_TOKEN_FILE and returns the body of a 200 answer.
func askServer(ctx context.Context, server string, path []string, q url.Values) ([]byte, error) {
	tok, err := clientToken()
	if err != nil {
		return nil, err
	}
	return web.Client{Server: server, Token: tok, Timeout: reportHTTPTimeout}.Get(ctx, q, path...)
}
