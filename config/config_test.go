package config

import (
	"errors"
	"log/slog"
	"net"
	"net/netip"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"
)

func TestDefaultConfigIsValidAndFresh(t *testing.T) {
	c := Default()
	if err := c.Validate(); err != nil {
		t.Fatalf("Default().Validate() = %v", err)
	}
	// The defaults the issue names for running without a file.
	if c.Node.DataDir != "./dwiaudit-data" || c.Node.DICOMListen != ":11112" || c.Node.HTTPListen != "127.0.0.1:8080" || c.Node.AETitle != "DWIAUDIT" {
		t.Errorf("node defaults %+v", c.Node)
	}
	if c.Retention.InstanceFiles != Duration(30*24*time.Hour) {
		t.Errorf("retention %v, want 30 days", c.Retention.InstanceFiles)
	}
	c.Peers = append(c.Peers, Peer{AETitle: "X"})
	if len(Default().Peers) != 0 {
		t.Error("Default shares its peers slice between calls")
	}
}

func TestValidateListsEveryProblemByField(t *testing.T) {
	c := Default()
	c.Node.AETitle = ""
	c.Node.DICOMListen = "11112"
	c.Node.HTTPListen = "127.0.0.1:http-ish"
	c.Node.DataDir = ""
	c.Node.TimeZone = "Mars/Olympus"
	c.Peers = []Peer{
		{AETitle: "QOH_MR1", Scanner: "qoh-mr1", Networks: []string{"10.20.0.0/16", "10.30.0.0"}},
		{AETitle: "QOH_MR1", Scanner: "QOH MR1"},
		{AETitle: "QOH_MR3", Scanner: ""},
		{AETitle: "QOH_MR4", Scanner: strings.Repeat("a", 33)},
	}
	c.Limits.MaxAssociations = 0
	c.Limits.MaxPDULength = 1024
	c.Limits.ARTIMTimeout = Duration(10 * time.Millisecond)
	c.Limits.IdleTimeout = 0
	c.Limits.WriteTimeout = Duration(-time.Second)
	c.Retention.InstanceFiles = Duration(time.Minute)
	c.Retention.PruneInterval = Duration(time.Second)

	err := c.Validate()
	var ce *Error
	if !errors.As(err, &ce) {
		t.Fatalf("Validate() = %v, want a *Error", err)
	}
	want := []string{
		"node.ae_title: ",
		`node.dicom_listen: "11112" is not host:port`,
		`node.http_listen: "127.0.0.1:http-ish": port "http-ish" is not a number in 0..65535`,
		"node.data_dir: empty",
		`node.time_zone: unknown time zone "Mars/Olympus"`,
		`peers[0].networks[1]: "10.30.0.0" is not a network in CIDR notation`,
		`peers[1].ae_title: duplicate of peers[0].ae_title "QOH_MR1"`,
		`peers[1].scanner: "QOH MR1": use lower-case letters`,
		"peers[2].scanner: missing",
		`peers[3].scanner: "aaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaa" is longer than 32 characters`,
		"limits.max_associations: 0 is below 1",
		"limits.max_pdu_length: 1024 is below 4096", // scp.MinPDULength
		"limits.artim_timeout: 10ms is below 1s",
		"limits.idle_timeout: 0s is below 1s",
		"limits.write_timeout: -1s is below 1s",
		"retention.instance_files: 1m0s is below 1h0m0s",
		"retention.prune_interval: 1s is below 1m0s",
	}
	if len(ce.Problems) != len(want) {
		t.Errorf("%d problems, want %d:\n  %s", len(ce.Problems), len(want), strings.Join(ce.Problems, "\n  "))
	}
	for i, w := range want {
		if i < len(ce.Problems) && !strings.HasPrefix(ce.Problems[i], w) {
			t.Errorf("problem %d is %q, want it to start %q", i, ce.Problems[i], w)
		}
	}
}

func TestParseConfigNamesTheFieldOfEveryDecodingProblem(t *testing.T) {
	yaml := `node: {ae_title: QOH_NODE, dicom_listen: ":104", time_zon: UTC}
peers:
  - {ae_title: QOH_MR1, scanner: qoh-mr1-1.5t, networks: ["10.20.0.0/16"]}
  - ae_title: QOH_MR2
    scanner: qoh-mr2
    netwerks: ["10.0.0.0/8"]
limits:
  max_associations: many
  max_pdu_length: 64KB
  idle_timeout: 2 minutes
  disk_floor: 3GiB
retention: {instance_files: 720h, prune_interval: soon}
log: {level: loud, format: xml}
`
	c, err := Parse("node.yaml", []byte(yaml))
	var ce *Error
	if !errors.As(err, &ce) {
		t.Fatalf("Parse = %v, want a *Error", err)
	}
	if ce.File != "node.yaml" {
		t.Errorf("File %q, want node.yaml", ce.File)
	}
	want := []string{
		"node.time_zon: unknown field (line 1)",
		"peers[1].netwerks: unknown field (line 6)",
		"limits.max_associations: cannot unmarshal !!str `many` into int (line 8)", // go.yaml.in/yaml/v3's message
		"limits.max_pdu_length: cannot use `64KB`: not a size such as 262144, 256KiB or 2GiB (line 9)",
		"limits.idle_timeout: cannot use `2 minutes`: not a duration such as 30s, 2m or 720h (line 10)",
		"retention.prune_interval: cannot use `soon`: not a duration such as 30s, 2m or 720h (line 12)",
		"log.level: cannot use `loud`: not a log level: use debug, info, warn or error (line 13)",
		"log.format: cannot use `xml`: not a log format: use text or json (line 13)",
	}
	if !slices.Equal(ce.Problems, want) {
		t.Errorf("problems:\n  %s\nwant:\n  %s", strings.Join(ce.Problems, "\n  "), strings.Join(want, "\n  "))
	}
	// What did decode is kept, over the defaults.
	if c.Node.AETitle != "QOH_NODE" || c.Limits.DiskFloor != 3<<30 || len(c.Peers) != 2 || c.Peers[0].Scanner != "qoh-mr1-1.5t" {
		t.Errorf("decoded %+v", c)
	}
}

func TestParseConfigAcceptsPartialAndEmptyFiles(t *testing.T) {
	tests := []struct {
		name  string
		yaml  string
		check func(Config) bool
	}{
		{"an empty file gives the defaults", "", func(c Config) bool { return c.Node.AETitle == "DWIAUDIT" }},
		{"a file of comments gives the defaults", "# nothing here\n", func(c Config) bool { return c.Limits.MaxAssociations == 32 }},
		{"one key changes only that key", "limits:\n  disk_floor: 512MiB\n", func(c Config) bool {
			return c.Limits.DiskFloor == 512<<20 && c.Limits.MaxPDULength == 256<<10
		}},
		{"a size may be plain bytes", "limits: {max_pdu_length: 65536}\n", func(c Config) bool { return c.Limits.MaxPDULength == 65536 }},
		{"levels and formats take slog's names", "log: {level: DEBUG, format: json}\n", func(c Config) bool {
			return slog.Level(c.Log.Level) == slog.LevelDebug && c.Log.Format == LogJSON
		}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			c, err := Parse("x.yaml", []byte(tt.yaml))
			if err != nil {
				t.Fatal(err)
			}
			if !tt.check(c) {
				t.Errorf("decoded %+v", c)
			}
		})
	}
}

func TestExampleConfigParsesAndValidates(t *testing.T) {
	path := filepath.Join("..", "deploy", "dwiaudit.example.yaml")
	c, err := LoadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	// The example shows the defaults; keep them in step.
	d := Default()
	if c.Node != d.Node || c.Limits != d.Limits || c.Retention != d.Retention || c.Log != d.Log || len(c.Peers) != 0 {
		t.Errorf("the example's values differ from Default:\n got %+v\nwant %+v", c, d)
	}
	// Its commented peers must parse too once uncommented.
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	text := strings.Replace(string(b), "peers: []\n#", "peers:\n ", 1)
	text = strings.ReplaceAll(text, "\n#  ", "\n   ")
	c, err = Parse(path, []byte(text))
	if err != nil {
		t.Fatalf("with the peers uncommented: %v", err)
	}
	if len(c.Peers) != 2 || c.Peers[0].Scanner != "qoh-mr1-1.5t" || c.Peers[0].Networks[0] != "10.20.0.0/16" {
		t.Errorf("peers %+v", c.Peers)
	}
}

func TestByteSizeParsesAndPrintsBinaryUnits(t *testing.T) {
	tests := []struct {
		in   string
		want ByteSize
		str  string
	}{
		{"262144", 262144, "256KiB"},
		{"256KiB", 256 << 10, "256KiB"},
		{"2GiB", 2 << 30, "2GiB"},
		{"1 TiB", 1 << 40, "1TiB"},
		{"100B", 100, "100"},
		{"4097", 4097, "4097"},
		{"0", 0, "0"},
	}
	for _, tt := range tests {
		t.Run(tt.in+" is "+tt.str, func(t *testing.T) {
			got, err := parseByteSize(tt.in)
			if err != nil || got != tt.want {
				t.Fatalf("parseByteSize(%q) = %d, %v; want %d", tt.in, got, err, tt.want)
			}
			if got.String() != tt.str {
				t.Errorf("String() = %q, want %q", got.String(), tt.str)
			}
		})
	}
	for _, bad := range []string{"", "2GB", "-1", "1.5GiB", "KiB", "99999999999TiB"} {
		t.Run(bad+" is refused", func(t *testing.T) {
			if _, err := parseByteSize(bad); err == nil {
				t.Errorf("parseByteSize(%q) succeeded", bad)
			}
		})
	}
}

func TestPeerTableAllowsOnlyKnownAETitlesFromTheirNetworks(t *testing.T) {
	peers := NewPeerTable([]Peer{
		{AETitle: "QOH_MR1", Scanner: "qoh-mr1", Networks: []string{"10.20.0.0/16", "fd00::/8"}},
		{AETitle: "QOH_MR2", Scanner: "qoh-mr2"},
	})
	tcp := func(s string) net.Addr { return net.TCPAddrFromAddrPort(netip.MustParseAddrPort(s)) }
	tests := []struct {
		name   string
		ae     string
		remote net.Addr
		want   bool
	}{
		{"a peer inside its network is allowed", "QOH_MR1", tcp("10.20.3.4:5000"), true},
		{"a peer outside its network is refused", "QOH_MR1", tcp("10.21.3.4:5000"), false},
		{"a peer inside its IPv6 network is allowed", "QOH_MR1", tcp("[fd12::1]:104"), true},
		{"an IPv4-mapped address matches its IPv4 network", "QOH_MR1", tcp("[::ffff:10.20.0.9]:104"), true},
		{"a peer without networks is allowed from anywhere", "QOH_MR2", tcp("192.0.2.1:104"), true},
		{"an unknown AE title is refused", "QOH_MR9", tcp("10.20.3.4:5000"), false},
		{"AE titles match without their padding", "QOH_MR2 ", tcp("192.0.2.1:104"), true},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if got := peers.Allow(tt.ae, tt.remote); got != tt.want {
				t.Errorf("Allow(%q, %v) = %v, want %v", tt.ae, tt.remote, got, tt.want)
			}
		})
	}
	if got := peers.Scanner("QOH_MR2"); got != "qoh-mr2" {
		t.Errorf("Scanner(QOH_MR2) = %q", got)
	}
	if got := NewPeerTable(nil).Allow("ANYONE", tcp("192.0.2.1:104")); !got {
		t.Error("with no peers configured, a calling AE title was refused")
	}
	if got := peers.CallingAETitles(); !slices.Equal(got, []string{"QOH_MR1", "QOH_MR2"}) {
		t.Errorf("CallingAETitles() = %v", got)
	}
}

func TestParseGivesTheLineOfEveryValueProblemTheFileSets(t *testing.T) {
	yaml := "node:\n  ae_title: QOH_NODE\nlimits:\n  max_pdu_length: 1024\npeers:\n  - ae_title: QOH_MR1\n    scanner: \"QOH MR1\"\n"
	_, err := Parse("node.yaml", []byte(yaml))
	var ce *Error
	if !errors.As(err, &ce) {
		t.Fatalf("Parse = %v, want a *Error", err)
	}
	want := []string{
		"peers[0].scanner: \"QOH MR1\": use lower-case letters, digits, '.', '_' and '-', starting with a letter or digit (line 7)",
		"limits.max_pdu_length: 1024 is below 4096 (line 4)",
	}
	if !slices.Equal(ce.Problems, want) {
		t.Errorf("problems:\n  %s\nwant:\n  %s", strings.Join(ce.Problems, "\n  "), strings.Join(want, "\n  "))
	}
}

func TestLoadListsEachProblemOnceWithTheOverridesApplied(t *testing.T) {
	path := filepath.Join(t.TempDir(), "node.yaml")
	if err := os.WriteFile(path, []byte("limits:\n  max_pdu_length: 1024\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	_, err := Load(path, func(c *Config) []string {
		c.Node.AETitle = ""
		return []string{"--log-level: \"chatty\" is not a log level"}
	})
	var ce *Error
	if !errors.As(err, &ce) {
		t.Fatalf("Load = %v, want a *Error", err)
	}
	want := []string{
		"limits.max_pdu_length: 1024 is below 4096 (line 2)",
		"node.ae_title: ",
		"--log-level: ",
	}
	if len(ce.Problems) != len(want) {
		t.Fatalf("problems:\n  %s\nwant %d", strings.Join(ce.Problems, "\n  "), len(want))
	}
	for i, w := range want {
		if !strings.HasPrefix(ce.Problems[i], w) {
			t.Errorf("problem %d = %q, want prefix %q", i, ce.Problems[i], w)
		}
	}
	c, err := Load("", nil)
	if err != nil || c.Node.AETitle != "DWIAUDIT" {
		t.Errorf("Load without a file = %+v, %v; want the defaults", c.Node, err)
	}
}

func TestAcceptorCarriesTheNodeThePeersAndTheLimits(t *testing.T) {
	c := Default()
	c.Node.AETitle = "QOH_NODE"
	c.Peers = []Peer{{AETitle: "QOH_MR2", Scanner: "qoh-mr2"}, {AETitle: "QOH_MR1", Scanner: "qoh-mr1", Networks: []string{"10.20.0.0/16"}}}
	c.Limits.MaxAssociations = 7
	c.Limits.MaxPDULength = 64 << 10
	c.Limits.ARTIMTimeout = Duration(7 * time.Second)
	c.Limits.IdleTimeout = Duration(8 * time.Second)
	c.Limits.WriteTimeout = Duration(9 * time.Second)
	srv, peers := c.Acceptor()
	if srv.AETitle != "QOH_NODE" || srv.MaxAssociations != 7 || srv.MaxPDULength != 64<<10 ||
		srv.ARTIMTimeout != 7*time.Second || srv.IdleTimeout != 8*time.Second || srv.WriteTimeout != 9*time.Second {
		t.Errorf("acceptor %+v", srv)
	}
	if !slices.Equal(srv.AllowedCallingAETitles, []string{"QOH_MR1", "QOH_MR2"}) {
		t.Errorf("AllowedCallingAETitles %v", srv.AllowedCallingAETitles)
	}
	outside := net.TCPAddrFromAddrPort(netip.MustParseAddrPort("10.21.0.1:104"))
	if srv.AllowCalling == nil || srv.AllowCalling("QOH_MR1", outside) {
		t.Error("QOH_MR1 allowed from outside its network")
	}
	if peers.Scanner("QOH_MR2") != "qoh-mr2" {
		t.Errorf("scanner of QOH_MR2 = %q", peers.Scanner("QOH_MR2"))
	}
}
