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

// clientAuth adds the bearer token of $DWIAUDIT_TOKEN_FILE to a request
// to a node, when the variable is set.
func clientAuth(req *http.Request) error {
	path := os.Getenv(tokenFileEnv)
	if path == "" {
		return nil
	}
	tok, err := config.ReadToken(path)
	if err != nil {
		return fmt.Errorf("%s: %w", tokenFileEnv, err)
	}
	req.Header.Set("Authorization", "Bearer "+tok)
	return nil
}

// webPages is the HTTP listener's handler beside the API: the pages and
// the access control.
type webPages struct {
	pages *web.Handler
	auth  *web.Auth
}

// newWebPages builds the pages over the store and the access control
// from the configuration.
func newWebPages(cfg config.Config, st *store.Store, loc *time.Location, log *slog.Logger) (*webPages, error) {
	auth, err := httpAuth(cfg.HTTPAuth)
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
	pages, err := web.New(web.Options{
		Store:            st,
		Location:         loc,
		Logger:           log,
		Scanners:         scanners,
		PhantomTolerance: func(profile string) float64 { return tolerances[profile] },
		// The same lists as /api/v1/reports/daily: frozen days read as
		// kept, patient IDs as reports.patient_id says.
		Daily: newReportArchive(cfg.Reports, st, loc, time.Now),
	})
	if err != nil {
		return nil, err
	}
	if !cfg.HTTPAuth.Configured() && !config.LoopbackListen(cfg.Node.HTTPListen) {
		log.Warn("the HTTP listener is reachable from other machines without authentication (http_auth.allow_unauthenticated)", "http", cfg.Node.HTTPListen)
	}
	log.Info("http access control", "auth", cfg.HTTPAuth.Describe(cfg.Node.HTTPListen))
	return &webPages{pages: pages, auth: auth}, nil
}

// handler routes the pages' paths to the pages and everything else to
// api, behind the access control.
func (w *webPages) handler(api http.Handler) http.Handler {
	mux := http.NewServeMux()
	w.pages.Register(mux)
	mux.Handle("/", api)
	return w.auth.Wrap(mux)
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
