package main

import (
	"bytes"
	"errors"
	"log/slog"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"

	"golang.org/x/crypto/bcrypt"

	"dwiaudit/store"
	"dwiaudit/store/storetest"
)

// testToken is the bearer token of the tests (invented).
const testToken = "qoh-test-token-0123456789abcdef"

// tokenFile writes a token file and returns its path.
func tokenFile(t *testing.T, content string) string {
	t.Helper()
	p := filepath.Join(t.TempDir(), "token")
	if err := os.WriteFile(p, []byte(content), 0o600); err != nil {
		t.Fatal(err)
	}
	return p
}

// cheapHash is a bcrypt hash at the lowest cost, so the tests stay fast.
func cheapHash(t *testing.T, pass string) string {
	t.Helper()
	h, err := bcrypt.GenerateFromPassword([]byte(pass), bcrypt.MinCost)
	if err != nil {
		t.Fatal(err)
	}
	return string(h)
}

func TestHTTPAuthConfigProblemsNameTheirFields(t *testing.T) {
	good := tokenFile(t, testToken+"\n")
	hash := cheapHash(t, "quellvander")
	tests := []struct {
		name   string
		listen string
		auth   HTTPAuthConfig
		want   []string // problem prefixes; none for a valid configuration
	}{
		{"loopback IPv4 runs without authentication", "127.0.0.1:8080", HTTPAuthConfig{}, nil},
		{"loopback IPv6 runs without authentication", "[::1]:8080", HTTPAuthConfig{}, nil},
		{"localhost runs without authentication", "localhost:8080", HTTPAuthConfig{}, nil},
		{"every interface without authentication is refused", "0.0.0.0:8080", HTTPAuthConfig{}, []string{"http_auth: node.http_listen \"0.0.0.0:8080\" is reachable from other machines"}},
		{"an empty host without authentication is refused", ":8080", HTTPAuthConfig{}, []string{"http_auth: node.http_listen \":8080\""}},
		{"a LAN address without authentication is refused", "10.20.0.5:8080", HTTPAuthConfig{}, []string{"http_auth:"}},
		{"allow_unauthenticated accepts the risk explicitly", "0.0.0.0:8080", HTTPAuthConfig{AllowUnauthenticated: true}, nil},
		{"a token file protects a non-loopback listener", "0.0.0.0:8080", HTTPAuthConfig{BearerTokenFile: good}, nil},
		{"users protect a non-loopback listener", "0.0.0.0:8080", HTTPAuthConfig{Users: []HTTPUserConfig{{Name: "physics", PasswordHash: hash}}}, nil},
		{"a missing token file is named", "127.0.0.1:8080", HTTPAuthConfig{BearerTokenFile: filepath.Join(t.TempDir(), "absent")}, []string{"http_auth.bearer_token_file:"}},
		{"an empty token file is named", "127.0.0.1:8080", HTTPAuthConfig{BearerTokenFile: tokenFile(t, " \n")}, []string{"http_auth.bearer_token_file:"}},
		{"a short token is named", "127.0.0.1:8080", HTTPAuthConfig{BearerTokenFile: tokenFile(t, "short")}, []string{"http_auth.bearer_token_file:"}},
		{"every user problem is listed at once", "0.0.0.0:8080", HTTPAuthConfig{Users: []HTTPUserConfig{
			{Name: "", PasswordHash: hash},
			{Name: "a:b", PasswordHash: hash},
			{Name: "physics", PasswordHash: "plain-text"},
			{Name: "physics", PasswordHash: hash},
		}}, []string{"http_auth.users[0].name: empty", "http_auth.users[1].name:", "http_auth.users[2].password_hash: not a bcrypt hash", "http_auth.users[3].name: duplicate"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			c := DefaultConfig()
			c.Node.HTTPListen = tt.listen
			c.HTTPAuth = tt.auth
			err := c.Validate()
			var ce *ConfigError
			if tt.want == nil {
				if err != nil {
					t.Fatalf("Validate = %v, want no problem", err)
				}
				return
			}
			if !errors.As(err, &ce) || len(ce.Problems) != len(tt.want) {
				t.Fatalf("Validate = %v, want %d problem(s) %q", err, len(tt.want), tt.want)
			}
			for i, w := range tt.want {
				if !strings.HasPrefix(ce.Problems[i], w) {
					t.Errorf("problem %d = %q, want prefix %q", i, ce.Problems[i], w)
				}
			}
		})
	}
}

func TestServeOnANonLoopbackAddressWithoutAuthenticationExitsTwo(t *testing.T) {
	r := runCLI(t, "serve", "--data", t.TempDir(), "--listen", "127.0.0.1:0", "--http", "0.0.0.0:0")
	if r.code != exitUsage || !strings.Contains(r.stderr, "http_auth: node.http_listen \"0.0.0.0:0\" is reachable from other machines") ||
		!strings.Contains(r.stderr, "allow_unauthenticated") {
		t.Errorf("exit %d, stderr %q; want 2 naming http_auth and the way out", r.code, r.stderr)
	}
}

func TestExampleHTTPAuthSectionIsTheDefaultAndItsUserParses(t *testing.T) {
	path := filepath.Join("..", "..", "deploy", "dwiaudit.example.yaml")
	c, err := LoadConfigFile(path)
	if err != nil {
		t.Fatal(err)
	}
	// An empty list in the file is no users, as the default's nil.
	got := c.HTTPAuth
	if len(got.Users) == 0 {
		got.Users = nil
	}
	if d := DefaultConfig().HTTPAuth; !reflect.DeepEqual(got, d) {
		t.Errorf("the example's http_auth differs from the default:\n got %+v\nwant %+v", c.HTTPAuth, d)
	}
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	text := strings.Replace(string(b), "  users: []\n  # - {", "  users:\n    - {", 1)
	text = strings.Replace(text, `http_listen: "127.0.0.1:8080"`, `http_listen: "0.0.0.0:8080"`, 1)
	c, err = ParseConfig(path, []byte(text))
	if err != nil {
		t.Fatalf("with the example user uncommented on a non-loopback address: %v", err)
	}
	if len(c.HTTPAuth.Users) != 1 || c.HTTPAuth.Users[0].Name != "physics" {
		t.Errorf("users %+v", c.HTTPAuth.Users)
	}
}

// authTestHandler is the serve handler (pages and API behind the access
// control) over a real store in a temporary folder.
func authTestHandler(t *testing.T, listen string, auth HTTPAuthConfig) http.Handler {
	t.Helper()
	st, _ := storetest.Open(t, store.Options{Location: time.UTC, Describe: describeInstance})
	cfg := DefaultConfig()
	cfg.Node.HTTPListen = listen
	cfg.HTTPAuth = auth
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	log := slog.New(slog.DiscardHandler)
	pages, err := newWebPages(cfg, st, time.UTC, log)
	if err != nil {
		t.Fatal(err)
	}
	return pages.handler(newAPI(st, time.UTC, func() bool { return true }, log))
}

func TestAccessControl(t *testing.T) {
	open := authTestHandler(t, "127.0.0.1:8080", HTTPAuthConfig{})
	hash := cheapHash(t, "quell-vander-pass")
	guarded := authTestHandler(t, "0.0.0.0:8080", HTTPAuthConfig{
		BearerTokenFile: tokenFile(t, testToken),
		Users:           []HTTPUserConfig{{Name: "physics", PasswordHash: hash}},
	})
	type req struct {
		path   string
		header func(*http.Request)
	}
	bearer := func(tok string) func(*http.Request) {
		return func(r *http.Request) { r.Header.Set("Authorization", "Bearer "+tok) }
	}
	basic := func(name, pass string) func(*http.Request) {
		return func(r *http.Request) { r.SetBasicAuth(name, pass) }
	}
	tests := []struct {
		name string
		h    http.Handler
		req
		want int
	}{
		{"a loopback node without auth serves the daily list", open, req{"/", nil}, http.StatusOK},
		{"a loopback node without auth serves the API", open, req{"/api/v1/studies", nil}, http.StatusOK},
		{"the daily list without credentials is refused", guarded, req{"/", nil}, http.StatusUnauthorized},
		{"the API without credentials is refused", guarded, req{"/api/v1/studies", nil}, http.StatusUnauthorized},
		{"a study page without credentials is refused", guarded, req{"/studies/2.25.1", nil}, http.StatusUnauthorized},
		{"an unknown path without credentials is refused, not told apart", guarded, req{"/no/such/thing", nil}, http.StatusUnauthorized},
		{"a wrong token is refused", guarded, req{"/", bearer(testToken + "x")}, http.StatusUnauthorized},
		{"the right token opens the daily list", guarded, req{"/", bearer(testToken)}, http.StatusOK},
		{"the right token opens the API", guarded, req{"/api/v1/studies", bearer(testToken)}, http.StatusOK},
		{"a known user with the right password opens the scanners page", guarded, req{"/scanners", basic("physics", "quell-vander-pass")}, http.StatusOK},
		{"a known user with a wrong password is refused", guarded, req{"/scanners", basic("physics", "wrong")}, http.StatusUnauthorized},
		{"an unknown user is refused", guarded, req{"/scanners", basic("nobody", "quell-vander-pass")}, http.StatusUnauthorized},
		{"the token sent as a Basic password is refused", guarded, req{"/", basic("physics", testToken)}, http.StatusUnauthorized},
		{"healthz stays open", guarded, req{"/healthz", nil}, http.StatusOK},
		{"readyz stays open", guarded, req{"/readyz", nil}, http.StatusOK},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			r := httptest.NewRequest("GET", tt.path, nil)
			if tt.header != nil {
				tt.header(r)
			}
			rec := httptest.NewRecorder()
			tt.h.ServeHTTP(rec, r)
			if rec.Code != tt.want {
				t.Fatalf("GET %s: %d, want %d; body %.200s", tt.path, rec.Code, tt.want, rec.Body.String())
			}
			if rec.Code == http.StatusUnauthorized {
				// RFC 9110 11.6.1: a 401 names the schemes accepted.
				got := rec.Header().Values("WWW-Authenticate")
				if len(got) != 2 || !strings.HasPrefix(got[0], "Bearer realm=") || !strings.HasPrefix(got[1], "Basic realm=") {
					t.Errorf("WWW-Authenticate %q, want Bearer and Basic", got)
				}
				if strings.Contains(rec.Body.String(), "<html") {
					t.Errorf("a refused request got a page: %.200s", rec.Body.String())
				}
			}
		})
	}
}

func TestHashPasswordPrintsAHashTheConfigurationAccepts(t *testing.T) {
	var stdout, stderr bytes.Buffer
	env := &cliEnv{stdout: &stdout, stderr: &stderr, stdin: strings.NewReader("quell-vander-pass\n")}
	if code := run(t.Context(), env, []string{"hash-password", "--cost", "4"}); code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr.String())
	}
	hash := strings.TrimSpace(stdout.String())
	if err := bcrypt.CompareHashAndPassword([]byte(hash), []byte("quell-vander-pass")); err != nil {
		t.Fatalf("hash %q does not match the password: %v", hash, err)
	}
	c := DefaultConfig()
	c.HTTPAuth.Users = []HTTPUserConfig{{Name: "physics", PasswordHash: hash}}
	if err := c.Validate(); err != nil {
		t.Errorf("the printed hash is refused: %v", err)
	}
	t.Run("an empty password is refused", func(t *testing.T) {
		env := &cliEnv{stdout: &stdout, stderr: &stderr, stdin: strings.NewReader("\n")}
		if code := run(t.Context(), env, []string{"hash-password"}); code != exitUsage {
			t.Errorf("exit %d, want 2", code)
		}
	})
	t.Run("a password given as an argument is refused", func(t *testing.T) {
		if r := runCLI(t, "hash-password", "secret"); r.code != exitUsage || !strings.Contains(r.stderr, "standard input") {
			t.Errorf("exit %d, stderr %q", r.code, r.stderr)
		}
	})
}

func TestServeWithATokenAsksForItEverywhereButTheHealthChecks(t *testing.T) {
	cfg := filepath.Join(t.TempDir(), "node.yaml")
	conf := "http_auth:\n  bearer_token_file: " + tokenFile(t, testToken+"\n") + "\n"
	if err := os.WriteFile(cfg, []byte(conf), 0o644); err != nil {
		t.Fatal(err)
	}
	n := startNode(t, t.TempDir(), "--config", cfg)
	for _, tt := range []struct {
		path, token string
		want        int
	}{
		{"/", "", http.StatusUnauthorized},
		{"/scanners", "", http.StatusUnauthorized},
		{"/api/v1/studies", "", http.StatusUnauthorized},
		{"/", testToken, http.StatusOK},
		{"/api/v1/studies", testToken, http.StatusOK},
		{"/healthz", "", http.StatusOK},
		{"/readyz", "", http.StatusOK},
	} {
		req, err := http.NewRequest("GET", n.httpURL+tt.path, nil)
		if err != nil {
			t.Fatal(err)
		}
		if tt.token != "" {
			req.Header.Set("Authorization", "Bearer "+tt.token)
		}
		res, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		res.Body.Close()
		if res.StatusCode != tt.want {
			t.Errorf("GET %s with token %v: %d, want %d", tt.path, tt.token != "", res.StatusCode, tt.want)
		}
	}
	t.Run("dwiaudit studies --server needs the token file, and works with it", func(t *testing.T) {
		r := runCLI(t, "studies", "--server", n.httpURL)
		if r.code != exitFailure || !strings.Contains(r.stderr, "401") || !strings.Contains(r.stderr, tokenFileEnv) {
			t.Errorf("without the token: exit %d, stderr %q; want 1 naming 401 and %s", r.code, r.stderr, tokenFileEnv)
		}
		t.Setenv(tokenFileEnv, tokenFile(t, testToken))
		if r := runCLI(t, "studies", "--server", n.httpURL); r.code != exitOK {
			t.Errorf("with the token: exit %d, stderr %q", r.code, r.stderr)
		}
		if r := runCLI(t, "report", "daily", "--server", n.httpURL); r.code != exitOK {
			t.Errorf("report daily with the token: exit %d, stderr %q", r.code, r.stderr)
		}
	})
	if !n.waitForLog(`auth="bearer token"`, time.Second) {
		t.Errorf("the start-up log does not say how the listener is protected")
	}
	if strings.Contains(n.stderr.String(), testToken) {
		t.Errorf("the log shows the token")
	}
	if code := n.stop(); code != exitOK {
		t.Errorf("exit %d", code)
	}
}
