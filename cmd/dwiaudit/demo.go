package main

// `dwiaudit demo`: the whole job in one command, on embedded defaults.
// A real node (serve, in-process, on free loopback ports and a temporary
// data folder) receives four days of synthetic studies from the three
// scanners of the invented Quellvander Ostmire Hospital over the real
// DICOM path, audits them, and the demo prints each day's discrepancy
// list, the findings per rule with the planted defect behind each, the
// drifting scanner's phantom ADC, and where to look in the web pages.

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"os"
	"strings"
	"time"

	"dwiaudit/audit/suite"
	"dwiaudit/config"
)

// Settings of the demo node.
const (
	// demoSettle is the shortest settle the configuration allows
	// (minSettle): the demo's sender sends each study in one go.
	demoSettle = time.Second
	// demoStartTimeout bounds the wait for the in-process node to listen.
	demoStartTimeout = 30 * time.Second
)

func runDemo(ctx context.Context, env *cliEnv, args []string) int {
	fs := newFlagSet(env, "demo", "[--data DIR] [--exit] [--http HOST:PORT]")
	dataFlag := fs.String("data", "", "data folder, new or empty, kept after the demo (default: a temporary folder, removed at the end)")
	exit := fs.Bool("exit", false, "stop after printing, instead of serving until Ctrl-C")
	httpFlag := fs.String("http", "127.0.0.1:0", "HTTP listen address host:port of the node (default: a free loopback port)")
	if code := parseFlags(fs, args); code >= 0 {
		return code
	}
	if fs.NArg() != 0 {
		fmt.Fprintf(env.stderr, "dwiaudit demo: unexpected argument %q\n", fs.Arg(0))
		fs.Usage()
		return exitUsage
	}
	dataDir := *dataFlag
	if dataDir != "" {
		entries, err := os.ReadDir(dataDir)
		if err != nil && !errors.Is(err, os.ErrNotExist) {
			fmt.Fprintln(env.stderr, "dwiaudit demo: --data:", err)
			return exitUsage
		}
		if len(entries) > 0 {
			fmt.Fprintf(env.stderr, "dwiaudit demo: --data %s is not empty; the demo needs a new or empty folder\n", dataDir)
			return exitUsage
		}
	} else {
		tmp, err := os.MkdirTemp("", "dwiaudit-demo-data-")
		if err != nil {
			fmt.Fprintln(env.stderr, "dwiaudit demo:", err)
			return exitFailure
		}
		defer os.RemoveAll(tmp)
		dataDir = tmp
	}
	studiesDir, err := os.MkdirTemp("", "dwiaudit-demo-studies-")
	if err != nil {
		fmt.Fprintln(env.stderr, "dwiaudit demo:", err)
		return exitFailure
	}
	defer os.RemoveAll(studiesDir)

	cfg := demoConfig(dataDir, *httpFlag)
	if err := cfg.Validate(); err != nil {
		fmt.Fprintln(env.stderr, "dwiaudit demo:", err)
		return exitUsage
	}
	loc, err := config.LoadLocation(cfg.Node.TimeZone)
	if err != nil {
		fmt.Fprintln(env.stderr, "dwiaudit demo: node.time_zone:", err)
		return exitUsage
	}

	d := &demo{env: env, cfg: cfg, loc: loc, studiesDir: studiesDir}
	return d.run(ctx, *exit, *dataFlag != "")
}

// demoConfig is the default configuration with the demo's folder,
// loopback ports, short settle, quiet log and the hospital's peers.
func demoConfig(dataDir, httpListen string) config.Config {
	cfg := config.Default()
	cfg.Node.DataDir = dataDir
	cfg.Node.DICOMListen = "127.0.0.1:0"
	cfg.Node.HTTPListen = httpListen
	cfg.Audit.Settle = config.Duration(demoSettle)
	cfg.Log.Level = config.LogLevel(slog.LevelWarn)
	for _, s := range suite.Hospital() {
		cfg.Peers = append(cfg.Peers, config.Peer{AETitle: s.AETitle, Scanner: s.Label})
	}
	return cfg
}

// demo is one run of the demonstration: the node, in-process, and the
// scenario (audit/suite) sent to it.
type demo struct {
	env        *cliEnv
	cfg        config.Config
	loc        *time.Location
	studiesDir string

	dicomAddr, httpAddr string
}

func (d *demo) run(ctx context.Context, exit, keepData bool) int {
	w := d.env.stdout
	start := time.Now()
	fmt.Fprintln(w, "dwiaudit demo: the invented Quellvander Ostmire Hospital, three scanners, four days of synthetic studies")
	fmt.Fprintln(w, cautionLine)
	fmt.Fprintln(w)

	nodeCtx, stopNode := context.WithCancel(ctx)
	defer stopNode()
	pr, pw := io.Pipe()
	scenario := suite.NewScenario(d.studiesDir, d.loc)
	nodeEnv := &cliEnv{stdout: pw, stderr: d.env.stderr, now: scenario.Now}
	nodeDone := make(chan int, 1)
	go func() {
		code := serve(nodeCtx, nodeEnv, d.cfg)
		pw.Close()
		nodeDone <- code
	}()
	// stop ends the node and returns its exit code.
	stop := func() int {
		stopNode()
		return <-nodeDone
	}
	if err := d.readAddresses(pr); err != nil {
		code := stop()
		fmt.Fprintf(d.env.stderr, "dwiaudit demo: the node did not start (exit %d): %v\n", code, err)
		return exitFailure
	}
	dataNote := "a temporary folder, removed at the end"
	if keepData {
		dataNote = "kept"
	}
	fmt.Fprintf(w, "node: DICOM %s (AE title %s), HTTP http://%s, data folder %s (%s), settle %v\n",
		d.dicomAddr, d.cfg.Node.AETitle, d.httpAddr, d.cfg.Node.DataDir, dataNote, demoSettle)
	for _, s := range suite.Hospital() {
		fmt.Fprintf(w, "scanner %-13s calling AE %s, station %s, %g T\n", s.Label, s.AETitle, s.Profile.Station, s.Profile.FieldStrength)
	}

	ok, err := scenario.Run(ctx, w, suite.Node{DICOMAddr: d.dicomAddr, HTTPAddr: d.httpAddr, AETitle: d.cfg.Node.AETitle, Settle: demoSettle})
	if err != nil {
		stop()
		fmt.Fprintln(d.env.stderr, "dwiaudit demo:", err)
		return exitFailure
	}
	fmt.Fprintf(w, "\nthe whole scenario took %v\n", time.Since(start).Round(100*time.Millisecond))
	fmt.Fprintln(w, cautionLine)
	if !ok {
		fmt.Fprintln(d.env.stderr, "dwiaudit demo: an audit did not show what its study planted (see the scenario check above)")
	}

	if !exit {
		fmt.Fprintln(w, "\nthe node keeps serving; press Ctrl-C to stop it")
		select {
		case <-ctx.Done():
		case code := <-nodeDone:
			fmt.Fprintf(d.env.stderr, "dwiaudit demo: the node stopped (exit %d)\n", code)
			return exitFailure
		}
	}
	if code := stop(); code != exitOK {
		fmt.Fprintf(d.env.stderr, "dwiaudit demo: the node stopped with exit %d\n", code)
		return exitFailure
	}
	if !ok {
		return exitFailure
	}
	return exitOK
}

// readAddresses reads the node's "listening on" lines from its stdout,
// then keeps draining it.
func (d *demo) readAddresses(r io.Reader) error {
	got := make(chan error, 1)
	go func() {
		sc := bufio.NewScanner(r)
		for sc.Scan() {
			line := sc.Text()
			if rest, ok := strings.CutPrefix(line, listeningDICOMPrefix); ok {
				d.dicomAddr, _, _ = strings.Cut(rest, " ")
			}
			if rest, ok := strings.CutPrefix(line, listeningHTTPPrefix); ok {
				d.httpAddr = rest
				got <- nil
				io.Copy(io.Discard, r)
				return
			}
		}
		got <- errors.New("no listening lines before the node's output ended")
	}()
	select {
	case err := <-got:
		return err
	case <-time.After(demoStartTimeout):
		return fmt.Errorf("no listening lines within %v", demoStartTimeout)
	}
}
