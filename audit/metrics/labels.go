package metrics

import (
	"strings"
	"sync"
)

// Label bounds.
const (
	// MaxFallbackScanners caps the distinct scanner labels made from
	// Station Names (series from no configured peer): each is a set of
	// time series on every per-scanner metric, and a misconfigured
	// router sending from many stations must not blow up the server's
	// memory. 16 is more scanners than a hospital runs without
	// configuring peers (common practice).
	MaxFallbackScanners = 16

	// maxLabelLen is the longest scanner label, the same bound as a
	// configured peer's label (config/config.go, maxScannerLabel).
	maxLabelLen = 32
)

// Label values that stand for a missing or an unbounded value.
const (
	// LabelUnknown is the scanner of a series with neither a configured
	// label nor a usable Station Name.
	LabelUnknown = "unknown"
	// LabelOther gathers values past a bound: fallback scanners beyond
	// MaxFallbackScanners, and protocol, phantom, rule or result names
	// the configuration does not know.
	LabelOther = "other"
	// LabelNone is the protocol of a series no protocol matched.
	LabelNone = "none"
)

// Labels turns what an event carries into bounded label values. It is
// safe for concurrent use.
type Labels struct {
	scanners  map[string]bool // configured peer labels; read-only
	protocols map[string]bool // configured protocol names; read-only
	phantoms  map[string]bool // configured phantom profile names; read-only
	rules     map[string]bool // known rule IDs; read-only

	mu        sync.Mutex      // guards fallbacks
	fallbacks map[string]bool // scanner labels made from Station Names
}

// NewLabels returns the bounds for the configured scanner labels,
// protocol and phantom names and the known rule IDs.
func NewLabels(scanners, protocols, phantoms, ruleIDs []string) *Labels {
	set := func(xs []string) map[string]bool {
		m := make(map[string]bool, len(xs))
		for _, x := range xs {
			if x != "" {
				m[x] = true
			}
		}
		return m
	}
	return &Labels{
		scanners:  set(scanners),
		protocols: set(protocols),
		phantoms:  set(phantoms),
		rules:     set(ruleIDs),
		fallbacks: map[string]bool{},
	}
}

// Scanner is the label of a scanner: a configured label as it is,
// anything else (a Station Name) sanitised to lower-case [a-z0-9._-] of
// at most 32 characters, "unknown" when nothing is left, "other" once
// MaxFallbackScanners such values exist. A Station Name is set by
// whoever installed the scanner and should name a device; should it hold
// anything else, it becomes "other" when it holds a UID-like run of
// numbers (three dotted components; PS3.5 9.1) or contains one of never,
// the identifiers of the event's study (patient ID and name and each
// part of the name, accession, UIDs).
func (l *Labels) Scanner(s string, never ...string) string {
	if l.scanners[s] {
		return s
	}
	v := sanitise(s)
	switch {
	case v == "":
		return LabelUnknown
	case l.scanners[v]:
		return v
	case uidLike(v), holdsAny(v, never):
		return LabelOther
	}
	l.mu.Lock()
	defer l.mu.Unlock()
	if l.fallbacks[v] {
		return v
	}
	if len(l.fallbacks) >= MaxFallbackScanners {
		return LabelOther
	}
	l.fallbacks[v] = true
	return v
}

// Protocol is the label of a protocol name: "none" for no protocol, the
// name when configured, else "other".
func (l *Labels) Protocol(s string) string { return configured(l.protocols, s) }

// Phantom is the label of a phantom profile name, as Protocol.
func (l *Labels) Phantom(s string) string { return configured(l.phantoms, s) }

// isPhantom reports whether s names a configured phantom profile (the
// audit engine puts the profile's name where a protocol's would be).
func (l *Labels) isPhantom(s string) bool { return l.phantoms[s] }

// Rule is the label of a rule ID: known IDs as they are, else "other".
func (l *Labels) Rule(s string) string {
	if l.rules[s] {
		return s
	}
	return LabelOther
}

// Severity is the label of a finding's severity: info, warning or error,
// else "other".
func (l *Labels) Severity(s string) string {
	switch s {
	case "info", "warning", "error":
		return s
	}
	return LabelOther
}

func configured(set map[string]bool, s string) string {
	switch {
	case s == "":
		return LabelNone
	case set[s]:
		return s
	}
	return LabelOther
}

// sanitise lower-cases s, turns every run of characters outside
// [a-z0-9._-] into one '_', trims '_' at both ends and cuts the result
// to maxLabelLen.
func sanitise(s string) string {
	var b strings.Builder
	under := false
	for _, r := range strings.ToLower(strings.TrimSpace(s)) {
		switch {
		case r >= 'a' && r <= 'z', r >= '0' && r <= '9', r == '.', r == '-', r == '_':
			b.WriteRune(r)
			under = r == '_'
		default:
			if !under {
				b.WriteByte('_')
				under = true
			}
		}
		if b.Len() >= maxLabelLen {
			break
		}
	}
	v := b.String()
	if len(v) > maxLabelLen {
		v = v[:maxLabelLen]
	}
	return strings.Trim(v, "_")
}

// minIdentifierLen is the shortest identifier (or part of a patient
// name) holdsAny looks for: shorter ones ("MR", "1") would match
// ordinary device names by chance.
const minIdentifierLen = 3

// holdsAny reports whether the sanitised label v contains any of the
// identifiers, sanitised the same way, or any part of one split at the
// PN component separator '^' (PS3.5 6.2).
func holdsAny(v string, identifiers []string) bool {
	for _, id := range identifiers {
		parts := append(strings.Split(id, "^"), id)
		for _, p := range parts {
			if sp := sanitise(p); len(sp) >= minIdentifierLen && strings.Contains(v, sp) {
				return true
			}
		}
	}
	return false
}

// uidLike reports whether s holds a run like the start of a DICOM UID:
// three numeric components separated by dots (PS3.5 9.1), as in
// "1.2.840". A device name such as "mr_1.5t" does not.
func uidLike(s string) bool {
	for i := 0; i < len(s); {
		if !isDigit(s[i]) {
			i++
			continue
		}
		comps, j := 0, i
		for j < len(s) {
			k := j
			for k < len(s) && isDigit(s[k]) {
				k++
			}
			if k == j {
				break
			}
			comps++
			if comps >= 3 {
				return true
			}
			if k < len(s) && s[k] == '.' {
				j = k + 1
				continue
			}
			j = k
			break
		}
		i = max(j, i+1)
	}
	return false
}

func isDigit(b byte) bool { return b >= '0' && b <= '9' }
