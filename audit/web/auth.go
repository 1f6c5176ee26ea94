package web

// Access control in front of the whole HTTP listener: a bearer token
// and/or users with bcrypt password hashes (HTTP Basic). Health checks
// stay open so that service managers and load balancers need no secret.

import (
	"crypto/sha256"
	"crypto/subtle"
	"encoding/json"
	"net/http"
	"strings"
	"sync"

	"golang.org/x/crypto/bcrypt"
)

// Realm is the protection space named in WWW-Authenticate (RFC 9110
// 11.6.1, RFC 7617, RFC 6750).
const Realm = "dwiaudit"

// maxVerified bounds the cache of verified Basic credentials: a browser
// sends the same credentials with every request (a study page and its
// previews are five), and bcrypt costs tens of milliseconds each by
// design; a few hundred entries cover every user and password change.
const maxVerified = 256

// dummyHash is checked against for an unknown user name, so that a
// wrong name costs what a wrong password does and does not tell names
// apart by time. It is the hash of a random string nobody knows.
var dummyHash = []byte("$2a$10$KX/KBlZN6GO7ZR0A0se6NeUWE0b5xyPqTqqIB6ZLKYfVpkDaVM1Ka")

// Auth checks each request for a bearer token or a Basic user. The zero
// value (no token, no users) lets everything through.
type Auth struct {
	// Token is the bearer token (Authorization: Bearer TOKEN); empty:
	// none accepted.
	Token string
	// Users are user names with their bcrypt password hashes.
	Users map[string][]byte
	// Open are exact paths served without authentication.
	Open []string
	// Hint is added to the 401 answer's error text: how to authenticate.
	Hint string

	mu       sync.Mutex
	verified map[[32]byte]bool // guarded by mu: sha256(name 0x00 password) of Basic credentials bcrypt accepted
}

// Enabled reports whether any credential is configured.
func (a *Auth) Enabled() bool { return a.Token != "" || len(a.Users) > 0 }

// Wrap requires a credential for every request to h except the Open
// paths; a request without a valid one gets 401 with WWW-Authenticate
// naming the schemes accepted, and a JSON body like the API's errors.
func (a *Auth) Wrap(h http.Handler) http.Handler {
	if !a.Enabled() {
		return h
	}
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		for _, p := range a.Open {
			if r.URL.Path == p {
				h.ServeHTTP(w, r)
				return
			}
		}
		if a.allowed(r) {
			h.ServeHTTP(w, r)
			return
		}
		if a.Token != "" {
			w.Header().Add("WWW-Authenticate", `Bearer realm="`+Realm+`"`)
		}
		if len(a.Users) > 0 {
			w.Header().Add("WWW-Authenticate", `Basic realm="`+Realm+`", charset="UTF-8"`)
		}
		w.Header().Set("Content-Type", "application/json; charset=utf-8")
		w.Header().Set("Cache-Control", "no-store")
		w.WriteHeader(http.StatusUnauthorized)
		msg := "authentication required"
		if a.Hint != "" {
			msg += ": " + a.Hint
		}
		json.NewEncoder(w).Encode(map[string]any{"error": msg, "status": http.StatusUnauthorized})
	})
}

// allowed checks the request's Authorization header.
func (a *Auth) allowed(r *http.Request) bool {
	h := r.Header.Get("Authorization")
	scheme, cred, ok := strings.Cut(h, " ")
	if !ok {
		return false
	}
	cred = strings.TrimSpace(cred)
	switch {
	case strings.EqualFold(scheme, "Bearer") && a.Token != "":
		// Hash both sides so the comparison takes the same time
		// whatever the lengths.
		got, want := sha256.Sum256([]byte(cred)), sha256.Sum256([]byte(a.Token))
		return subtle.ConstantTimeCompare(got[:], want[:]) == 1
	case strings.EqualFold(scheme, "Basic") && len(a.Users) > 0:
		name, pass, ok := r.BasicAuth()
		if !ok {
			return false
		}
		return a.checkUser(name, pass)
	}
	return false
}

// checkUser verifies a Basic user, remembering credentials that passed.
func (a *Auth) checkUser(name, pass string) bool {
	key := sha256.Sum256([]byte(name + "\x00" + pass))
	a.mu.Lock()
	ok := a.verified[key]
	a.mu.Unlock()
	if ok {
		return true
	}
	hash, known := a.Users[name]
	if !known {
		hash = dummyHash
	}
	if bcrypt.CompareHashAndPassword(hash, []byte(pass)) != nil || !known {
		return false
	}
	a.mu.Lock()
	if a.verified == nil || len(a.verified) >= maxVerified {
		a.verified = map[[32]byte]bool{}
	}
	a.verified[key] = true
	a.mu.Unlock()
	return true
}
