package deploy

import (
	"bufio"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"
)

// unitFile is a parsed systemd unit or drop-in: section -> key -> every
// assignment in order (systemd.syntax(7)).
type unitFile map[string]map[string][]string

// last is the value systemd uses for a key that is assigned once, and
// for a list key after an empty assignment resets it.
func (u unitFile) last(section, key string) (string, bool) {
	vs := u[section][key]
	if len(vs) == 0 {
		return "", false
	}
	return vs[len(vs)-1], true
}

// parseUnit reads systemd's ini-style syntax: [Section] headers,
// Key=Value lines, comments starting with # or ;, and lines continued by
// a trailing backslash (systemd.syntax(7)).
func parseUnit(text string) (unitFile, error) {
	u := unitFile{}
	section := ""
	sc := bufio.NewScanner(strings.NewReader(text))
	var pending string
	lineNo := 0
	for sc.Scan() {
		lineNo++
		line := strings.TrimSpace(sc.Text())
		if pending == "" && (line == "" || line[0] == '#' || line[0] == ';') {
			continue
		}
		if strings.HasSuffix(line, `\`) {
			pending += strings.TrimSuffix(line, `\`) + " "
			continue
		}
		line, pending = pending+line, ""
		if strings.HasPrefix(line, "[") {
			if !strings.HasSuffix(line, "]") {
				return nil, fmt.Errorf("line %d: bad section header %q", lineNo, line)
			}
			section = line[1 : len(line)-1]
			if u[section] == nil {
				u[section] = map[string][]string{}
			}
			continue
		}
		key, value, ok := strings.Cut(line, "=")
		if !ok || section == "" {
			return nil, fmt.Errorf("line %d: %q is not Key=Value inside a section", lineNo, line)
		}
		key = strings.TrimSpace(key)
		u[section][key] = append(u[section][key], strings.TrimSpace(value))
	}
	return u, sc.Err()
}

func readUnit(t *testing.T, path string) unitFile {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	u, err := parseUnit(string(b))
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	return u
}

// parseTimespan reads the systemd time spans the unit uses: a bare
// number is seconds; units us, ms, s, min, h (systemd.time(7)).
func parseTimespan(s string) (time.Duration, error) {
	var total time.Duration
	for _, part := range strings.Fields(s) {
		i := strings.IndexFunc(part, func(r rune) bool { return (r < '0' || r > '9') && r != '.' })
		num, unit := part, "s"
		if i >= 0 {
			num, unit = part[:i], part[i:]
		}
		f, err := strconv.ParseFloat(num, 64)
		if err != nil {
			return 0, fmt.Errorf("time span %q: %w", s, err)
		}
		mult := map[string]time.Duration{"us": time.Microsecond, "ms": time.Millisecond, "s": time.Second, "sec": time.Second,
			"m": time.Minute, "min": time.Minute, "h": time.Hour, "hr": time.Hour}[unit]
		if mult == 0 {
			return 0, fmt.Errorf("time span %q: unknown unit %q", s, unit)
		}
		total += time.Duration(f * float64(mult))
	}
	return total, nil
}

// serveShutdownGrace is cmd/dwiaudit/serve.go's shutdownGrace: how long
// a stop waits for C-STOREs in flight. The unit's TimeoutStopSec must
// outlast it.
const serveShutdownGrace = time.Minute

func TestTheServiceUnitRunsTheNodeHardened(t *testing.T) {
	u := readUnit(t, "dwiaudit.service")
	for _, c := range []struct{ key, want, why string }{
		{"ExecStart", "/usr/local/bin/dwiaudit serve --config /etc/dwiaudit/dwiaudit.yaml", "the installed binary on the installed configuration"},
		{"User", "dwiaudit", "its own user"},
		{"StateDirectory", "dwiaudit", "/var/lib/dwiaudit, writable under ProtectSystem=strict"},
		{"Restart", "on-failure", "a crash restarts it"},
		{"RestartPreventExitStatus", "2", "an invalid configuration does not loop"},
		{"NoNewPrivileges", "yes", "hardening"},
		{"ProtectSystem", "strict", "hardening"},
		{"ProtectHome", "yes", "hardening"},
		{"PrivateTmp", "yes", "hardening"},
		{"PrivateDevices", "yes", "hardening"},
		{"ProtectKernelTunables", "yes", "hardening"},
		{"ProtectKernelModules", "yes", "hardening"},
		{"ProtectKernelLogs", "yes", "hardening"},
		{"RestrictAddressFamilies", "AF_INET AF_INET6 AF_UNIX", "TCP for DICOM and HTTP, Unix sockets for journald"},
		{"CapabilityBoundingSet", "", "no capability at all on the default ports"},
		{"AmbientCapabilities", "", "no capability at all on the default ports"},
		{"LockPersonality", "yes", "hardening"},
		{"MemoryDenyWriteExecute", "yes", "hardening; Go needs no writable executable memory"},
		{"SystemCallFilter", "@system-service", "hardening"},
	} {
		t.Run(fmt.Sprintf("[Service] %s is %q: %s", c.key, c.want, c.why), func(t *testing.T) {
			got, ok := u.last("Service", c.key)
			if !ok || got != c.want {
				t.Errorf("%s=%q (set: %v), want %q", c.key, got, ok, c.want)
			}
		})
	}
	t.Run("the stop timeout outlasts the node's grace for C-STOREs in flight and is at least 90 s", func(t *testing.T) {
		v, ok := u.last("Service", "TimeoutStopSec")
		if !ok {
			t.Fatal("TimeoutStopSec not set")
		}
		d, err := parseTimespan(v)
		if err != nil {
			t.Fatal(err)
		}
		if d < 90*time.Second || d <= serveShutdownGrace {
			t.Errorf("TimeoutStopSec=%s (%v), want at least 90 s and more than %v", v, d, serveShutdownGrace)
		}
	})
	t.Run("the file-descriptor limit is a number above the default 1024", func(t *testing.T) {
		v, _ := u.last("Service", "LimitNOFILE")
		n, err := strconv.Atoi(v)
		if err != nil || n <= 1024 {
			t.Errorf("LimitNOFILE=%q, want a number above 1024", v)
		}
	})
	t.Run("it starts with the machine", func(t *testing.T) {
		if v, _ := u.last("Install", "WantedBy"); v != "multi-user.target" {
			t.Errorf("WantedBy=%q, want multi-user.target", v)
		}
	})
}

func TestThePort104DropInAddsOnlyTheBindCapability(t *testing.T) {
	u := readUnit(t, filepath.Join("dwiaudit.service.d", "port-104.conf"))
	want := map[string]string{
		"AmbientCapabilities":   "CAP_NET_BIND_SERVICE",
		"CapabilityBoundingSet": "CAP_NET_BIND_SERVICE",
	}
	if len(u) != 1 || len(u["Service"]) != len(want) {
		t.Errorf("drop-in holds %v, want only [Service] with %v", u, want)
	}
	for k, v := range want {
		if got, _ := u.last("Service", k); got != v {
			t.Errorf("%s=%q, want %q", k, got, v)
		}
	}
}

func TestParseUnitReadsSystemdSyntax(t *testing.T) {
	for _, c := range []struct {
		name, text, section, key, want string
		wantErr                        bool
	}{
		{name: "a comment line is not a key", text: "[Service]\n# User=root\nUser=dwiaudit\n", section: "Service", key: "User", want: "dwiaudit"},
		{name: "a continued line is one value", text: "[Service]\nExecStart=/bin/x \\\n  --flag\n", section: "Service", key: "ExecStart", want: "/bin/x  --flag"},
		{name: "the last assignment wins", text: "[Service]\nCapabilityBoundingSet=CAP_X\nCapabilityBoundingSet=\n", section: "Service", key: "CapabilityBoundingSet", want: ""},
		{name: "a key outside a section is an error", text: "User=x\n", wantErr: true},
	} {
		t.Run(c.name, func(t *testing.T) {
			u, err := parseUnit(c.text)
			if c.wantErr {
				if err == nil {
					t.Fatalf("no error for %q", c.text)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if got, _ := u.last(c.section, c.key); got != c.want {
				t.Errorf("%s=%q, want %q", c.key, got, c.want)
			}
		})
	}
}

// verifyUnit runs systemd-analyze verify on a copy of the unit and its
// port-104 drop-in in a temporary folder, with ExecStart pointing at an
// executable that exists here (verify refuses a missing binary, and
// /usr/local/bin/dwiaudit is not installed on a test machine), and
// returns what it said. extra is appended to the unit's [Service].
func verifyUnit(t *testing.T, analyze, extra string) (string, error) {
	t.Helper()
	unit, err := os.ReadFile("dwiaudit.service")
	if err != nil {
		t.Fatal(err)
	}
	dropIn, err := os.ReadFile(filepath.Join("dwiaudit.service.d", "port-104.conf"))
	if err != nil {
		t.Fatal(err)
	}
	self, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	text := strings.Replace(string(unit), "ExecStart=/usr/local/bin/dwiaudit ", "ExecStart="+self+" ", 1)
	text = strings.Replace(text, "[Service]\n", "[Service]\n"+extra, 1)
	dir := t.TempDir()
	if err := os.MkdirAll(filepath.Join(dir, "dwiaudit.service.d"), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "dwiaudit.service"), []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "dwiaudit.service.d", "port-104.conf"), dropIn, 0o644); err != nil {
		t.Fatal(err)
	}
	out, err := exec.Command(analyze, "verify", "--man=no", filepath.Join(dir, "dwiaudit.service")).CombinedOutput()
	// Keep only what concerns our files: verify may also speak about
	// units of the host.
	var ours []string
	for _, l := range strings.Split(string(out), "\n") {
		if strings.Contains(l, dir) || strings.Contains(l, "dwiaudit") {
			ours = append(ours, l)
		}
	}
	return strings.Join(ours, "\n"), err
}

func TestSystemdAnalyzeVerifiesTheUnit(t *testing.T) {
	// Not required in CI: the test machine may have no systemd at all.
	analyze, err := exec.LookPath("systemd-analyze")
	if err != nil {
		t.Skip("systemd-analyze not found (Debian package systemd); the unit's keys are still checked by TestTheServiceUnitRunsTheNodeHardened")
	}
	t.Run("the unit and its drop-in verify without a word", func(t *testing.T) {
		out, err := verifyUnit(t, analyze, "")
		if err != nil || out != "" {
			t.Errorf("systemd-analyze verify: %v\n%s", err, out)
		}
	})
	t.Run("a misspelt key is reported, so the check above can fail", func(t *testing.T) {
		out, _ := verifyUnit(t, analyze, "ProtectHomee=yes\n")
		if !strings.Contains(out, "ProtectHomee") {
			t.Errorf("systemd-analyze verify said nothing about a misspelt key:\n%s", out)
		}
	})
}
