package main

// `dwiaudit serve`: the running node. Wiring, in order: configuration ->
// store -> audit pipeline -> DICOM acceptor -> HTTP server -> pruning;
// and back down on SIGINT/SIGTERM.

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"log/slog"
	"net"
	"net/http"
	"path/filepath"
	"sync"
	"sync/atomic"
	"time"

	"dwiaudit/audit"
	"dwiaudit/audit/report"
	"dwiaudit/config"
	"dwiaudit/scp"
	"dwiaudit/store"
)

// Timeouts of the service.
const (
	// shutdownGrace is how long a stop waits for C-STOREs in flight: a
	// 1 GiB Enhanced MR object takes about ten seconds on a 1 Gbit/s
	// link, and systemd's default stop timeout (90 s, from memory) must
	// not cut the store's own close short.
	shutdownGrace = time.Minute

	// httpShutdownGrace bounds the wait for HTTP requests in flight; they
	// are index reads of milliseconds.
	httpShutdownGrace = 5 * time.Second

	// HTTP server deadlines, as net/http recommends setting for servers
	// reachable by others: a slow client must not hold a goroutine.
	httpReadHeaderTimeout = 10 * time.Second
	httpReadTimeout       = 30 * time.Second
	httpWriteTimeout      = time.Minute
	httpIdleTimeout       = 2 * time.Minute
)

// Lines printed on stdout once the node listens, with the real addresses
// (a ":0" port resolved), for people and for tests and scripts.
const (
	listeningDICOMPrefix = "dicom listening on "
	listeningHTTPPrefix  = "http listening on http://"
)

func runServe(ctx context.Context, env *cliEnv, args []string) int {
	fs := newFlagSet(env, "serve", "[flags]")
	configPath := fs.String("config", "", "configuration file (YAML); without one, the defaults")
	fs.String("data", "", "data folder (overrides node.data_dir; default "+config.DefaultDataDir+")")
	fs.String("listen", "", "DICOM listen address host:port (overrides node.dicom_listen; default "+config.DefaultDICOMListen+")")
	fs.String("http", "", "HTTP listen address host:port (overrides node.http_listen; default "+config.DefaultHTTPListen+")")
	fs.String("ae-title", "", "our AE title (overrides node.ae_title; default "+scp.DefaultAETitle+")")
	fs.String("log-format", "", "text or json (overrides log.format; default text)")
	fs.String("log-level", "", "debug, info, warn or error (overrides log.level; default info)")
	fs.String("settle", "", "how long a study must receive nothing before it is audited, e.g. 2s (overrides audit.settle; default "+config.Duration(config.DefaultSettle).String()+")")
	if code := parseFlags(fs, args); code >= 0 {
		return code
	}
	if fs.NArg() != 0 {
		fmt.Fprintf(env.stderr, "dwiaudit serve: unexpected argument %q\n", fs.Arg(0))
		fs.Usage()
		return exitUsage
	}
	cfg, err := serveConfig(*configPath, fs)
	if err != nil {
		fmt.Fprintln(env.stderr, "dwiaudit serve:", err)
		return exitUsage
	}
	return serve(ctx, env, cfg)
}

// serveConfig reads the file (or takes the defaults), applies the flags
// that were given and validates the result, listing every problem.
func serveConfig(path string, fs *flag.FlagSet) (config.Config, error) {
	return config.Load(path, func(cfg *config.Config) []string {
		var problems []string
		fs.Visit(func(f *flag.Flag) {
			v := f.Value.String()
			switch f.Name {
			case "data":
				cfg.Node.DataDir = v
			case "listen":
				cfg.Node.DICOMListen = v
			case "http":
				cfg.Node.HTTPListen = v
			case "ae-title":
				cfg.Node.AETitle = v
			case "log-format":
				if err := cfg.Log.Format.UnmarshalText([]byte(v)); err != nil {
					problems = append(problems, "--log-format: "+err.Error())
				}
			case "settle":
				if err := cfg.Audit.Settle.UnmarshalText([]byte(v)); err != nil {
					problems = append(problems, "--settle: "+err.Error())
				}
			case "log-level":
				if err := cfg.Log.Level.UnmarshalText([]byte(v)); err != nil {
					problems = append(problems, "--log-level: "+err.Error())
				}
			}
		})
		return problems
	})
}

// serve runs the node on a validated configuration until ctx ends, then
// stops it gracefully.
func serve(ctx context.Context, env *cliEnv, cfg config.Config) int {
	log := config.NewLogger(env.stderr, cfg.Log)
	loc, err := config.LoadLocation(cfg.Node.TimeZone)
	if err != nil {
		fmt.Fprintln(env.stderr, "dwiaudit serve: node.time_zone:", err)
		return exitUsage
	}
	dataDir, err := filepath.Abs(cfg.Node.DataDir)
	if err != nil {
		fmt.Fprintln(env.stderr, "dwiaudit serve:", err)
		return exitFailure
	}

	st, err := store.Open(store.Options{
		Dir:       dataDir,
		DiskFloor: uint64(cfg.Limits.DiskFloor),
		Retention: time.Duration(cfg.Retention.InstanceFiles),
		Location:  loc,
		Logger:    log,
		Describe:  describeInstance,
		Now:       env.clock(),
	})
	if errors.Is(err, store.ErrLocked) {
		fmt.Fprintf(env.stderr, "dwiaudit serve: data folder %s is held by another dwiaudit process (a running serve, or a studies report still reading)\n", dataDir)
		return exitFailure
	}
	if err != nil {
		fmt.Fprintln(env.stderr, "dwiaudit serve:", err)
		return exitFailure
	}
	code := exitOK
	storeClosed := false
	defer func() {
		if !storeClosed {
			st.Close()
		}
	}()

	eng, err := cfg.Audit.Engine(log.With("component", "audit"))
	if err != nil {
		fmt.Fprintln(env.stderr, "dwiaudit serve:", err)
		return exitUsage
	}
	pipe := &audit.Pipeline{
		Engine:  eng,
		Store:   st,
		Settle:  time.Duration(cfg.Audit.Settle),
		Workers: cfg.Audit.Workers,
		Logger:  log.With("component", "audit"),
		Now:     env.clock(),

		TestPatientIDs: cfg.Audit.TestPatientIDs,
	}
	met := newNodeMetrics(cfg, st.FreeBytes, pipe.Backlog, log.With("component", "metrics"))
	pipe.Observer = met
	met.SeedFrom(st, env.clock()().In(loc))
	archive := cfg.Reports.Archive(st, loc, env.clock())
	var dicomUp atomic.Bool
	handler, err := httpHandler(cfg, st, loc, dicomUp.Load, met.Handler(), archive, log)
	if err != nil {
		fmt.Fprintln(env.stderr, "dwiaudit serve:", err)
		return exitUsage
	}
	if err := pipe.Start(context.Background()); err != nil {
		fmt.Fprintln(env.stderr, "dwiaudit serve:", err)
		return exitFailure
	}
	pipeClosed := false
	defer func() {
		if !pipeClosed {
			pipe.Close()
		}
	}()

	dl, err := net.Listen("tcp", cfg.Node.DICOMListen)
	if err != nil {
		fmt.Fprintln(env.stderr, "dwiaudit serve: DICOM listener:", err)
		return exitFailure
	}
	hl, err := net.Listen("tcp", cfg.Node.HTTPListen)
	if err != nil {
		dl.Close()
		fmt.Fprintln(env.stderr, "dwiaudit serve: HTTP listener:", err)
		return exitFailure
	}

	dicom, peers := cfg.Acceptor()
	dicom.Handler = &ingest{store: st, peers: peers, instances: st, audit: pipe, studies: st, metrics: met}
	dicom.OnAssociation = associationMetrics(met)
	dicom.Logger = log.With("component", "scp")
	dicomDone := make(chan error, 1)
	dicomUp.Store(true)
	go func() {
		err := dicom.Serve(dl)
		dicomUp.Store(false)
		dicomDone <- err
	}()

	hs := &http.Server{
		Handler:           handler,
		ReadHeaderTimeout: httpReadHeaderTimeout,
		ReadTimeout:       httpReadTimeout,
		WriteTimeout:      httpWriteTimeout,
		IdleTimeout:       httpIdleTimeout,
		ErrorLog:          slog.NewLogLogger(log.With("component", "http").Handler(), slog.LevelWarn),
	}
	httpDone := make(chan error, 1)
	go func() { httpDone <- hs.Serve(hl) }()

	fmt.Fprintf(env.stdout, "%s%s (AE title %s)\n", listeningDICOMPrefix, dl.Addr(), cfg.Node.AETitle)
	fmt.Fprintf(env.stdout, "%s%s\n", listeningHTTPPrefix, hl.Addr())
	log.Info("node started", "dicom", dl.Addr().String(), "ae_title", cfg.Node.AETitle, "http", hl.Addr().String(),
		"data_dir", dataDir, "peers", len(cfg.Peers), "disk_floor", cfg.Limits.DiskFloor.String(),
		"retention", cfg.Retention.InstanceFiles.String(), "settle", cfg.Audit.Settle.String())

	pruneCtx, stopPrune := context.WithCancel(context.Background())
	var pruning sync.WaitGroup
	pruning.Go(func() { pruneLoop(pruneCtx, st, time.Duration(cfg.Retention.PruneInterval), log) })
	daily := &report.Freezer{Archive: archive, Lists: st, Location: loc, Now: env.clock(), Logger: log.With("component", "reports")}
	pruning.Go(func() { daily.Run(pruneCtx) })

	select {
	case <-ctx.Done():
		log.Info("stopping: signal received")
	case err := <-dicomDone:
		log.Error("DICOM acceptor stopped", "err", err)
		code = exitFailure
	case err := <-httpDone:
		log.Error("HTTP server stopped", "err", err)
		code = exitFailure
	}

	// Stop accepting, let C-STOREs in flight finish and be answered,
	// then stop HTTP and pruning, and close the store, which commits
	// what is left and closes the index.
	sctx, cancel := context.WithTimeout(context.Background(), shutdownGrace)
	if err := dicom.Shutdown(sctx); err != nil {
		log.Warn("C-STOREs still in flight after the grace period were cut off", "grace", shutdownGrace, "err", err)
		code = exitFailure
	}
	cancel()
	hctx, cancel := context.WithTimeout(context.Background(), httpShutdownGrace)
	if err := hs.Shutdown(hctx); err != nil {
		hs.Close()
	}
	cancel()
	stopPrune()
	pruning.Wait()
	// Audits in flight are cancelled; their series stay pending in the
	// store and are audited after the next start.
	pipeClosed = true
	pipe.Close()
	storeClosed = true
	if err := st.Close(); err != nil {
		log.Error("closing the store failed", "err", err)
		return exitFailure
	}
	log.Info("node stopped")
	return code
}

// pruner is what the prune loop needs of the store.
type pruner interface {
	Prune(ctx context.Context) (store.PruneReport, error)
}

// pruneLoop prunes at start (the node may have been down for days) and
// then every interval, until ctx ends.
func pruneLoop(ctx context.Context, st pruner, every time.Duration, log *slog.Logger) {
	t := time.NewTicker(every)
	defer t.Stop()
	for {
		if _, err := st.Prune(ctx); err != nil && ctx.Err() == nil {
			log.Warn("pruning failed", "err", err)
		}
		select {
		case <-ctx.Done():
			return
		case <-t.C:
		}
	}
}
