package config

import (
	"errors"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"golang.org/x/crypto/bcrypt"
)

// testToken is a bearer token of the tests (invented).
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
		auth   HTTPAuth
		want   []string // problem prefixes; none for a valid configuration
	}{
		{"loopback IPv4 runs without authentication", "127.0.0.1:8080", HTTPAuth{}, nil},
		{"loopback IPv6 runs without authentication", "[::1]:8080", HTTPAuth{}, nil},
		{"localhost runs without authentication", "localhost:8080", HTTPAuth{}, nil},
		{"every interface without authentication is refused", "0.0.0.0:8080", HTTPAuth{}, []string{"http_auth: node.http_listen \"0.0.0.0:8080\" is reachable from other machines"}},
		{"an empty host without authentication is refused", ":8080", HTTPAuth{}, []string{"http_auth: node.http_listen \":8080\""}},
		{"a LAN address without authentication is refused", "10.20.0.5:8080", HTTPAuth{}, []string{"http_auth:"}},
		{"allow_unauthenticated accepts the risk explicitly", "0.0.0.0:8080", HTTPAuth{AllowUnauthenticated: true}, nil},
		{"a token file protects a non-loopback listener", "0.0.0.0:8080", HTTPAuth{BearerTokenFile: good}, nil},
		{"users protect a non-loopback listener", "0.0.0.0:8080", HTTPAuth{Users: []HTTPUser{{Name: "physics", PasswordHash: hash}}}, nil},
		{"a missing token file is named", "127.0.0.1:8080", HTTPAuth{BearerTokenFile: filepath.Join(t.TempDir(), "absent")}, []string{"http_auth.bearer_token_file:"}},
		{"an empty token file is named", "127.0.0.1:8080", HTTPAuth{BearerTokenFile: tokenFile(t, " \n")}, []string{"http_auth.bearer_token_file:"}},
		{"a short token is named", "127.0.0.1:8080", HTTPAuth{BearerTokenFile: tokenFile(t, "short")}, []string{"http_auth.bearer_token_file:"}},
		{"every user problem is listed at once", "0.0.0.0:8080", HTTPAuth{Users: []HTTPUser{
			{Name: "", PasswordHash: hash},
			{Name: "a:b", PasswordHash: hash},
			{Name: "physics", PasswordHash: "plain-text"},
			{Name: "physics", PasswordHash: hash},
		}}, []string{"http_auth.users[0].name: empty", "http_auth.users[1].name:", "http_auth.users[2].password_hash: not a bcrypt hash", "http_auth.users[3].name: duplicate"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			c := Default()
			c.Node.HTTPListen = tt.listen
			c.HTTPAuth = tt.auth
			err := c.Validate()
			var ce *Error
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

func TestExampleHTTPAuthSectionIsTheDefaultAndItsUserParses(t *testing.T) {
	path := filepath.Join("..", "deploy", "dwiaudit.example.yaml")
	c, err := LoadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	// An empty list in the file is no users, as the default's nil.
	got := c.HTTPAuth
	if len(got.Users) == 0 {
		got.Users = nil
	}
	if d := Default().HTTPAuth; !reflect.DeepEqual(got, d) {
		t.Errorf("the example's http_auth differs from the default:\n got %+v\nwant %+v", c.HTTPAuth, d)
	}
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	text := strings.Replace(string(b), "  users: []\n  # - {", "  users:\n    - {", 1)
	text = strings.Replace(text, `http_listen: "127.0.0.1:8080"`, `http_listen: "0.0.0.0:8080"`, 1)
	c, err = Parse(path, []byte(text))
	if err != nil {
		t.Fatalf("with the example user uncommented on a non-loopback address: %v", err)
	}
	if len(c.HTTPAuth.Users) != 1 || c.HTTPAuth.Users[0].Name != "physics" {
		t.Errorf("users %+v", c.HTTPAuth.Users)
	}
}

// authTestHandler is the serve handler (pages and API behind the access
// control) over a real store in a temporary folder.
