// Package config is the node's configuration: one YAML file, every
// field optional, decoded over Default so that `dwiaudit serve` runs
// without any file; Validate lists every problem with its field (and,
// for a file, its line); and the mapping of the sections to the
// options of the audit engine (Audit.Engine), the DICOM acceptor
// (PeerTable) and the reports.
package config

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"math"
	"net"
	"net/netip"
	"os"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"time"

	"go.yaml.in/yaml/v3"

	"dwiaudit/audit"
	"dwiaudit/audit/analysis"
	"dwiaudit/audit/header"
	"dwiaudit/rules"
	"dwiaudit/scp"
)

// Defaults of the configuration (README, issue 3).
const (
	DefaultDataDir     = "./dwiaudit-data"
	DefaultDICOMListen = ":11112" // the registered DICOM port (PS3.8 G.1, from memory)
	// DefaultHTTPListen is loopback: the API is unauthenticated, so
	// opening it to the network is a decision for whoever deploys it.
	DefaultHTTPListen = "127.0.0.1:8080"
	defaultTimeZone   = "Local"

	// defaultDiskFloor keeps room for the index, the logs and the
	// operating system when the archive fills the disk: a full file
	// system corrupts more than it refuses.
	defaultDiskFloor = 2 << 30

	// defaultRetention keeps instance files 30 days: long enough to
	// re-audit a month of studies, short enough that the node is not an
	// archive (the PACS is).
	defaultRetention = 30 * 24 * time.Hour

	// defaultPruneInterval: retention works in days, hourly pruning is
	// plenty.
	defaultPruneInterval = time.Hour
)

// Limits of the configuration values.
const (
	// maxAssociationsCap bounds limits.max_associations: each association
	// holds a goroutine, a socket and one PDU buffer (up to
	// scp.MaxPDULengthCap), so a thousand is already 16 GiB at worst.
	maxAssociationsCap = 1024

	// minTimeout is the shortest ARTIM, idle or write timeout accepted:
	// anything shorter breaks ordinary peers on a busy network.
	minTimeout = time.Second

	// minPruneInterval stops a typo from turning pruning into a busy
	// loop over the index.
	minPruneInterval = time.Minute

	// minRetention is the shortest retention accepted: the audit reads
	// the instance files after a series settles, minutes to hours after
	// it arrived.
	minRetention = time.Hour

	// maxScannerLabel is the longest scanner label: it becomes a metrics
	// label value and part of report file names.
	maxScannerLabel = 32
)

// scannerLabelPattern is what a scanner label may look like: lower-case
// letters, digits, '.', '_' and '-', starting with a letter or digit, so
// it is safe as a metrics label value and in a file name.
var scannerLabelPattern = regexp.MustCompile(`^[a-z0-9][a-z0-9._-]*$`)

// Config is the whole configuration file.
type Config struct {
	Node      Node      `yaml:"node"`
	Peers     []Peer    `yaml:"peers"`
	Limits    Limits    `yaml:"limits"`
	Retention Retention `yaml:"retention"`
	Log       Log       `yaml:"log"`
	Audit     Audit     `yaml:"audit"`
	HTTPAuth  HTTPAuth  `yaml:"http_auth"`
	Reports   Reports   `yaml:"reports"`
}

// Node is who and where the node is.
type Node struct {
	AETitle     string `yaml:"ae_title"`     // our AE title; the called AE title must match it
	DICOMListen string `yaml:"dicom_listen"` // host:port of the DICOM acceptor
	HTTPListen  string `yaml:"http_listen"`  // host:port of the HTTP API and health checks
	DataDir     string `yaml:"data_dir"`     // the data folder: instance files and index
	TimeZone    string `yaml:"time_zone"`    // IANA name, "Local" or "UTC": what a receive day is
}

// Peer is one calling AE title allowed to associate.
type Peer struct {
	AETitle string `yaml:"ae_title"`
	// Scanner is the label the node uses for the peer in metrics and
	// reports.
	Scanner string `yaml:"scanner"`
	// Networks, when set, are the source networks (CIDR) the peer may
	// associate from; an association from anywhere else is rejected as
	// if its calling AE title were unknown.
	Networks []string `yaml:"networks"`
}

// Limits bounds what peers can make the node do.
type Limits struct {
	MaxAssociations int      `yaml:"max_associations"`
	MaxPDULength    ByteSize `yaml:"max_pdu_length"` // the Maximum Length we advertise (PS3.8 D.1)
	ARTIMTimeout    Duration `yaml:"artim_timeout"`  // PS3.8 9.1.5
	IdleTimeout     Duration `yaml:"idle_timeout"`
	WriteTimeout    Duration `yaml:"write_timeout"`
	// DiskFloor is the free space below which C-STOREs are refused with
	// A700 (out of resources).
	DiskFloor ByteSize `yaml:"disk_floor"`
}

// Retention says how long instance files are kept.
type Retention struct {
	InstanceFiles Duration `yaml:"instance_files"`
	PruneInterval Duration `yaml:"prune_interval"`
}

// Log shapes the log.
type Log struct {
	Level  LogLevel  `yaml:"level"`
	Format LogFormat `yaml:"format"`
}

// Default returns the configuration `dwiaudit serve` runs on
// without a file. Each call returns a fresh value.
func Default() Config {
	return Config{
		Node: Node{
			AETitle:     scp.DefaultAETitle,
			DICOMListen: DefaultDICOMListen,
			HTTPListen:  DefaultHTTPListen,
			DataDir:     DefaultDataDir,
			TimeZone:    defaultTimeZone,
		},
		Limits: Limits{
			MaxAssociations: scp.DefaultMaxAssociations,
			MaxPDULength:    scp.DefaultMaxPDULength,
			ARTIMTimeout:    Duration(scp.DefaultARTIMTimeout),
			IdleTimeout:     Duration(scp.DefaultIdleTimeout),
			WriteTimeout:    Duration(scp.DefaultWriteTimeout),
			DiskFloor:       defaultDiskFloor,
		},
		Retention: Retention{
			InstanceFiles: Duration(defaultRetention),
			PruneInterval: Duration(defaultPruneInterval),
		},
		Log:     Log{Level: LogLevel(slog.LevelInfo), Format: LogText},
		Audit:   defaultAudit(),
		Reports: defaultReports(),
	}
}

// Error lists every problem found in a configuration. Each problem
// names its field path, e.g. "limits.max_pdu_length: 1024 is below 4096".
type Error struct {
	File     string // the file the configuration came from; "" for flags and defaults
	Problems []string
}

func (e *Error) Error() string {
	src := "configuration"
	if e.File != "" {
		src = e.File
	}
	return fmt.Sprintf("%s: %d problem(s):\n  %s", src, len(e.Problems), strings.Join(e.Problems, "\n  "))
}

// Validate reports every problem of c at once, or nil. The error is a
// *Error.
func (c Config) Validate() error {
	var p problems

	n := c.Node
	if err := scp.ValidateAETitle(n.AETitle); err != nil {
		p.addf("node.ae_title", "%v", err)
	}
	p.listenAddr("node.dicom_listen", n.DICOMListen)
	p.listenAddr("node.http_listen", n.HTTPListen)
	if n.DataDir == "" {
		p.addf("node.data_dir", "empty")
	}
	if _, err := LoadLocation(n.TimeZone); err != nil {
		p.addf("node.time_zone", "%v", err)
	}

	seen := map[string]int{}
	for i, peer := range c.Peers {
		f := fmt.Sprintf("peers[%d]", i)
		if err := scp.ValidateAETitle(peer.AETitle); err != nil {
			p.addf(f+".ae_title", "%v", err)
		} else if j, dup := seen[strings.TrimSpace(peer.AETitle)]; dup {
			p.addf(f+".ae_title", "duplicate of peers[%d].ae_title %q", j, peer.AETitle)
		} else {
			seen[strings.TrimSpace(peer.AETitle)] = i
		}
		switch {
		case peer.Scanner == "":
			p.addf(f+".scanner", "missing: every peer needs a scanner label")
		case len(peer.Scanner) > maxScannerLabel:
			p.addf(f+".scanner", "%q is longer than %d characters", peer.Scanner, maxScannerLabel)
		case !scannerLabelPattern.MatchString(peer.Scanner):
			p.addf(f+".scanner", "%q: use lower-case letters, digits, '.', '_' and '-', starting with a letter or digit", peer.Scanner)
		}
		for j, cidr := range peer.Networks {
			if _, err := netip.ParsePrefix(cidr); err != nil {
				p.addf(fmt.Sprintf("%s.networks[%d]", f, j), "%q is not a network in CIDR notation (e.g. 10.20.0.0/16)", cidr)
			}
		}
	}

	l := c.Limits
	switch {
	case l.MaxAssociations < 1:
		p.addf("limits.max_associations", "%d is below 1", l.MaxAssociations)
	case l.MaxAssociations > maxAssociationsCap:
		p.addf("limits.max_associations", "%d is above %d", l.MaxAssociations, maxAssociationsCap)
	}
	switch {
	case l.MaxPDULength < scp.MinPDULength:
		p.addf("limits.max_pdu_length", "%d is below %d", uint64(l.MaxPDULength), scp.MinPDULength)
	case l.MaxPDULength > scp.MaxPDULengthCap:
		p.addf("limits.max_pdu_length", "%d is above %d", uint64(l.MaxPDULength), scp.MaxPDULengthCap)
	}
	p.atLeast("limits.artim_timeout", l.ARTIMTimeout, minTimeout)
	p.atLeast("limits.idle_timeout", l.IdleTimeout, minTimeout)
	p.atLeast("limits.write_timeout", l.WriteTimeout, minTimeout)

	p.atLeast("retention.instance_files", c.Retention.InstanceFiles, minRetention)
	p.atLeast("retention.prune_interval", c.Retention.PruneInterval, minPruneInterval)
	c.Audit.validate(&p)
	c.HTTPAuth.validate(&p, n.HTTPListen)
	c.Reports.validate(&p)
	return p.err("")
}

// problems collects validation problems in order.
type problems []string

func (p *problems) addf(field, format string, args ...any) {
	*p = append(*p, field+": "+fmt.Sprintf(format, args...))
}

func (p *problems) atLeast(field string, d Duration, min time.Duration) {
	if time.Duration(d) < min {
		p.addf(field, "%v is below %v", d, Duration(min))
	}
}

// listenAddr checks a host:port to listen on; port 0 asks the system for
// a free one.
func (p *problems) listenAddr(field, addr string) {
	_, port, err := net.SplitHostPort(addr)
	if err != nil {
		p.addf(field, "%q is not host:port", addr)
		return
	}
	if n, err := strconv.ParseUint(port, 10, 16); err != nil || n > math.MaxUint16 {
		p.addf(field, "%q: port %q is not a number in 0..65535", addr, port)
	}
}

func (p problems) err(file string) error {
	if len(p) == 0 {
		return nil
	}
	return &Error{File: file, Problems: slices.Clone(p)}
}

// LoadLocation is time.LoadLocation with an error that says what to do.
func LoadLocation(name string) (*time.Location, error) {
	if name == "" {
		return nil, errors.New(`empty; use an IANA name such as "Europe/London", "Local" or "UTC"`)
	}
	loc, err := time.LoadLocation(name)
	if err != nil {
		return nil, fmt.Errorf("unknown time zone %q (an IANA name such as \"Europe/London\", \"Local\" or \"UTC\"; is the system time zone database, Debian package tzdata, installed?)", name)
	}
	return loc, nil
}

// maxConfigFileSize bounds the configuration file read: a real one is a
// few kilobytes, and a YAML alias bomb should not get a chance.
const maxConfigFileSize = 1 << 20

// LoadFile reads a configuration file over Default and
// validates it. Every problem, of YAML syntax, unknown keys, types or
// values, comes back in one *Error.
func LoadFile(path string) (Config, error) {
	f, err := os.Open(path)
	if err != nil {
		return Config{}, err
	}
	defer f.Close()
	b, err := io.ReadAll(io.LimitReader(f, maxConfigFileSize+1))
	if err != nil {
		return Config{}, err
	}
	if len(b) > maxConfigFileSize {
		return Config{}, &Error{File: path, Problems: []string{fmt.Sprintf("larger than %v", ByteSize(maxConfigFileSize))}}
	}
	return Parse(path, b)
}

// Parse decodes YAML over Default and validates the result.
// Unknown keys are errors (a misspelt key would otherwise silently keep
// its default). name labels the errors.
func Parse(name string, b []byte) (Config, error) {
	c := Default()
	var root yaml.Node
	if err := yaml.Unmarshal(b, &root); err != nil {
		return c, &Error{File: name, Problems: []string{strings.TrimPrefix(err.Error(), "yaml: ")}}
	}
	if len(root.Content) == 0 {
		// An empty file, or comments only: the defaults.
		return c, c.Validate()
	}
	var p problems
	dec := yaml.NewDecoder(bytes.NewReader(b))
	dec.KnownFields(true)
	if err := dec.Decode(&c); err != nil {
		var te *yaml.TypeError
		if !errors.As(err, &te) {
			return c, &Error{File: name, Problems: []string{strings.TrimPrefix(err.Error(), "yaml: ")}}
		}
		idx := indexFields(&root)
		for _, msg := range te.Errors {
			p = append(p, idx.describe(msg))
		}
	}
	// Validate what did decode too, so one run lists every problem,
	// each with the line of its field when the file sets it.
	var verr *Error
	if err := c.Validate(); errors.As(err, &verr) {
		lines := indexFields(&root).lines()
		for _, pr := range verr.Problems {
			field, _, _ := strings.Cut(pr, ": ")
			if n, ok := lines[field]; ok {
				pr = fmt.Sprintf("%s (line %d)", pr, n)
			}
			p = append(p, pr)
		}
	}
	return c, p.err(name)
}

// lineSuffix is the " (line N)" Parse puts after a problem.
var lineSuffix = regexp.MustCompile(` \(line \d+\)$`)

// Load reads the file at path over Default (without a path, the
// defaults), applies set (the command line's overrides, which return
// problems of their own) and validates the result. Every problem, of
// the file (with its line), of set, and of the values set changed,
// comes back once in one *Error.
func Load(path string, set func(*Config) []string) (Config, error) {
	c := Default()
	var found []string
	if path != "" {
		var err error
		c, err = LoadFile(path)
		var ce *Error
		switch {
		case errors.As(err, &ce):
			found = append(found, ce.Problems...)
		case err != nil:
			return c, err
		}
	}
	var setProblems []string
	if set != nil {
		setProblems = set(&c)
	}
	// Validate again with the overrides applied; the file's own value
	// problems are already listed, with their lines.
	seen := map[string]bool{}
	for _, pr := range found {
		seen[lineSuffix.ReplaceAllString(pr, "")] = true
	}
	var ce *Error
	if err := c.Validate(); errors.As(err, &ce) {
		for _, pr := range ce.Problems {
			if !seen[pr] {
				found = append(found, pr)
			}
		}
	}
	found = append(found, setProblems...)
	if len(found) > 0 {
		return c, &Error{File: path, Problems: found}
	}
	return c, nil
}

// fieldIndex maps the lines of a YAML document to the field paths on
// them, so that the decoder's "line N: ..." messages can name the field.
type fieldIndex map[int][]fieldAt

type fieldAt struct {
	path  string // e.g. "peers[1].ae_title"
	key   string // the last key, e.g. "ae_title"
	value string // the scalar value, if any
}

// lines maps each field path to the line where its key is.
func (idx fieldIndex) lines() map[string]int {
	out := map[string]int{}
	for line, fields := range idx {
		for _, f := range fields {
			if n, ok := out[f.path]; !ok || line < n {
				out[f.path] = line
			}
		}
	}
	return out
}

func indexFields(root *yaml.Node) fieldIndex {
	idx := fieldIndex{}
	var walk func(n *yaml.Node, path string)
	walk = func(n *yaml.Node, path string) {
		switch n.Kind {
		case yaml.DocumentNode:
			for _, c := range n.Content {
				walk(c, path)
			}
		case yaml.MappingNode:
			for i := 0; i+1 < len(n.Content); i += 2 {
				k, v := n.Content[i], n.Content[i+1]
				p := k.Value
				if path != "" {
					p = path + "." + k.Value
				}
				idx[k.Line] = append(idx[k.Line], fieldAt{path: p, key: k.Value, value: v.Value})
				if v.Line != k.Line {
					idx[v.Line] = append(idx[v.Line], fieldAt{path: p, key: k.Value, value: v.Value})
				}
				walk(v, p)
			}
		case yaml.SequenceNode:
			for i, c := range n.Content {
				p := fmt.Sprintf("%s[%d]", path, i)
				if c.Kind == yaml.ScalarNode {
					idx[c.Line] = append(idx[c.Line], fieldAt{path: p, value: c.Value})
				}
				walk(c, p)
			}
		}
	}
	walk(root, "")
	return idx
}

var (
	// yamlLinePrefix matches the "line N: " the decoder puts before each
	// of its messages (go.yaml.in/yaml/v3 decode.go).
	yamlLinePrefix = regexp.MustCompile(`^line (\d+): (.*)$`)
	// yamlUnknownField matches its KnownFields message.
	yamlUnknownField = regexp.MustCompile(`^field (\S+) not found in type \S+$`)
	// yamlQuoted finds the value the decoder quotes in back-quotes.
	yamlQuoted = regexp.MustCompile("`([^`]*)`")
)

// describe rewrites one decoder message as "field: problem (line N)".
// When the line holds several fields (flow style), the key or value the
// message names picks one; failing that, the line number alone is kept.
func (idx fieldIndex) describe(msg string) string {
	m := yamlLinePrefix.FindStringSubmatch(msg)
	if m == nil {
		return msg
	}
	line, _ := strconv.Atoi(m[1])
	text := m[2]
	cands := idx[line]
	if u := yamlUnknownField.FindStringSubmatch(text); u != nil {
		text = "unknown field"
		cands = slices.DeleteFunc(slices.Clone(cands), func(f fieldAt) bool { return f.key != u[1] })
	} else if q := yamlQuoted.FindStringSubmatch(text); q != nil && len(cands) > 1 {
		cands = slices.DeleteFunc(slices.Clone(cands), func(f fieldAt) bool { return f.value != q[1] })
	}
	if len(cands) != 1 {
		return fmt.Sprintf("line %d: %s", line, text)
	}
	return fmt.Sprintf("%s: %s (line %d)", cands[0].path, text, line)
}

// typeError is what our scalar types return from UnmarshalYAML: the
// decoder then records the problem and goes on with the other fields.
func typeError(n *yaml.Node, format string, args ...any) error {
	return &yaml.TypeError{Errors: []string{fmt.Sprintf("line %d: cannot use `%s`: %s", n.Line, n.Value, fmt.Sprintf(format, args...))}}
}

// scalar returns the text of a scalar node, or an error for a mapping or
// sequence where a single value belongs.
func scalar(n *yaml.Node) (string, error) {
	if n.Kind != yaml.ScalarNode {
		return "", &yaml.TypeError{Errors: []string{fmt.Sprintf("line %d: want a single value", n.Line)}}
	}
	return n.Value, nil
}

// Duration is a time.Duration written as Go writes it ("30s", "2m",
// "720h").
type Duration time.Duration

// String returns the Go form, e.g. "2m0s".
func (d Duration) String() string { return time.Duration(d).String() }

// UnmarshalText parses the Go form.
func (d *Duration) UnmarshalText(b []byte) error {
	v, err := time.ParseDuration(string(b))
	if err != nil {
		return fmt.Errorf("%q is not a duration such as 30s, 2m or 720h", b)
	}
	*d = Duration(v)
	return nil
}

// UnmarshalYAML parses the Go form.
func (d *Duration) UnmarshalYAML(n *yaml.Node) error {
	s, err := scalar(n)
	if err != nil {
		return err
	}
	v, err := time.ParseDuration(s)
	if err != nil {
		return typeError(n, "not a duration such as 30s, 2m or 720h")
	}
	*d = Duration(v)
	return nil
}

// MarshalYAML writes the Go form.
func (d Duration) MarshalYAML() (any, error) { return d.String(), nil }

// ByteSize is a number of bytes, written plain or with a binary suffix
// ("262144", "256KiB", "2GiB").
type ByteSize uint64

// byteUnits are the suffixes ByteSize accepts, largest first. Only the
// binary (IEC 80000-13) ones: "GB" would leave it open whether 10^9 or
// 2^30 was meant.
var byteUnits = []struct {
	suffix string
	size   uint64
}{
	{"TiB", 1 << 40},
	{"GiB", 1 << 30},
	{"MiB", 1 << 20},
	{"KiB", 1 << 10},
	{"B", 1},
}

// String returns the largest exact binary unit, e.g. "2GiB", "262144" for
// a plain byte count that is no whole number of KiB.
func (s ByteSize) String() string {
	for _, u := range byteUnits[:len(byteUnits)-1] {
		if s != 0 && uint64(s)%u.size == 0 {
			return strconv.FormatUint(uint64(s)/u.size, 10) + u.suffix
		}
	}
	return strconv.FormatUint(uint64(s), 10)
}

// parseByteSize parses a whole number of bytes with an optional suffix
// B, KiB, MiB, GiB or TiB.
func parseByteSize(s string) (ByteSize, error) {
	t := strings.TrimSpace(s)
	mult := uint64(1)
	for _, u := range byteUnits {
		if strings.HasSuffix(t, u.suffix) {
			t, mult = strings.TrimSpace(strings.TrimSuffix(t, u.suffix)), u.size
			break
		}
	}
	n, err := strconv.ParseUint(t, 10, 64)
	if err != nil || n > math.MaxUint64/mult {
		return 0, fmt.Errorf("%q is not a size such as 262144, 256KiB or 2GiB", s)
	}
	return ByteSize(n * mult), nil
}

// UnmarshalText parses like parseByteSize.
func (s *ByteSize) UnmarshalText(b []byte) error {
	v, err := parseByteSize(string(b))
	if err != nil {
		return err
	}
	*s = v
	return nil
}

// UnmarshalYAML parses like parseByteSize.
func (s *ByteSize) UnmarshalYAML(n *yaml.Node) error {
	t, err := scalar(n)
	if err != nil {
		return err
	}
	v, err := parseByteSize(t)
	if err != nil {
		return typeError(n, "not a size such as 262144, 256KiB or 2GiB")
	}
	*s = v
	return nil
}

// MarshalYAML writes the String form.
func (s ByteSize) MarshalYAML() (any, error) { return s.String(), nil }

// LogLevel is a slog.Level written as slog writes it ("debug", "info",
// "warn", "error", optionally with an offset such as "info+2").
type LogLevel slog.Level

// String returns slog's name in lower case, e.g. "info".
func (l LogLevel) String() string { return strings.ToLower(slog.Level(l).String()) }

// UnmarshalText parses slog's names, in any case.
func (l *LogLevel) UnmarshalText(b []byte) error {
	var v slog.Level
	if err := v.UnmarshalText(b); err != nil {
		return fmt.Errorf("%q is not a log level: use debug, info, warn or error", b)
	}
	*l = LogLevel(v)
	return nil
}

// UnmarshalYAML parses slog's names, in any case.
func (l *LogLevel) UnmarshalYAML(n *yaml.Node) error {
	s, err := scalar(n)
	if err != nil {
		return err
	}
	var v slog.Level
	if err := v.UnmarshalText([]byte(s)); err != nil {
		return typeError(n, "not a log level: use debug, info, warn or error")
	}
	*l = LogLevel(v)
	return nil
}

// MarshalYAML writes the String form.
func (l LogLevel) MarshalYAML() (any, error) { return l.String(), nil }

// LogFormat is how log lines are written.
type LogFormat int

// Log formats.
const (
	LogText LogFormat = iota // slog.TextHandler: key=value, for people and journald
	LogJSON                  // slog.JSONHandler: one object a line, for log shippers
)

// String returns the configuration name, "text" or "json".
func (f LogFormat) String() string {
	switch f {
	case LogText:
		return "text"
	case LogJSON:
		return "json"
	}
	return fmt.Sprintf("LogFormat(%d)", int(f))
}

// parseLogFormat parses "text" or "json".
func parseLogFormat(s string) (LogFormat, error) {
	switch s {
	case "text":
		return LogText, nil
	case "json":
		return LogJSON, nil
	}
	return 0, fmt.Errorf("%q is not a log format: use text or json", s)
}

// UnmarshalText parses "text" or "json".
func (f *LogFormat) UnmarshalText(b []byte) error {
	v, err := parseLogFormat(string(b))
	if err != nil {
		return err
	}
	*f = v
	return nil
}

// UnmarshalYAML parses "text" or "json".
func (f *LogFormat) UnmarshalYAML(n *yaml.Node) error {
	s, err := scalar(n)
	if err != nil {
		return err
	}
	v, err := parseLogFormat(s)
	if err != nil {
		return typeError(n, "not a log format: use text or json")
	}
	*f = v
	return nil
}

// MarshalYAML writes the String form.
func (f LogFormat) MarshalYAML() (any, error) { return f.String(), nil }

// NewLogger builds the node's logger from the log configuration.
func NewLogger(w io.Writer, c Log) *slog.Logger {
	opts := &slog.HandlerOptions{Level: slog.Level(c.Level)}
	if c.Format == LogJSON {
		return slog.New(slog.NewJSONHandler(w, opts))
	}
	return slog.New(slog.NewTextHandler(w, opts))
}

// PeerTable answers the questions the acceptor and the ingest adapter
// ask about peers: may this calling AE title associate from that
// address, and which scanner label does it carry.
type PeerTable struct {
	byAE map[string]peerEntry // calling AE title, trimmed -> entry; read-only after NewPeerTable
}

type peerEntry struct {
	scanner  string
	networks []netip.Prefix // empty: any source address
}

// NewPeerTable builds the table from validated peers.
func NewPeerTable(peers []Peer) *PeerTable {
	t := &PeerTable{byAE: make(map[string]peerEntry, len(peers))}
	for _, p := range peers {
		e := peerEntry{scanner: p.Scanner}
		for _, n := range p.Networks {
			if pfx, err := netip.ParsePrefix(n); err == nil {
				e.networks = append(e.networks, pfx.Masked())
			}
		}
		t.byAE[strings.TrimSpace(p.AETitle)] = e
	}
	return t
}

// CallingAETitles lists the allowed calling AE titles for
// scp.Server.AllowedCallingAETitles; nil (any) when no peer is
// configured.
func (t *PeerTable) CallingAETitles() []string {
	if len(t.byAE) == 0 {
		return nil
	}
	out := make([]string, 0, len(t.byAE))
	for ae := range t.byAE {
		out = append(out, ae)
	}
	slices.Sort(out)
	return out
}

// Allow is scp.Server.AllowCalling: a peer with networks may associate
// only from inside one of them.
func (t *PeerTable) Allow(callingAE string, remote net.Addr) bool {
	if len(t.byAE) == 0 {
		return true
	}
	e, ok := t.byAE[strings.TrimSpace(callingAE)]
	if !ok {
		return false
	}
	if len(e.networks) == 0 {
		return true
	}
	var addr netip.Addr
	if ta, ok := remote.(*net.TCPAddr); ok {
		addr = ta.AddrPort().Addr()
	} else if ap, err := netip.ParseAddrPort(remote.String()); err == nil {
		addr = ap.Addr()
	} else {
		return false
	}
	addr = addr.Unmap() // an IPv4 peer on a dual-stack socket
	return slices.ContainsFunc(e.networks, func(p netip.Prefix) bool { return p.Contains(addr) })
}

// Scanner returns the scanner label of a calling AE title; without a
// configured peer it is "" (unknown scanner).
func (t *PeerTable) Scanner(callingAE string) string {
	return t.byAE[strings.TrimSpace(callingAE)].scanner
}

// Acceptor is the DICOM acceptor of the configuration: our AE title,
// the peers' allow-list (the returned table, which also gives each
// peer's scanner label) and the limits. The caller sets its Handler,
// OnAssociation and Logger.
func (c Config) Acceptor() (*scp.Server, *PeerTable) {
	peers := NewPeerTable(c.Peers)
	return &scp.Server{
		AETitle:                c.Node.AETitle,
		AllowedCallingAETitles: peers.CallingAETitles(),
		AllowCalling:           peers.Allow,
		MaxAssociations:        c.Limits.MaxAssociations,
		ARTIMTimeout:           time.Duration(c.Limits.ARTIMTimeout),
		IdleTimeout:            time.Duration(c.Limits.IdleTimeout),
		WriteTimeout:           time.Duration(c.Limits.WriteTimeout),
		MaxPDULength:           uint32(c.Limits.MaxPDULength),
	}, peers
}

// ---- The audit: section ----------------------------------------------
//
// What the audit engine runs on: when a series counts as settled, how
// many series are audited at once, the protocols and phantom profiles
// series are matched to, per-rule switches and severities, the rules'
// thresholds, where private b-values are, and the analysis settings. A
// missing key keeps its default; a list that is present replaces the
// default list whole (a site that lists its protocols lists all of
// them); the rules map and the thresholds and analysis sections merge
// key by key over the defaults.

// Defaults and limits of the audit section.
const (
	// DefaultTestPatientID is the Patient ID `dwiaudit selftest` sends
	// under, and the one test study ID the node knows without a file.
	DefaultTestPatientID = "DWIAUDIT-SELFTEST"

	// DefaultSettle is how long a series must be quiet before it is
	// audited: scanners send a series over one association in seconds,
	// a PACS auto-route may pause between series for tens of seconds
	// (common practice); 30 s audits a finished series soon after it
	// ends without catching most series half sent.
	DefaultSettle = 30 * time.Second
	// minSettle: less than a second would audit series while their
	// images are still arriving one C-STORE after another.
	minSettle = time.Second
	// maxSettle: a day; longer and the daily discrepancy list would miss
	// the day's studies.
	maxSettle = 24 * time.Hour

	// defaultAuditWorkers: each worker holds one series' pixels and maps
	// (about 200 MiB for a 300-image 256x256 series, DEVELOPERS.md), and
	// one such series audits in under a second, so two keep up with any
	// scanner while keeping the node under half a GiB.
	defaultAuditWorkers = 2

	// maxPlausibleADC bounds every ADC in the configuration, mm²/s: free
	// water at 37 C is 3.04e-3 (Holz 2000, docs/references.md#holz-2000); 0.01 is three
	// times that, so a value above it is an ADC written in 1e-3 mm²/s
	// or µm²/ms by mistake (0.7 for 0.7e-3).
	maxPlausibleADC = 0.01
)

// Audit is the audit: section.
type Audit struct {
	// Settle is how long a series must receive no instance before it is
	// audited (the pipeline); a later instance re-opens it.
	Settle Duration `yaml:"settle"`
	// Workers is how many series are audited at once.
	Workers int `yaml:"workers"`
	// TestPatientIDs are Patient IDs (0010,0020) of test studies (the
	// installation self-test sends one): audited like any other, but
	// left out of compliance reports and drift metrics.
	TestPatientIDs []string         `yaml:"test_patient_ids"`
	Protocols      []Protocol       `yaml:"protocols"`
	Phantoms       []Phantom        `yaml:"phantoms"`
	Rules          map[string]Rule  `yaml:"rules"`
	Thresholds     rules.Thresholds `yaml:"thresholds"`
	PrivateSources []PrivateSource  `yaml:"private_sources"`
	Analysis       AnalysisSettings `yaml:"analysis"`
}

// Match selects series (rules.Match): any pattern of any list
// matching selects the series. Patterns are Go regular expressions (RE2
// syntax); body parts are compared whole, ignoring case.
type Match struct {
	SeriesDescription []string `yaml:"series_description"`
	ProtocolName      []string `yaml:"protocol_name"`
	BodyPart          []string `yaml:"body_part"`
}

// Protocol is one protocol (rules.Protocol).
type Protocol struct {
	Name            string    `yaml:"name"`
	Match           Match     `yaml:"match"`
	BValues         []float64 `yaml:"bvalues"`          // s/mm²
	BValueTolerance float64   `yaml:"bvalue_tolerance"` // s/mm²
	LowestB         float64   `yaml:"lowest_b"`         // the "b0" of the protocol, s/mm²
	MinDirections   int       `yaml:"min_directions"`
	ParenchymaADC   []float64 `yaml:"parenchyma_adc"` // [low, high], mm²/s
	Head            bool      `yaml:"head"`           // CSF and free-water checks apply
}

// Phantom is one phantom profile (rules.PhantomProfile).
type Phantom struct {
	Name        string  `yaml:"name"`
	Match       Match   `yaml:"match"`
	ExpectedADC float64 `yaml:"expected_adc"` // mm²/s
	Tolerance   float64 `yaml:"tolerance"`    // relative, 0.036 for 3.6%
}

// Rule switches a rule off or sets the severity of its findings
// (rules.RuleSettings); absent keys keep the rule's own choice.
type Rule struct {
	Enabled  *bool         `yaml:"enabled"`
	Severity *SeverityName `yaml:"severity"`
}

// SeverityName is a rules.Severity written by name: info, warning or
// error.
type SeverityName rules.Severity

// UnmarshalYAML reads info, warning or error.
func (s *SeverityName) UnmarshalYAML(n *yaml.Node) error {
	t, err := scalar(n)
	if err != nil {
		return err
	}
	v, err := rules.ParseSeverity(t)
	if err != nil {
		*s = severityUnreadable
		return typeError(n, "not a severity: use info, warning or error")
	}
	*s = SeverityName(v)
	return nil
}

// severityUnreadable marks a severity the decoder already reported, so
// that validation does not report it twice.
const severityUnreadable SeverityName = -1

// MarshalYAML writes the name.
func (s SeverityName) MarshalYAML() (any, error) { return rules.Severity(s).String(), nil }

// PrivateSource is one private b-value source (header.PrivateSource):
// the private creator string that reserves a block in an odd group, the
// element's offset in that block (the low byte of (gggg,xxee)), how to
// read it, which value, an offset to subtract and a scale to s/mm², and
// optionally where the gradient direction is. A source overrides the
// built-in maker readers; the standard attributes override both.
type PrivateSource struct {
	Name     string          `yaml:"name"`
	Creator  string          `yaml:"creator"`
	Group    HexUint16       `yaml:"group"`   // e.g. "0x0019"
	Element  HexUint8        `yaml:"element"` // e.g. "0x0C"
	Read     ValueKindName   `yaml:"read"`    // FD, FL, DS, IS, SL, UL, SS, US or text
	Index    int             `yaml:"index"`
	Scale    float64         `yaml:"scale"`    // 0 or absent means 1
	Offset   float64         `yaml:"offset"`   // subtracted before scale, e.g. 1e9
	Gradient *GradientSource `yaml:"gradient"` // absent: no direction from this source
}

// GradientSource is where a private source's scanner keeps the
// gradient direction (header.GradientSource): one element of three
// values or three elements of one, in the block of creator (default:
// the source's) in group (default: the source's).
type GradientSource struct {
	Creator   string        `yaml:"creator"`
	Group     HexUint16     `yaml:"group"`
	Elements  []HexUint8    `yaml:"elements"` // e.g. ["0x0D"] or ["0xBB", "0xBC", "0xBD"]
	Read      ValueKindName `yaml:"read"`
	ImageAxes bool          `yaml:"image_axes"` // components along rows, columns, slice normal
}

// HexUint16 is a DICOM group number written in hexadecimal, with or
// without 0x ("0x0019", "0019").
type HexUint16 uint16

// UnmarshalYAML reads four hexadecimal digits at most.
func (h *HexUint16) UnmarshalYAML(n *yaml.Node) error {
	t, err := scalar(n)
	if err != nil {
		return err
	}
	v, err := strconv.ParseUint(trimHex(t), 16, 16)
	if err != nil {
		return typeError(n, `not a group number in hexadecimal such as "0x0019"`)
	}
	*h = HexUint16(v)
	return nil
}

// MarshalYAML writes 0x and four digits.
func (h HexUint16) MarshalYAML() (any, error) { return fmt.Sprintf("0x%04X", uint16(h)), nil }

// HexUint8 is the low byte of a private element number, in hexadecimal
// ("0x0C", "0C").
type HexUint8 uint8

// UnmarshalYAML reads two hexadecimal digits at most.
func (h *HexUint8) UnmarshalYAML(n *yaml.Node) error {
	t, err := scalar(n)
	if err != nil {
		return err
	}
	v, err := strconv.ParseUint(trimHex(t), 16, 8)
	if err != nil {
		return typeError(n, `not an element offset in hexadecimal from 0x00 to 0xFF such as "0x0C" (the low byte of (gggg,xxee); the block byte xx varies from file to file)`)
	}
	*h = HexUint8(v)
	return nil
}

// MarshalYAML writes 0x and two digits.
func (h HexUint8) MarshalYAML() (any, error) { return fmt.Sprintf("0x%02X", uint8(h)), nil }

func trimHex(s string) string {
	s = strings.TrimSpace(s)
	if len(s) > 2 && (s[:2] == "0x" || s[:2] == "0X") {
		return s[2:]
	}
	return s
}

// ValueKindName is a header.ValueKind written by name.
type ValueKindName header.ValueKind

// UnmarshalYAML reads FD, FL, DS, IS, SL, UL, SS, US or text.
func (k *ValueKindName) UnmarshalYAML(n *yaml.Node) error {
	t, err := scalar(n)
	if err != nil {
		return err
	}
	v, err := header.ParseValueKind(t)
	if err != nil {
		*k = valueKindUnreadable
		return typeError(n, "not a value encoding: use FD, FL, DS, IS, SL, UL, SS, US or text")
	}
	*k = ValueKindName(v)
	return nil
}

// valueKindUnreadable marks an encoding the decoder already reported.
const valueKindUnreadable ValueKindName = -1

// MarshalYAML writes the name.
func (k ValueKindName) MarshalYAML() (any, error) { return header.ValueKind(k).String(), nil }

// AnalysisSettings are the analysis settings a site may change
// (analysis.AnalyzeConfig; the others keep their defaults).
type AnalysisSettings struct {
	ParenchymaADCMax float64 `yaml:"parenchyma_adc_max"` // mm²/s: tissue below is parenchyma, above CSF
	CSFPercentile    float64 `yaml:"csf_percentile"`     // percentile of the head's ADC reported as CSF
	FreeWaterCeiling float64 `yaml:"free_water_ceiling"` // mm²/s: no tissue diffuses faster
}

// defaultAudit is the audit section `dwiaudit serve` and `dwiaudit
// check` run on without a file: the rules' defaults (rules.DefaultConfig),
// the analysis' defaults, no private sources.
func defaultAudit() Audit {
	rc := rules.DefaultConfig()
	a := analysis.DefaultAnalyzeConfig()
	c := Audit{
		Settle:         Duration(DefaultSettle),
		Workers:        defaultAuditWorkers,
		TestPatientIDs: []string{DefaultTestPatientID},
		Rules:          map[string]Rule{},
		PrivateSources: []PrivateSource{},
		Thresholds:     rc.Thresholds,
		Analysis: AnalysisSettings{
			ParenchymaADCMax: a.ParenchymaADCMax,
			CSFPercentile:    a.CSFPercentile,
			FreeWaterCeiling: a.FreeWaterCeiling,
		},
	}
	for _, p := range rc.Protocols {
		c.Protocols = append(c.Protocols, Protocol{
			Name: p.Name, Match: matchConfig(p.Match), BValues: slices.Clone(p.BValues),
			BValueTolerance: p.BTolerance, LowestB: p.LowestB, MinDirections: p.MinDirections,
			ParenchymaADC: []float64{p.ParenchymaADC[0], p.ParenchymaADC[1]}, Head: p.Head,
		})
	}
	for _, p := range rc.Phantoms {
		c.Phantoms = append(c.Phantoms, Phantom{Name: p.Name, Match: matchConfig(p.Match), ExpectedADC: p.ExpectedADC, Tolerance: p.Tolerance})
	}
	for id, s := range rc.Rules {
		r := Rule{}
		if s.Enabled != nil {
			r.Enabled = new(*s.Enabled)
		}
		if s.Severity != nil {
			r.Severity = new(SeverityName(*s.Severity))
		}
		c.Rules[id] = r
	}
	return c
}

func matchConfig(m rules.Match) Match {
	return Match{SeriesDescription: slices.Clone(m.SeriesDescription), ProtocolName: slices.Clone(m.ProtocolName), BodyPart: slices.Clone(m.BodyPart)}
}

func (m Match) rules() rules.Match {
	return rules.Match{SeriesDescription: slices.Clone(m.SeriesDescription), ProtocolName: slices.Clone(m.ProtocolName), BodyPart: slices.Clone(m.BodyPart)}
}

// RulesConfig is the configuration the rules read, not yet validated
// (audit.Engine validates it).
func (a Audit) RulesConfig() *rules.Config {
	rc := &rules.Config{Thresholds: a.Thresholds}
	if len(a.Rules) > 0 {
		rc.Rules = map[string]rules.RuleSettings{}
	}
	for _, p := range a.Protocols {
		var adcRange [2]float64
		copy(adcRange[:], p.ParenchymaADC)
		rc.Protocols = append(rc.Protocols, rules.Protocol{
			Name: p.Name, Match: p.Match.rules(), BValues: slices.Clone(p.BValues), BTolerance: p.BValueTolerance,
			LowestB: p.LowestB, MinDirections: p.MinDirections, ParenchymaADC: adcRange, Head: p.Head,
		})
	}
	for _, p := range a.Phantoms {
		rc.Phantoms = append(rc.Phantoms, rules.PhantomProfile{Name: p.Name, Match: p.Match.rules(), ExpectedADC: p.ExpectedADC, Tolerance: p.Tolerance})
	}
	for id, r := range a.Rules {
		s := rules.RuleSettings{Enabled: r.Enabled}
		if r.Severity != nil && *r.Severity != severityUnreadable {
			s.Severity = new(rules.Severity(*r.Severity))
		}
		rc.Rules[id] = s
	}
	return rc
}

// analyzeConfig is the analysis configuration: the defaults with the
// section's values.
func (a Audit) analyzeConfig() analysis.AnalyzeConfig {
	c := analysis.DefaultAnalyzeConfig()
	c.ParenchymaADCMax = a.Analysis.ParenchymaADCMax
	c.CSFPercentile = a.Analysis.CSFPercentile
	c.FreeWaterCeiling = a.Analysis.FreeWaterCeiling
	return c
}

// extractOptions are the file-reading options: the private sources.
func (a Audit) extractOptions() header.ExtractOptions {
	var o header.ExtractOptions
	for _, p := range a.PrivateSources {
		src := header.PrivateSource{
			Name: p.Name, Creator: p.Creator, Group: uint16(p.Group), Element: uint8(p.Element),
			Read: header.ValueKind(p.Read), Index: p.Index, Scale: p.Scale, Offset: p.Offset,
		}
		if g := p.Gradient; g != nil {
			src.Gradient = &header.GradientSource{Creator: g.Creator, Group: uint16(g.Group), Read: header.ValueKind(g.Read), ImageAxes: g.ImageAxes}
			for _, e := range g.Elements {
				src.Gradient.Element = append(src.Gradient.Element, uint8(e))
			}
		}
		o.PrivateSources = append(o.PrivateSources, src)
	}
	return o
}

// Engine builds the audit engine of the section: every shipped rule,
// the section's configuration, validated.
func (a Audit) Engine(log *slog.Logger) (*audit.Engine, error) {
	e := audit.NewEngine(rules.All(), a.RulesConfig())
	e.Analysis = a.analyzeConfig()
	e.Extract = a.extractOptions()
	e.Workers = a.Workers
	e.Logger = log
	if err := e.Validate(); err != nil {
		return nil, err
	}
	return e, nil
}

// validate adds the section's problems to p, by field path. The
// protocols, phantoms, rules and thresholds are judged by the rules'
// own validation (rules.Config.Validate, which names fields by the same
// YAML paths); the rest here.
func (a Audit) validate(p *problems) {
	if s := time.Duration(a.Settle); s < minSettle || s > maxSettle {
		p.addf("audit.settle", "%v is outside %v..%v", a.Settle, Duration(minSettle), Duration(maxSettle))
	}
	if a.Workers < 1 || a.Workers > audit.MaxWorkers {
		p.addf("audit.workers", "%d is outside 1..%d", a.Workers, audit.MaxWorkers)
	}

	for i, id := range a.TestPatientIDs {
		// PS3.5 6.2: Patient ID is LO, at most 64 characters, no backslash.
		if id == "" || len(id) > 64 || strings.ContainsAny(id, "\\\r\n") {
			p.addf(fmt.Sprintf("audit.test_patient_ids[%d]", i), "%q is not a Patient ID (LO: 1 to 64 characters, no backslash or line break)", id)
		}
	}

	names := map[string]int{}
	for i, pr := range a.Protocols {
		f := fmt.Sprintf("audit.protocols[%d]", i)
		p.unique(f+".name", pr.Name, i, names, "audit.protocols")
		if n := len(pr.ParenchymaADC); n != 0 && n != 2 {
			p.addf(f+".parenchyma_adc", "want [low, high] in mm²/s, got %d value(s)", n)
		}
	}
	names = map[string]int{}
	for i, ph := range a.Phantoms {
		p.unique(fmt.Sprintf("audit.phantoms[%d].name", i), ph.Name, i, names, "audit.phantoms")
	}
	if err := a.RulesConfig().Validate(); err != nil {
		for _, line := range strings.Split(err.Error(), "\n") {
			*p = append(*p, "audit."+strings.TrimPrefix(line, rules.ErrInvalidConfig.Error()+": "))
		}
	}

	for i, s := range a.PrivateSources {
		f := fmt.Sprintf("audit.private_sources[%d]", i)
		if strings.TrimSpace(s.Name) == "" {
			p.addf(f+".name", "empty")
		}
		if strings.TrimSpace(s.Creator) == "" {
			p.addf(f+".creator", "empty: the private creator string that reserves the block (PS3.5 7.8.1)")
		}
		// PS3.5 7.8.1: private groups are odd; 0001, 0003, 0005, 0007
		// and FFFF are not available.
		if g := uint16(s.Group); g%2 == 0 || g <= 0x0007 || g == 0xFFFF {
			p.addf(f+".group", "0x%04X is not a private group (odd, 0x0009 to 0xFFFD; PS3.5 7.8.1)", g)
		}
		if s.Read == ValueKindName(header.ValueInvalid) {
			p.addf(f+".read", "missing: FD, FL, DS, IS, SL, UL, SS, US or text")
		}
		if s.Index < 0 {
			p.addf(f+".index", "%d is negative", s.Index)
		}
		if !(s.Scale >= 0) || math.IsInf(s.Scale, 0) {
			p.addf(f+".scale", "%v is not a positive number", s.Scale)
		}
		if math.IsNaN(s.Offset) || math.IsInf(s.Offset, 0) {
			p.addf(f+".offset", "%v is not a number", s.Offset)
		}
		if g := s.Gradient; g != nil {
			if n := len(g.Elements); n != 1 && n != 3 {
				p.addf(f+".gradient.elements", "%d offsets: want one element of three values or three elements", n)
			}
			if grp := uint16(g.Group); grp != 0 && (grp%2 == 0 || grp <= 0x0007 || grp == 0xFFFF) {
				p.addf(f+".gradient.group", "0x%04X is not a private group (odd, 0x0009 to 0xFFFD; PS3.5 7.8.1)", grp)
			}
			if g.Read == ValueKindName(header.ValueInvalid) {
				p.addf(f+".gradient.read", "missing: FD, FL, DS, IS, SL, UL, SS, US or text")
			}
		}
	}

	an := a.Analysis
	if !(an.ParenchymaADCMax > 0 && an.ParenchymaADCMax <= maxPlausibleADC) {
		p.addf("audit.analysis.parenchyma_adc_max", "%v is not an ADC in mm²/s (0 < ADC <= %v)", an.ParenchymaADCMax, maxPlausibleADC)
	}
	if !(an.CSFPercentile > 0 && an.CSFPercentile <= 100) {
		p.addf("audit.analysis.csf_percentile", "%v is outside (0, 100]", an.CSFPercentile)
	}
	if !(an.FreeWaterCeiling > 0 && an.FreeWaterCeiling <= maxPlausibleADC) {
		p.addf("audit.analysis.free_water_ceiling", "%v is not an ADC in mm²/s (0 < ADC <= %v)", an.FreeWaterCeiling, maxPlausibleADC)
	} else if an.ParenchymaADCMax >= an.FreeWaterCeiling {
		p.addf("audit.analysis.parenchyma_adc_max", "%v is not below free_water_ceiling %v", an.ParenchymaADCMax, an.FreeWaterCeiling)
	}
}

// unique checks that a list entry's name is not another entry's (an
// empty name is the rules' validation's to report).
func (p *problems) unique(field, name string, i int, seen map[string]int, list string) {
	switch j, dup := seen[name]; {
	case strings.TrimSpace(name) == "":
	case dup:
		p.addf(field, "%q is also %s[%d]'s name", name, list, j)
	default:
		seen[name] = i
	}
}

// LoadAuditFile reads a node configuration file for `dwiaudit
// check`: only the audit: section counts, so problems of other sections
// are not reported.
func LoadAuditFile(path string) (Audit, error) {
	c, err := LoadFile(path)
	var ce *Error
	if !errors.As(err, &ce) {
		return c.Audit, err
	}
	var kept []string
	for _, pr := range ce.Problems {
		if !otherSection(pr) {
			kept = append(kept, pr)
		}
	}
	if len(kept) == 0 {
		return c.Audit, nil
	}
	return c.Audit, &Error{File: ce.File, Problems: kept}
}

// otherSection says whether a problem names a field outside audit:.
func otherSection(problem string) bool {
	for _, s := range []string{"node", "peers", "limits", "retention", "log"} {
		if strings.HasPrefix(problem, s+".") || strings.HasPrefix(problem, s+"[") || strings.HasPrefix(problem, s+":") {
			return true
		}
	}
	return false
}
