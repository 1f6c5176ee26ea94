// Package suite is the planted-defect suite and what is built on it:
// synthetic studies that each must fire one rule (one phantom case, or
// a clean study with a damaged file, per rule) and clean ones, sent to
// a node with C-STORE like a scanner would, and the node's audits of
// them awaited over its HTTP API and compared. The installation
// self-test (Selftest, `dwiaudit selftest`) sends the suite once; the
// demonstration (Scenario, `dwiaudit demo`) spreads it over an invented
// hospital's scanners and days.
package suite

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"net/http"
	"os"
	"slices"
	"strings"
	"time"

	"dwiaudit/audit/phantom"
	"dwiaudit/audit/record"
	"dwiaudit/audit/web"
	"dwiaudit/rules"
	"dwiaudit/scp"
	"dwiaudit/scp/part10"
)

// Sizes of the planted-defect studies: the acceptance matrix
// (audit/acceptance_test.go) shows every rule firing at a 64 matrix with
// 12 slices, which keeps a study at about 60 small files and its audit
// well under a second.
const (
	suiteMatrix = 64
	suiteSlices = 12
)

// Polling of the node's audits.
const (
	// auditPollInterval is how often the findings are asked for while
	// waiting: a study audits in well under a second at suiteMatrix.
	auditPollInterval = 200 * time.Millisecond
	// auditStableFor is how long the set of audits of the awaited studies
	// must stay unchanged before it is taken as complete: the pipeline
	// saves a study's series one after another, milliseconds apart.
	auditStableFor = 600 * time.Millisecond
	// httpTimeout bounds one API request.
	httpTimeout = 10 * time.Second
)

// damage is what is done to a written study before it is sent.
type damage int

const (
	damageNone       damage = iota
	damageTruncated         // a DWI file loses its last truncateBytes: pixel data cut short
	damageCompressed        // a DWI file's meta claims JPEG Baseline over native pixel data
)

// truncateBytes is how much a truncated file loses: less than the pixel
// data of one 64x64 16-bit image (8192 bytes), so the header stays
// readable and the node stores the file, and the audit must say why it
// cannot read it.
const truncateBytes = 1000

// jpegBaselineTS is JPEG Baseline (Process 1), an encapsulated transfer
// syntax (PS3.5 A.4, PS3.6 Table A-1): a file claiming it over native
// pixels must be reported as not auditable, never decoded as if native.
const jpegBaselineTS = "1.2.840.10008.1.2.4.50"

// plant is one planted-defect study: which rule it must fire (none for a
// clean study), from which phantom case and damage.
type plant struct {
	name   string // our name for it, shown in the output
	rule   string // the rule that must fire; "" for a clean study
	cse    phantom.Case
	damage damage
}

// rulePlants is one planted defect per rule ID (rules/ids.go), in the
// order of the rules' documentation, as audit/acceptance_test.go
// proves each fires.
func rulePlants() []plant {
	return []plant{
		{"no-b0", rules.IDMissingB0, phantom.CaseNoB0, damageNone},
		{"bvalue-set-differs", rules.IDBValueMismatch, phantom.CaseBValueSetDiffers, damageNone},
		{"missing-slices", rules.IDIncompleteSeries, phantom.CaseMissingSlices, damageNone},
		{"slice-positions-differ", rules.IDGeometryMismatch, phantom.CaseSlicePositions, damageNone},
		{"bvalue-header-wrong", rules.IDADCOutOfRange, phantom.CaseBValueHeaderWrong, damageNone},
		{"b0-artifact-dropout", rules.HotspotID, phantom.CaseB0ArtifactDropout, damageNone},
		{"low-snr", rules.IDLowSNR, phantom.CaseLowSNR, damageNone},
		{"scanner-adc-misscaled", rules.IDScannerADCDisagrees, phantom.CaseScannerADCScaled, damageNone},
		{"ice-water-warm", rules.IDPhantomADCBias, phantom.CaseIceWaterWarm, damageNone},
		{"truncated-file", rules.IDAuditFailed, phantom.CaseClean, damageTruncated},
	}
}

// cleanPlant is the clean brain: no warning or error expected.
func cleanPlant() plant { return plant{"clean", "", phantom.CaseClean, damageNone} }

// RuleIDs is every rule ID the suite plants a defect for, in the order
// of the rules' documentation.
func RuleIDs() []string {
	var out []string
	for _, p := range rulePlants() {
		out = append(out, p.rule)
	}
	return out
}

// writePlant writes the study of p into dir with opt (Case is set from
// p) and damages it as p says.
func writePlant(dir string, p plant, opt phantom.Options) (*phantom.Study, error) {
	opt.Case = p.cse
	st, err := phantom.Write(dir, opt)
	if err != nil {
		return nil, fmt.Errorf("writing study %s: %w", p.name, err)
	}
	switch p.damage {
	case damageTruncated:
		err = truncateFile(dwiFileOf(st))
	case damageCompressed:
		err = claimTransferSyntax(dwiFileOf(st), jpegBaselineTS)
	}
	if err != nil {
		return nil, fmt.Errorf("damaging study %s: %w", p.name, err)
	}
	return st, nil
}

// dwiFileOf is the file of the DWI series to damage: one a third of the
// way in (a directional image in a classic study).
func dwiFileOf(st *phantom.Study) string {
	for _, s := range st.Series {
		if s.Role == phantom.RoleDWI && len(s.Files) > 0 {
			return s.Files[len(s.Files)/3]
		}
	}
	return st.Files[0]
}

func truncateFile(path string) error {
	info, err := os.Stat(path)
	if err != nil {
		return err
	}
	return os.Truncate(path, info.Size()-truncateBytes)
}

// claimTransferSyntax rewrites a file's meta to name ts, leaving the
// data set as it is.
func claimTransferSyntax(path, ts string) error {
	b, err := os.ReadFile(path)
	if err != nil {
		return err
	}
	meta, off, err := part10.ReadMeta(bytes.NewReader(b))
	if err != nil {
		return err
	}
	meta.TransferSyntaxUID = ts
	var out bytes.Buffer
	if err := part10.WriteHeader(&out, meta); err != nil {
		return err
	}
	out.Write(b[off:])
	return os.WriteFile(path, out.Bytes(), 0o644)
}

// sendStudies sends the folders with C-STORE and fails unless every file
// was stored.
func sendStudies(ctx context.Context, d *scp.Dialer, addr string, dirs []string) (scp.SendSummary, error) {
	var firstErr error // guarded by SendFiles: Progress calls are serialized
	progress := func(r scp.SendResult) {
		if firstErr == nil && r.Err != nil {
			firstErr = r.Err
		}
	}
	sum, err := scp.SendFiles(ctx, scp.SendOptions{Dialer: d, Addr: addr, Parallel: 2, Progress: progress}, dirs)
	if err != nil {
		return sum, err
	}
	if firstErr != nil {
		return sum, fmt.Errorf("%d of %d files not stored: %w", sum.Failures, sum.Files, firstErr)
	}
	if sum.Failures > 0 || sum.Sent+sum.Warnings != sum.Files {
		var codes []string
		for st, n := range sum.Statuses {
			codes = append(codes, fmt.Sprintf("%04X x%d", uint16(st), n))
		}
		slices.Sort(codes)
		return sum, fmt.Errorf("%d of %d files not stored (statuses %s)", sum.Failures, sum.Files, strings.Join(codes, ", "))
	}
	return sum, nil
}

// auditView is one series audit as the API shows it, with its findings
// decoded.
type auditView struct {
	web.AuditJSON
	findings []rules.Finding
	measures record.Measures // zero when the audit stored none
}

// worst is the highest severity among the findings, and whether there
// is any.
func (a auditView) worst() (rules.Severity, bool) {
	var w rules.Severity
	for i, f := range a.findings {
		if i == 0 || f.Severity > w {
			w = f.Severity
		}
	}
	return w, len(a.findings) > 0
}

// findingsClient asks a node's HTTP API for audits.
type findingsClient struct {
	base string // http://host:port, no trailing slash
	hc   *http.Client
}

func newFindingsClient(base string) *findingsClient {
	return &findingsClient{base: strings.TrimRight(base, "/"), hc: &http.Client{Timeout: httpTimeout}}
}

// get GETs path from the node and decodes its JSON answer into v.
func (c *findingsClient) get(ctx context.Context, path string, v any) error {
	url := c.base + path
	req, err := http.NewRequestWithContext(ctx, http.MethodGet, url, nil)
	if err != nil {
		return err
	}
	res, err := c.hc.Do(req)
	if err != nil {
		return err
	}
	defer res.Body.Close()
	if res.StatusCode != http.StatusOK {
		var eb web.ErrorBody
		json.NewDecoder(res.Body).Decode(&eb)
		return fmt.Errorf("GET %s: %s %s", url, res.Status, eb.Error)
	}
	if err := json.NewDecoder(res.Body).Decode(v); err != nil {
		return fmt.Errorf("GET %s: %w", url, err)
	}
	return nil
}

// day returns the audits of day (YYYY-MM-DD; "" for the node's today)
// and the day the node answered for.
func (c *findingsClient) day(ctx context.Context, day string) (string, []auditView, error) {
	path := "/api/v1/findings"
	if day != "" {
		path += "?day=" + day
	}
	var body web.FindingsResponse
	if err := c.get(ctx, path, &body); err != nil {
		return "", nil, err
	}
	out := make([]auditView, 0, len(body.Audits))
	for _, a := range body.Audits {
		v := auditView{AuditJSON: a}
		if err := json.Unmarshal(a.Findings, &v.findings); err != nil {
			return "", nil, fmt.Errorf("findings of series %s: %w", a.SeriesUID, err)
		}
		var err error
		if v.measures, _, err = record.DecodeMeasures(a.Measures); err != nil {
			return "", nil, fmt.Errorf("measures of series %s: %w", a.SeriesUID, err)
		}
		out = append(out, v)
	}
	return body.Day, out, nil
}

// errAuditsTimeout: the node did not audit every awaited study in time.
var errAuditsTimeout = errors.New("the node did not audit every study in time")

// awaitAudits polls the node until every study in want has audits and
// the audits of those studies stopped changing, or until deadline. days
// are the audit days to ask for ("" asks for the node's today; every day
// the node names is asked for again after, so that a wait across
// midnight finds the audits of both days). It returns the audits of the
// awaited studies.
func awaitAudits(ctx context.Context, c *findingsClient, days []string, want []string, deadline time.Time) ([]auditView, error) {
	asked := slices.Clone(days)
	var last string
	var stableSince time.Time
	for {
		var got []auditView
		for i := 0; i < len(asked); i++ {
			answered, audits, err := c.day(ctx, asked[i])
			if err != nil {
				return nil, err
			}
			if !slices.Contains(asked, answered) {
				asked = append(asked, answered)
			}
			for _, a := range audits {
				if slices.Contains(want, a.StudyUID) {
					got = append(got, a)
				}
			}
		}
		seen := map[string]bool{}
		var keys []string
		for _, a := range got {
			seen[a.StudyUID] = true
			keys = append(keys, a.SeriesUID+"@"+a.AuditTime.String())
		}
		slices.Sort(keys)
		key := strings.Join(keys, ",")
		complete := len(seen) == len(want)
		now := time.Now()
		switch {
		case !complete || key != last:
			last, stableSince = key, now
		case now.Sub(stableSince) >= auditStableFor:
			return got, nil
		}
		if now.After(deadline) {
			var missing int
			for _, uid := range want {
				if !seen[uid] {
					missing++
				}
			}
			return got, fmt.Errorf("%w: %d of %d studies without an audit", errAuditsTimeout, missing, len(want))
		}
		select {
		case <-ctx.Done():
			return got, ctx.Err()
		case <-time.After(auditPollInterval):
		}
	}
}
