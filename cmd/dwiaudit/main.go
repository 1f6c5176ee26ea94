// Command dwiaudit is the diffusion-MR acquisition auditor: a DICOM node
// that receives diffusion studies and checks whether their ADC maps can be
// trusted. Each subcommand lives in its own file; wiring is explicit here.
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"syscall"
	"time"
)

// dayLayout is the form of a day on the command line and in the API.
const dayLayout = time.DateOnly

// exit codes
const (
	exitOK      = 0
	exitFailure = 1 // the operation ran and failed
	exitUsage   = 2 // bad flags or arguments
)

type command struct {
	name    string
	summary string
	run     func(ctx context.Context, env *cliEnv, args []string) int
}

// cliEnv is what a subcommand may touch of the process, injected so tests
// can run subcommands in-process.
type cliEnv struct {
	stdout, stderr io.Writer
	stdin          io.Reader // os.Stdin when nil
	// isTerminal reports whether stderr is an interactive terminal (for
	// progress bars).
	isTerminal bool
	// now, when set, is the node's clock (receive and audit times, so
	// the receive and audit days); nil means time.Now. `dwiaudit demo`
	// sets it to walk the node through several days.
	now func() time.Time
}

// clock is the node's clock: env.now, or time.Now when unset. Whatever
// in serve takes a clock (archives, schedulers, metrics seeding) should
// take this one, so that the demo's days reach it.
func (e *cliEnv) clock() func() time.Time {
	if e.now != nil {
		return e.now
	}
	return time.Now
}

func commands() []command {
	return []command{
		{"echo", "check that a DICOM node answers C-ECHO", runEcho},
		{"send", "send DICOM files and folders with C-STORE", runSend},
		{"phantom", "write a synthetic diffusion study with a known truth", runPhantom},
		{"serve", "run the node: receive and store studies, serve the HTTP API", runServe},
		{"studies", "list the studies stored by a node", runStudies},
		{"check", "audit diffusion series in DICOM files on disk, without a server", runCheck},
		{"hash-password", "print the bcrypt hash of a password read from standard input, for http_auth.users", runHashPassword},
		{"report", "the daily discrepancy list and the protocol compliance report", runReport},
		{"demo", "run a node on a synthetic hospital's studies over several days and show what it finds", runDemo},
		{"selftest", "prove an installed node audits: send it a planted-defect suite and compare", runSelftest},
	}
}

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	env := &cliEnv{stdout: os.Stdout, stderr: os.Stderr, isTerminal: stderrIsTerminal()}
	code := run(ctx, env, os.Args[1:])
	stop()
	os.Exit(code)
}

func run(ctx context.Context, env *cliEnv, args []string) int {
	if len(args) == 0 || args[0] == "-h" || args[0] == "--help" || args[0] == "help" {
		usage(env.stderr)
		if len(args) == 0 {
			return exitUsage
		}
		return exitOK
	}
	for _, c := range commands() {
		if c.name == args[0] {
			return c.run(ctx, env, args[1:])
		}
	}
	fmt.Fprintf(env.stderr, "dwiaudit: unknown command %q\n\n", args[0])
	usage(env.stderr)
	return exitUsage
}

func usage(w io.Writer) {
	fmt.Fprintln(w, "dwiaudit: audits diffusion-weighted MR acquisitions received over DICOM.")
	fmt.Fprintln(w, "It checks acquisitions; it does not diagnose.")
	fmt.Fprintln(w, "\nUsage: dwiaudit <command> [flags]\n\nCommands:")
	for _, c := range commands() {
		fmt.Fprintf(w, "  %-10s %s\n", c.name, c.summary)
	}
	fmt.Fprintln(w, "\nRun 'dwiaudit <command> --help' for a command's flags.")
}

// newFlagSet makes a flag set that prints usage to env.stderr.
func newFlagSet(env *cliEnv, name, synopsis string) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(env.stderr)
	fs.Usage = func() {
		fmt.Fprintf(env.stderr, "Usage: dwiaudit %s %s\n\nFlags:\n", name, synopsis)
		fs.PrintDefaults()
	}
	return fs
}

// parseFlags parses args; it returns a non-negative exit code when the
// command must stop (help asked for, or bad flags).
func parseFlags(fs *flag.FlagSet, args []string) int {
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return exitOK
		}
		return exitUsage
	}
	return -1
}
