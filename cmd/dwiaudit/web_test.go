package main

import (
	"bytes"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"golang.org/x/crypto/bcrypt"

	"dwiaudit/config"
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

func TestServeOnANonLoopbackAddressWithoutAuthenticationExitsTwo(t *testing.T) {
	r := runCLI(t, "serve", "--data", t.TempDir(), "--listen", "127.0.0.1:0", "--http", "0.0.0.0:0")
	if r.code != exitUsage || !strings.Contains(r.stderr, "http_auth: node.http_listen \"0.0.0.0:0\" is reachable from other machines") ||
		!strings.Contains(r.stderr, "allow_unauthenticated") {
		t.Errorf("exit %d, stderr %q; want 2 naming http_auth and the way out", r.code, r.stderr)
	}
}

func authTestHandler(t *testing.T, listen string, auth config.HTTPAuth) http.Handler {
	t.Helper()
	st, _ := storetest.Open(t, store.Options{Location: time.UTC, Describe: describeInstance})
	cfg := config.Default()
	cfg.Node.HTTPListen = listen
	cfg.HTTPAuth = auth
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	return testHTTPHandler(t, cfg, st, cfg.Reports.Archive(st, time.UTC, time.Now))
}

func TestAccessControl(t *testing.T) {
	open := authTestHandler(t, "127.0.0.1:8080", config.HTTPAuth{})
	hash := cheapHash(t, "quell-vander-pass")
	guarded := authTestHandler(t, "0.0.0.0:8080", config.HTTPAuth{
		BearerTokenFile: tokenFile(t, testToken),
		Users:           []config.HTTPUser{{Name: "physics", PasswordHash: hash}},
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
	c := config.Default()
	c.HTTPAuth.Users = []config.HTTPUser{{Name: "physics", PasswordHash: hash}}
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
