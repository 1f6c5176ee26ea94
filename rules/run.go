package rules

import (
	"errors"
	"fmt"

	"dwiaudit/audit/analysis"
	"dwiaudit/audit/dwi"
)

// NewSeriesAudit wraps one assembled series and its computation for the
// rules, matching it against the configuration: phantom profiles first
// (a phantom is judged as a phantom, never against a tissue protocol),
// then protocols. res may be nil and err non-nil when the computation
// failed; s may be nil for a series that could not be assembled (err
// then says why, ideally a *dwi.SeriesError).
func NewSeriesAudit(cfg *Config, s *dwi.Series, res *analysis.Result, err error) *SeriesAudit {
	sa := &SeriesAudit{Series: s, Result: res, Err: err}
	if s != nil {
		if sa.Phantom = cfg.MatchPhantom(s); sa.Phantom == nil {
			sa.Protocol = cfg.MatchProtocol(s)
		}
	}
	return sa
}

// Computed says whether the series' maps and measures exist: the
// computation ran without error and did not report CannotCompute. Rules
// on measures judge only computed series; rules on the acquisition
// (b0, b-values, slices, geometry) judge every assembled series.
func (sa *SeriesAudit) Computed() bool {
	return sa != nil && sa.Series != nil && sa.Err == nil && sa.Result != nil && sa.Result.CannotCompute == ""
}

// NewFinding starts a finding of rule on sa's series: the UIDs, series
// number and description and the scanner label filled in, the message
// and values left to the rule.
func NewFinding(sa *SeriesAudit, rule string, sev Severity) Finding {
	f := Finding{Rule: rule, Severity: sev}
	if sa == nil {
		return f
	}
	if s := sa.Series; s != nil {
		f.StudyUID = s.StudyInstanceUID
		f.SeriesUID = s.SeriesInstanceUID
		f.SeriesNumber = s.SeriesNumber
		f.SeriesDescription = s.SeriesDescription
		f.Scanner = scannerLabel(s.Scanner)
		return f
	}
	var se *dwi.SeriesError
	if errors.As(sa.Err, &se) {
		f.SeriesUID, f.SeriesNumber = se.SeriesInstanceUID, se.SeriesNumber
	}
	return f
}

// scannerLabel is the configured label, else the Station Name: what
// reports and metrics group by. Never patient data.
func scannerLabel(s dwi.Scanner) string {
	if s.Label != "" {
		return s.Label
	}
	return s.StationName
}

// AuditFailed is the finding for a series that could not be audited
// (unreadable or compressed pixel data, a failed assembly or
// computation, a rule that panicked), with the reason in plain words.
// Severity warning: nothing is known about the series' ADC either way,
// which the department must hear of but which is not itself a defect of
// the acquisition. When sa.Series is nil the UIDs come from a
// *dwi.SeriesError in sa.Err; the study UID is then left for the caller
// to set.
func AuditFailed(sa *SeriesAudit, reason string) Finding {
	f := NewFinding(sa, IDAuditFailed, SeverityWarning)
	f.Message = "this series could not be audited: " + reason +
		". Its ADC map was not checked; nothing is known about whether it can be trusted."
	f.Measured = reason
	f.Expected = "a series the audit can read and compute"
	return f
}

// ImagesUnreadable is the audit-failed finding of files of a series that
// could not be read while the rest of it was audited: the series was
// judged without them.
func ImagesUnreadable(sa *SeriesAudit, reason string) Finding {
	f := NewFinding(sa, IDAuditFailed, SeverityWarning)
	f.Message = "images of this series could not be read and were left out: " + reason +
		". The rest of the series was audited without them; what they held was not checked."
	f.Measured = reason
	f.Expected = "every image of the series readable"
	return f
}

// Run runs the rules the configuration enables on one study and returns
// their findings, severity overrides applied (Apply). A rule that panics
// does not stop the others: each series of the study gets an
// audit-failed finding naming the rule and the panic, since that rule's
// verdict on it is missing. Run does not emit audit-failed for series
// with Err or CannotCompute: the pipeline does, with the reason it knows.
func Run(rs []Rule, s *Study, cfg *Config) []Finding {
	var out []Finding
	for _, r := range rs {
		if !cfg.Enabled(r.ID()) {
			continue
		}
		out = append(out, runOne(r, s, cfg)...)
	}
	return Apply(cfg, out)
}

// runOne runs one rule, turning a panic into audit-failed findings.
func runOne(r Rule, s *Study, cfg *Config) (fs []Finding) {
	defer func() {
		p := recover()
		if p == nil {
			return
		}
		reason := fmt.Sprintf("rule %s failed (panic: %v)", r.ID(), p)
		fs = nil
		if s == nil || len(s.Series) == 0 {
			f := AuditFailed(nil, reason)
			if s != nil {
				f.StudyUID = s.StudyUID
			}
			fs = append(fs, f)
			return
		}
		for _, sa := range s.Series {
			f := AuditFailed(sa, reason)
			if f.StudyUID == "" {
				f.StudyUID = s.StudyUID
			}
			fs = append(fs, f)
		}
	}()
	return r.Check(s, cfg)
}
