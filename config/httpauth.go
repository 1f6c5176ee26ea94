package config

// The http_auth: section: who may use the HTTP listener, and its checks.

import (
	"fmt"
	"io"
	"net"
	"net/netip"
	"os"
	"strings"

	"golang.org/x/crypto/bcrypt"
)

// minTokenLength is the shortest bearer token accepted: 16 random
// characters are beyond guessing over HTTP; a shorter token is likely a
// placeholder or a password.
const minTokenLength = 16

// maxTokenFileSize bounds the token file read; a token is one line.
const maxTokenFileSize = 4096

// HTTPAuth is the http_auth: section: who may use the HTTP
// listener. With a token or users configured, every endpoint but
// /healthz and /readyz asks for one of them.
type HTTPAuth struct {
	// BearerTokenFile names a file holding the bearer token (one line;
	// surrounding white space ignored). Clients send
	// "Authorization: Bearer TOKEN" (Prometheus: authorization:
	// credentials_file).
	BearerTokenFile string `yaml:"bearer_token_file"`
	// Users may sign in with HTTP Basic (browsers ask for name and
	// password); password_hash is bcrypt (dwiaudit hash-password).
	Users []HTTPUser `yaml:"users"`
	// AllowUnauthenticated lets node.http_listen be a non-loopback
	// address with neither token nor users: anyone who reaches the port
	// reads the findings. Only behind a proxy or firewall that
	// authenticates.
	AllowUnauthenticated bool `yaml:"allow_unauthenticated"`
}

// HTTPUser is one user of the web pages and API.
type HTTPUser struct {
	Name         string `yaml:"name"`
	PasswordHash string `yaml:"password_hash"`
}

// Configured reports whether any credential is set.
func (a HTTPAuth) Configured() bool {
	return a.BearerTokenFile != "" || len(a.Users) > 0
}

// validate adds the section's problems; listen is node.http_listen.
func (a HTTPAuth) validate(p *problems, listen string) {
	if a.BearerTokenFile != "" {
		if _, err := ReadToken(a.BearerTokenFile); err != nil {
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
	if !a.Configured() && !a.AllowUnauthenticated && !LoopbackListen(listen) {
		p.addf("http_auth", "node.http_listen %q is reachable from other machines and no authentication is configured: "+
			"set http_auth.bearer_token_file or http_auth.users, or set http_auth.allow_unauthenticated: true to accept that anyone who reaches the port reads the findings", listen)
	}
}

// LoopbackListen reports whether a listen address accepts connections
// from this machine only: 127.0.0.0/8, ::1 or localhost. An empty host
// (":8080") is every interface.
func LoopbackListen(addr string) bool {
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

// ReadToken reads a bearer token file.
func ReadToken(path string) (string, error) {
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

// Describe says in a few words how the listener is protected, for the
// start-up log.
func (a HTTPAuth) Describe(listen string) string {
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
	case LoopbackListen(listen):
		return "none (loopback only)"
	}
	return "none (allow_unauthenticated)"
}
