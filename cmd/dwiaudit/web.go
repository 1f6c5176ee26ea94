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
	"net"
	"net/http"
	"net/netip"
	"os"
	"strings"
	"time"

	"golang.org/x/crypto/bcrypt"

	"dwiaudit/audit/web"
	"dwiaudit/store"
)

// minTokenLength is the shortest bearer token accepted: 16 random
// characters are beyond guessing over HTTP; a shorter token is likely a
// placeholder or a password.
const minTokenLength = 16

// maxTokenFileSize bounds the token file read; a token is one line.
const maxTokenFileSize = 4096

// HTTPAuthConfig is the http_auth: section: who may use the HTTP
// listener. With a token or users configured, every endpoint but
// /healthz and /readyz asks for one of them.
type HTTPAuthConfig struct {
	// BearerTokenFile names a file holding the bearer token (one line;
	// surrounding white space ignored). Clients send
	// "Authorization: Bearer TOKEN" (Prometheus: authorization:
	// credentials_file).
	BearerTokenFile string `yaml:"bearer_token_file"`
	// Users may sign in with HTTP Basic (browsers ask for name and
	// password); password_hash is bcrypt (dwiaudit hash-password).
	Users []HTTPUserConfig `yaml:"users"`
	// AllowUnauthenticated lets node.http_listen be a non-loopback
	// address with neither token nor users: anyone who reaches the port
	// reads the findings. Only behind a proxy or firewall that
	// authenticates.
	AllowUnauthenticated bool `yaml:"allow_unauthenticated"`
}

// HTTPUserConfig is one user of the web pages and API.
type HTTPUserConfig struct {
	Name         string `yaml:"name"`
	PasswordHash string `yaml:"password_hash"`
}

// configured reports whether any credential is set.
func (a HTTPAuthConfig) configured() bool {
	return a.BearerTokenFile != "" || len(a.Users) > 0
}

// validate adds the section's problems; listen is node.http_listen.
func (a HTTPAuthConfig) validate(p *problems, listen string) {
	if a.BearerTokenFile != "" {
		if _, err := readToken(a.BearerTokenFile); err != nil {
			p.addf("http_auth.bearer_token_file", "%v", err)
		}
	}
	seen := map[string]int{}
	for i, u := range a.Users {
		f := fmt.Sprintf("http_auth.users[%d]", i)
		switch {
		case u.Name == "":
			p.addf(f+".name", "empty")
		case strings.ContainsAny(u.Name, ":\x00\r\n"):
			// RFC 7617 2: the user-id cannot contain a colon.
			p.addf(f+".name", "%q contains a colon or a control character", u.Name)
		default:
			if j, dup := seen[u.Name]; dup {
				p.addf(f+".name", "duplicate of http_auth.users[%d].name %q", j, u.Name)
			}
			seen[u.Name] = i
		}
		if _, err := bcrypt.Cost([]byte(u.PasswordHash)); err != nil {
			p.addf(f+".password_hash", "not a bcrypt hash (make one with: dwiaudit hash-password)")
		}
	}
	if !a.configured() && !a.AllowUnauthenticated && !loopbackListen(listen) {
		p.addf("http_auth", "node.http_listen %q is reachable from other machines and no authentication is configured: "+
			"set http_auth.bearer_token_file or http_auth.users, or set http_auth.allow_unauthenticated: true to accept that anyone who reaches the port reads the findings", listen)
	}
}

// loopbackListen reports whether a listen address accepts connections
// from this machine only: 127.0.0.0/8, ::1 or localhost. An empty host
// (":8080") is every interface.
func loopbackListen(addr string) bool {
	host, _, err := net.SplitHostPort(addr)
	if err != nil {
		return false
	}
	if strings.EqualFold(host, "localhost") {
		return true
	}
	ip, err := netip.ParseAddr(host)
	return err == nil && ip.IsLoopback()
}

// readToken reads a bearer token file.
func readToken(path string) (string, error) {
	f, err := os.Open(path)
	if err != nil {
		return "", err
	}
	defer f.Close()
	b, err := io.ReadAll(io.LimitReader(f, maxTokenFileSize+1))
	if err != nil {
		return "", err
	}
	if len(b) > maxTokenFileSize {
		return "", fmt.Errorf("%s: larger than %d bytes; it should hold one token", path, maxTokenFileSize)
	}
	tok := strings.TrimSpace(string(b))
	switch {
	case tok == "":
		return "", fmt.Errorf("%s: empty", path)
	case strings.ContainsAny(tok, " \t\r\n"):
		return "", fmt.Errorf("%s: holds more than one word; it should hold one token", path)
	case len(tok) < minTokenLength:
		return "", fmt.Errorf("%s: the token is shorter than %d characters", path, minTokenLength)
	}
	return tok, nil
}

// auth builds the access control of the listener.
func (a HTTPAuthConfig) auth() (*web.Auth, error) {
	out := &web.Auth{Open: []string{"/healthz", "/readyz"},
		Hint: "send Authorization: Bearer TOKEN (dwiaudit studies and report: set " + tokenFileEnv + " to the token file) or sign in as a configured user"}
	if a.BearerTokenFile != "" {
		tok, err := readToken(a.BearerTokenFile)
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

// describe says in a few words how the listener is protected, for the
// start-up log.
func (a HTTPAuthConfig) describe(listen string) string {
	var parts []string
	if a.BearerTokenFile != "" {
		parts = append(parts, "bearer token")
	}
	if n := len(a.Users); n > 0 {
		parts = append(parts, fmt.Sprintf("%d user(s)", n))
	}
	switch {
	case len(parts) > 0:
		return strings.Join(parts, " and ")
	case loopbackListen(listen):
		return "none (loopback only)"
	}
	return "none (allow_unauthenticated)"
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
	tok, err := readToken(path)
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
func newWebPages(cfg Config, st *store.Store, loc *time.Location, log *slog.Logger) (*webPages, error) {
	auth, err := cfg.HTTPAuth.auth()
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
	if !cfg.HTTPAuth.configured() && !loopbackListen(cfg.Node.HTTPListen) {
		log.Warn("the HTTP listener is reachable from other machines without authentication (http_auth.allow_unauthenticated)", "http", cfg.Node.HTTPListen)
	}
	log.Info("http access control", "auth", cfg.HTTPAuth.describe(cfg.Node.HTTPListen))
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
