package main

// The web pages and the access control in front of the HTTP listener:
// the http_auth: section of the configuration, its checks, and the
// handler that puts the pages (audit/web) beside the JSON API.

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"net/http"
	"os"
	"strings"
	"time"

	"golang.org/x/crypto/bcrypt"

	"dwiaudit/audit/report"
	"dwiaudit/audit/web"
	"dwiaudit/config"
	"dwiaudit/store"
)

// httpAuth builds the access control of the listener.
func httpAuth(a config.HTTPAuth) (*web.Auth, error) {
	out := &web.Auth{Open: []string{"/healthz", "/readyz"},
		Hint: "send Authorization: Bearer TOKEN (dwiaudit studies and report: set " + tokenFileEnv + " to the token file) or sign in as a configured user"}
	if a.BearerTokenFile != "" {
		tok, err := config.ReadToken(a.BearerTokenFile)
		if err != nil {
			return nil, fmt.Errorf("http_auth.bearer_token_file: %w", err)
		}
		out.Token = tok
	}
	if len(a.Users) > 0 {
		out.Users = map[string][]byte{}
		for _, u := range a.Users {
			out.Users[u.Name] = []byte(u.PasswordHash)
		}
	}
	return out, nil
}

// tokenFileEnv names the environment variable from which the
// command-line clients of a node (studies --server, report --server)
// take the file holding the bearer token, so that the token shows
// neither in the process list nor in shell history.
const tokenFileEnv = "DWIAUDIT_TOKEN_FILE"

// clientToken is the bearer token of $DWIAUDIT_TOKEN_FILE for a
// request to a node; "" when the variable is not set.
func clientToken() (string, error) {
	path := os.Getenv(tokenFileEnv)
	if path == "" {
		return "", nil
	}
	tok, err := config.ReadToken(path)
	if err != nil {
		return "", fmt.Errorf("%s: %w", tokenFileEnv, err)
	}
	return tok, nil
}

// httpHandler builds the HTTP listener's handler (audit/web.Server)
// from the configuration: the access control, the pages' scanners and
// phantom tolerances, and an audit engine of the previews' own.
func httpHandler(cfg config.Config, st *store.Store, loc *time.Location, dicomUp func() bool, metrics http.Handler, archive *report.Archive, log *slog.Logger) (http.Handler, error) {
	auth, err := httpAuth(cfg.HTTPAuth)
	if err != nil {
		return nil, err
	}
	eng, err := cfg.Audit.Engine(log.With("component", "preview"))
	if err != nil {
		return nil, err
	}
	tolerances := map[string]float64{}
	for _, p := range cfg.Audit.Phantoms {
		tolerances[p.Name] = p.Tolerance
	}
	var scanners []string
	for _, p := range cfg.Peers {
		scanners = append(scanners, p.Scanner)
	}
	srv, err := web.NewServer(web.ServerOptions{
		Store:    st,
		Location: loc,
		Logger:   log.With("component", "http"),
		DICOMUp:  dicomUp,
		Pages: web.Options{
			Logger:           log.With("component", "web"),
			Scanners:         scanners,
			PhantomTolerance: func(profile string) float64 { return tolerances[profile] },
			// The same lists as /api/v1/reports/daily: frozen days read
			// as kept, patient IDs as reports.patient_id says.
			Daily: cfg.Reports.Archive(st, loc, time.Now),
		},
		Reports:       archive,
		PreviewEngine: eng,
		Metrics:       metrics,
		Auth:          auth,
	})
	if err != nil {
		return nil, err
	}
	if !cfg.HTTPAuth.Configured() && !config.LoopbackListen(cfg.Node.HTTPListen) {
		log.Warn("the HTTP listener is reachable from other machines without authentication (http_auth.allow_unauthenticated)", "http", cfg.Node.HTTPListen)
	}
	log.Info("http access control", "auth", cfg.HTTPAuth.Describe(cfg.Node.HTTPListen))
	return srv.Handler(), nil
}

// runHashPassword is `dwiaudit hash-password`: it reads a password from
// the first line of standard input and prints its bcrypt hash, for
// http_auth.users[].password_hash.
func runHashPassword(ctx context.Context, env *cliEnv, args []string) int {
	fs := newFlagSet(env, "hash-password", "< password")
	cost := fs.Int("cost", bcrypt.DefaultCost, fmt.Sprintf("bcrypt cost, %d to %d", bcrypt.MinCost, bcrypt.MaxCost))
	if code := parseFlags(fs, args); code >= 0 {
		return code
	}
	if fs.NArg() != 0 {
		fmt.Fprintln(env.stderr, "dwiaudit hash-password: the password is read from standard input, not from arguments (they show in the process list)")
		return exitUsage
	}
	if *cost < bcrypt.MinCost || *cost > bcrypt.MaxCost {
		fmt.Fprintf(env.stderr, "dwiaudit hash-password: --cost %d is outside %d..%d\n", *cost, bcrypt.MinCost, bcrypt.MaxCost)
		return exitUsage
	}
	in := env.stdin
	if in == nil {
		in = os.Stdin
	}
	line, err := bufio.NewReader(in).ReadString('\n')
	if err != nil && !errors.Is(err, io.EOF) {
		fmt.Fprintln(env.stderr, "dwiaudit hash-password:", err)
		return exitFailure
	}
	pass := strings.TrimRight(line, "\r\n")
	if pass == "" {
		fmt.Fprintln(env.stderr, "dwiaudit hash-password: empty password on standard input")
		return exitUsage
	}
	hash, err := bcrypt.GenerateFromPassword([]byte(pass), *cost)
	if err != nil {
		// bcrypt refuses passwords over 72 bytes.
		fmt.Fprintln(env.stderr, "dwiaudit hash-password:", err)
		return exitUsage
	}
	fmt.Fprintln(env.stdout, string(hash))
	return exitOK
}
