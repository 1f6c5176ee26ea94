package main

import (
	"context"
	"fmt"
	"os"
	"sort"
	"time"

	"github.com/schollz/progressbar/v3"
	"golang.org/x/term"

	"dwiaudit/scp"
	"dwiaudit/scp/dimse"
)

func stderrIsTerminal() bool { return term.IsTerminal(int(os.Stderr.Fd())) }

func runSend(ctx context.Context, env *cliEnv, args []string) int {
	fs := newFlagSet(env, "send", "[flags] PATH...")
	to := fs.String("to", "127.0.0.1:11112", "the receiving node, HOST:PORT")
	calling := fs.String("calling-ae", scp.DefaultCallingAETitle, "our (calling) AE title")
	called := fs.String("called-ae", scp.DefaultAETitle, "the receiver's (called) AE title")
	parallel := fs.Int("parallel", 1, "associations to use at once")
	maxPDU := fs.Uint("max-pdu", scp.DefaultMaxPDULength, "the Maximum Length we advertise, bytes")
	quiet := fs.Bool("quiet", false, "print only the summary")
	if code := parseFlags(fs, args); code >= 0 {
		return code
	}
	if fs.NArg() == 0 {
		fmt.Fprintln(env.stderr, "dwiaudit send: name at least one file or folder")
		fs.Usage()
		return exitUsage
	}
	if *parallel < 1 || *parallel > 64 {
		fmt.Fprintln(env.stderr, "dwiaudit send: --parallel must be 1..64")
		return exitUsage
	}
	if *maxPDU < scp.MinPDULength || *maxPDU > scp.MaxPDULengthCap {
		fmt.Fprintf(env.stderr, "dwiaudit send: --max-pdu must be %d..%d\n", scp.MinPDULength, scp.MaxPDULengthCap)
		return exitUsage
	}

	var bar *progressbar.ProgressBar
	var failures []scp.SendResult
	opts := scp.SendOptions{
		Dialer:   &scp.Dialer{CallingAETitle: *calling, CalledAETitle: *called, MaxPDULength: uint32(*maxPDU)},
		Addr:     *to,
		Parallel: *parallel,
		Found: func(files int, bytes int64) {
			if env.isTerminal && !*quiet {
				bar = progressbar.NewOptions(files,
					progressbar.OptionSetWriter(env.stderr),
					progressbar.OptionSetDescription("sending"),
					progressbar.OptionShowCount(),
					progressbar.OptionShowIts(),
					progressbar.OptionSetItsString("files"),
					progressbar.OptionThrottle(100*time.Millisecond),
					progressbar.OptionClearOnFinish(),
				)
			} else if !*quiet {
				fmt.Fprintf(env.stderr, "sending %d files (%s) to %s\n", files, humanBytes(bytes), *to)
			}
		},
	}
	done := 0
	opts.Progress = func(r scp.SendResult) {
		if r.Failed() {
			failures = append(failures, r)
		}
		if r.Skipped {
			return
		}
		done++
		switch {
		case bar != nil:
			bar.Add(1)
		case *quiet:
		case r.Failed():
			fmt.Fprintf(env.stderr, "%d failed %s: %s\n", done, r.Path, describeResult(r))
		case done%100 == 0:
			fmt.Fprintf(env.stderr, "%d sent\n", done)
		}
	}
	sum, err := scp.SendFiles(ctx, opts, fs.Args())
	if bar != nil {
		bar.Finish()
	}
	if err != nil {
		fmt.Fprintln(env.stderr, "dwiaudit send:", err)
		return exitFailure
	}
	printSendSummary(env, sum, failures)
	if sum.Failures > 0 || sum.Files == 0 {
		return exitFailure
	}
	return exitOK
}

func describeResult(r scp.SendResult) string {
	if r.Err != nil {
		return r.Err.Error()
	}
	if r.Comment != "" {
		return fmt.Sprintf("status %v: %s", r.Status, r.Comment)
	}
	return "status " + r.Status.String()
}

// maxListedFailures bounds the per-file failure lines of the summary.
const maxListedFailures = 20

func printSendSummary(env *cliEnv, sum scp.SendSummary, failures []scp.SendResult) {
	rate := ""
	if s := sum.Duration.Seconds(); s > 0 && sum.Bytes > 0 {
		rate = fmt.Sprintf(", %.1f MB/s", float64(sum.Bytes)/1e6/s)
	}
	fmt.Fprintf(env.stdout, "sent %d, warnings %d, failures %d, not DICOM %d (%s in %v%s)\n",
		sum.Sent, sum.Warnings, sum.Failures, sum.Skipped, humanBytes(sum.Bytes), sum.Duration.Round(time.Millisecond), rate)
	var codes []dimse.Status
	for st := range sum.Statuses {
		if st != dimse.StatusSuccess {
			codes = append(codes, st)
		}
	}
	sort.Slice(codes, func(i, j int) bool { return codes[i] < codes[j] })
	for _, st := range codes {
		fmt.Fprintf(env.stdout, "  status %v: %d\n", st, sum.Statuses[st])
	}
	for i, r := range failures {
		if i == maxListedFailures {
			fmt.Fprintf(env.stdout, "  ... and %d more failures\n", len(failures)-i)
			break
		}
		fmt.Fprintf(env.stdout, "  failed %s: %s\n", r.Path, describeResult(r))
	}
	if sum.Files == 0 {
		fmt.Fprintln(env.stdout, "no DICOM files found")
	}
}

func humanBytes(n int64) string {
	switch {
	case n >= 1<<30:
		return fmt.Sprintf("%.1f GiB", float64(n)/(1<<30))
	case n >= 1<<20:
		return fmt.Sprintf("%.1f MiB", float64(n)/(1<<20))
	case n >= 1<<10:
		return fmt.Sprintf("%.1f KiB", float64(n)/(1<<10))
	}
	return fmt.Sprintf("%d B", n)
}
