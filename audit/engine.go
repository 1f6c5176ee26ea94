package audit

import (
	"cmp"
	"context"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"log/slog"
	"math"
	"path/filepath"
	"runtime"
	"runtime/debug"
	"slices"
	"strings"
	"sync"

	"dwiaudit/audit/analysis"
	"dwiaudit/audit/dwi"
	"dwiaudit/audit/header"
	"dwiaudit/rules"
	"dwiaudit/scp/part10"
)

// Sentinel errors of package audit. Every error Validate, AuditFiles and
// AuditFrames return wraps one of them, or is an I/O error of a path
// given to AuditFiles, or the context's error.
var (
	// ErrInvalidEngine: an Engine field cannot work (no configuration, a
	// rule without an ID, two rules with one ID, a bad tolerance or
	// analysis setting, too many workers). The message names every
	// field at fault.
	ErrInvalidEngine = errors.New("audit: invalid engine")
)

// Limits of the engine.
const (
	// MaxWorkers bounds Engine.Workers. Each worker holds the pixels of
	// the file it reads or the maps of the series it computes (about
	// 160 MiB for a 300-image 256x256 series); more than 64 would only
	// trade memory for nothing on the machines a node runs on.
	MaxWorkers = 64
)

// Engine audits diffusion series: files or frames in, per-series
// measures and findings out. Set the fields before the first audit and
// leave them alone afterwards; the first audit validates them once
// (Validate), and an Engine is then safe for concurrent audits.
type Engine struct {
	// Rules are run on every study, each with panic recovery.
	Rules []rules.Rule
	// Config is what the rules read: protocols, phantom profiles,
	// per-rule settings, thresholds.
	Config *rules.Config
	// Analysis tunes the computation (analysis.Analyze).
	Analysis analysis.AnalyzeConfig
	// Tolerances tune volume assembly (dwi.AssembleStudy).
	Tolerances dwi.Tolerances
	// Extract tunes file reading (header.ExtractFile) in AuditFiles:
	// private b-value sources, scanner labels. Pixels are always loaded.
	Extract header.ExtractOptions
	// Logger gets a line per rule that panics and per study that could
	// not be assembled; UIDs and rule IDs only, never patient data. Nil
	// discards.
	Logger *slog.Logger
	// Workers is how many files are read, and how many series computed,
	// at once (1..MaxWorkers).
	Workers int
	// KeepStudies keeps every audited study, pixels and maps included,
	// in Report.Studies (for previews). Off, AuditFiles holds one
	// study's pixels at a time.
	KeepStudies bool

	once     sync.Once
	readyErr error
}

// NewEngine returns an engine that runs rs against cfg with the audit's
// default analysis, tolerances and extraction, one worker per CPU (at
// most MaxWorkers).
func NewEngine(rs []rules.Rule, cfg *rules.Config) *Engine {
	return &Engine{
		Rules:      rs,
		Config:     cfg,
		Analysis:   analysis.DefaultAnalyzeConfig(),
		Tolerances: dwi.DefaultTolerances(),
		Workers:    min(runtime.GOMAXPROCS(0), MaxWorkers),
	}
}

// Validate reports every problem of the engine's fields at once. It
// prepares the configuration for matching (rules.Config.Validate), so it
// must not run while an audit is running; the audits call it themselves,
// once.
func (e *Engine) Validate() error {
	var errs []error
	bad := func(field string, err error) {
		errs = append(errs, fmt.Errorf("%w: %s: %w", ErrInvalidEngine, field, err))
	}
	if e.Config == nil {
		bad("Config", errors.New("nil"))
	} else if err := e.Config.Validate(); err != nil {
		bad("Config", err)
	}
	seen := map[string]int{}
	for i, r := range e.Rules {
		field := fmt.Sprintf("Rules[%d]", i)
		if r == nil {
			bad(field, errors.New("nil"))
			continue
		}
		id := r.ID()
		switch j, dup := seen[id]; {
		case id == "":
			bad(field, errors.New("empty ID"))
		case dup:
			bad(field, fmt.Errorf("ID %q is also Rules[%d]'s", id, j))
		default:
			seen[id] = i
		}
	}
	if err := e.Analysis.Validate(); err != nil {
		bad("Analysis", err)
	}
	if err := e.Tolerances.Validate(); err != nil {
		bad("Tolerances", err)
	}
	for i, p := range e.Extract.PrivateSources {
		if err := p.Validate(); err != nil {
			bad(fmt.Sprintf("Extract.PrivateSources[%d]", i), err)
		}
	}
	if e.Workers < 1 || e.Workers > MaxWorkers {
		bad("Workers", fmt.Errorf("%d, want 1..%d", e.Workers, MaxWorkers))
	}
	return errors.Join(errs...)
}

// ready validates the engine on first use.
func (e *Engine) ready() error {
	e.once.Do(func() { e.readyErr = e.Validate() })
	return e.readyErr
}

func (e *Engine) log() *slog.Logger {
	if e.Logger == nil {
		return slog.New(slog.NewTextHandler(io.Discard, nil))
	}
	return e.Logger
}

// SeriesReport is one diffusion series as audited: who it is, what it
// holds, what the computation measured (NaN where undefined) and, when
// nothing could be computed, why.
type SeriesReport struct {
	StudyUID, SeriesUID string
	SeriesNumber        int
	SeriesDescription   string
	// Scanner is the configured scanner label, or the Station Name when
	// the series came from no configured peer.
	Scanner string
	// Protocol names the matched protocol or phantom profile ("" when
	// none matched).
	Protocol string
	BValues  []float64 // nominal b-values present, s/mm², ascending
	// Volumes is the series' gradient table (dwi.Series.GradientTable):
	// one row per acquired volume, repeats counted in its images.
	Volumes       []dwi.TableRow
	Measures      analysis.Measures
	CannotCompute string
	// PhantomADC is the central-region ADC of a phantom series
	// (rules.PhantomCentralADC, mm²/s) and PhantomExpectedADC its
	// profile's expected value; NaN for other series.
	PhantomADC, PhantomExpectedADC float64
	// PhantomUniformity is the ADC uniformity over a phantom's water
	// (rules.PhantomADCUniformity); NaN for other series.
	PhantomUniformity float64
}

// IsPhantom reports whether the series matched a phantom profile: its
// measures are the phantom's (central ADC, uniformity), and the tissue
// measures (parenchyma, CSF) do not apply to it.
func (r *SeriesReport) IsPhantom() bool { return !math.IsNaN(r.PhantomExpectedADC) }

// Report is the outcome of one audit call.
type Report struct {
	// Series lists every diffusion series met, ordered by study UID,
	// series number and series UID.
	Series []SeriesReport
	// Findings are ordered by study UID, series number, series UID and
	// rule, and within one rule as the rule gave them. File-level
	// findings (a file whose study is unknown) have empty UIDs and come
	// first.
	Findings []rules.Finding
	// Studies are the audited studies, pixels and maps included, when
	// Engine.KeepStudies is set (AuditFrames always keeps them).
	Studies []*rules.Study
	// Files is how many files AuditFiles looked at; NotDICOM how many of
	// them were not DICOM Part 10 files and were skipped.
	Files, NotDICOM int
	// Derived lists the series of derived maps the audit does not use
	// (FA, colour FA, tensor b0; dwi.Study.Derived): known, not audited,
	// no finding. Ordered like Series.
	Derived []DerivedReport
	// Ignored lists the DICOM files that hold no image the audit reads
	// (another SOP Class, e.g. a maker's private non-image object): a
	// note each, no finding.
	Ignored []IgnoredFile
}

// DerivedReport is a series of derived maps, listed with its kind.
type DerivedReport struct {
	StudyUID, SeriesUID string
	SeriesNumber        int
	SeriesDescription   string
	Kind                string // dwi.MapKind's name: "FA map", "colour FA map", "tensor b0", ...
	Images              int
}

// IgnoredFile is a DICOM file left out of the audit, and why.
type IgnoredFile struct {
	Path                string
	StudyUID, SeriesUID string
	SOPClassUID         string
	Reason              string
}

// AuditFrames audits images already read (what the pipeline calls for a
// settled series' study): the frames are grouped by study, each study
// assembled, every diffusion series computed, and the rules run. The
// frames must carry their pixels (header.ExtractOptions.LoadPixels). The
// report keeps the studies.
func (e *Engine) AuditFrames(ctx context.Context, frames []dwi.Frame) (*Report, error) {
	if err := e.ready(); err != nil {
		return nil, err
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	byStudy := map[string][]dwi.Frame{}
	for i := range frames {
		uid := frames[i].StudyInstanceUID
		byStudy[uid] = append(byStudy[uid], frames[i])
	}
	rep := &Report{}
	for _, uid := range sortedKeys(byStudy) {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		st := e.auditStudy(ctx, rep, studyInput{uid: uid, frames: byStudy[uid]})
		rep.Studies = append(rep.Studies, st)
	}
	rep.sort()
	return rep, nil
}

// AuditFiles audits DICOM Part 10 files and folders (walked
// recursively). Files that are not Part 10 (no preamble and "DICM") are
// counted and skipped. A
// file that cannot be read gives an audit-failed finding on its series
// when its header names one, otherwise a file-level audit-failed finding
// naming the path. Studies are audited one after another, so that only
// one study's pixels are held at a time (unless KeepStudies).
//
// Errors are for the engine's configuration, a path that cannot be
// walked, and a cancelled context.
func (e *Engine) AuditFiles(ctx context.Context, paths []string) (*Report, error) {
	if err := e.ready(); err != nil {
		return nil, err
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	files, err := walk(paths)
	if err != nil {
		return nil, err
	}
	rep := &Report{Files: len(files)}

	// First the identity of every file (a bounded header read, no
	// pixels), to group files by study before any pixel is loaded.
	ids := make([]header.Identity, len(files))
	idErrs := make([]error, len(files))
	if err := e.parallel(ctx, len(files), func(i int) {
		ids[i], idErrs[i] = header.ReadFile(files[i])
	}); err != nil {
		return nil, err
	}
	byStudy := map[string][]int{}
	for i := range files {
		switch err := idErrs[i]; {
		case errors.Is(err, part10.ErrNotPart10):
			// No preamble and "DICM" (PS3.10 7.1): another kind of file.
			// A file with them whose meta is broken is a DICOM file that
			// cannot be read, and gets a finding.
			rep.NotDICOM++
		case err != nil:
			rep.Findings = append(rep.Findings, e.fileFailed(files[i], err)...)
		case dwi.Classify(dwi.ClassifyInput{SOPClassUID: ids[i].SOPClassUID}) == dwi.KindNonImage:
			// Not an image (a private non-image object, a report): a
			// note, not a failure of its series.
			rep.Ignored = append(rep.Ignored, IgnoredFile{Path: files[i], StudyUID: ids[i].StudyInstanceUID, SeriesUID: ids[i].SeriesInstanceUID,
				SOPClassUID: ids[i].SOPClassUID, Reason: "SOP Class " + ids[i].SOPClassUID + " is not an image the audit reads"})
		default:
			uid := ids[i].StudyInstanceUID
			byStudy[uid] = append(byStudy[uid], i)
		}
	}

	opt := e.Extract
	opt.LoadPixels = true
	for _, uid := range sortedKeys(byStudy) {
		idx := byStudy[uid]
		perFile := make([][]dwi.Frame, len(idx))
		errs := make([]error, len(idx))
		if err := e.parallel(ctx, len(idx), func(k int) {
			perFile[k], errs[k] = header.ExtractFile(files[idx[k]], opt)
		}); err != nil {
			return nil, err
		}
		in := studyInput{uid: uid, known: map[string]header.Identity{}}
		n := 0
		for _, fr := range perFile {
			n += len(fr)
		}
		in.frames = make([]dwi.Frame, 0, n)
		for k, i := range idx {
			in.known[ids[i].SeriesInstanceUID] = ids[i]
			if errs[k] != nil {
				in.fileErrs = append(in.fileErrs, fileError{path: files[i], id: ids[i], err: errs[k]})
				continue
			}
			in.frames = append(in.frames, perFile[k]...)
		}
		perFile = nil
		st := e.auditStudy(ctx, rep, in)
		if e.KeepStudies {
			rep.Studies = append(rep.Studies, st)
		}
		if err := ctx.Err(); err != nil {
			return nil, err
		}
	}
	rep.sort()
	return rep, nil
}

// walk lists the regular files under paths, in lexical order, each once.
func walk(paths []string) ([]string, error) {
	var files []string
	for _, root := range paths {
		err := filepath.WalkDir(root, func(path string, d fs.DirEntry, err error) error {
			if err != nil {
				return err
			}
			if d.Type().IsRegular() {
				files = append(files, path)
			}
			return nil
		})
		if err != nil {
			return nil, err
		}
	}
	slices.Sort(files)
	return slices.Compact(files), nil
}

// parallel runs f(0..n-1) on at most e.Workers goroutines, and returns
// the context's error if it ends first (the calls already started
// finish).
func (e *Engine) parallel(ctx context.Context, n int, f func(i int)) error {
	next := make(chan int)
	var wg sync.WaitGroup
	for range min(e.Workers, n) {
		wg.Go(func() {
			for i := range next {
				f(i)
			}
		})
	}
	var err error
feed:
	for i := range n {
		select {
		case next <- i:
		case <-ctx.Done():
			err = ctx.Err()
			break feed
		}
	}
	close(next)
	wg.Wait()
	return err
}

// fileError is a file of a known study that could not be read.
type fileError struct {
	path string
	id   header.Identity
	err  error
}

// studyInput is one study to audit: its frames, the files of it that
// failed, and the identity of every series its files named.
type studyInput struct {
	uid      string
	frames   []dwi.Frame
	fileErrs []fileError
	known    map[string]header.Identity // series UID -> a file's identity
}

// auditStudy assembles, computes and judges one study, adding its series
// and findings to rep, and returns the study as the rules saw it.
//
// The study's SeriesAudits are, in order: every assembled diffusion
// series, then every series that could not be assembled, then every
// series none of whose files could be read (both with a nil Series and
// a *dwi.SeriesError in Err).
func (e *Engine) auditStudy(ctx context.Context, rep *Report, in studyInput) *rules.Study {
	cfg := e.Config
	log := e.log().With("study", in.uid)
	asm, err := dwi.AssembleStudy(in.frames, e.Tolerances)
	if err != nil {
		// No image to place (every file failed, or none was an image):
		// the failed files still get their findings below.
		if len(in.frames) > 0 {
			log.Warn("study not assembled", "err", err)
		}
		asm = &dwi.Study{StudyInstanceUID: in.uid}
	}
	st := &rules.Study{StudyUID: in.uid, Assembly: asm}

	failedFiles := map[string][]fileError{}
	for _, fe := range in.fileErrs {
		uid := fe.id.SeriesInstanceUID
		failedFiles[uid] = append(failedFiles[uid], fe)
	}
	// A series with unreadable files is audited on the images that
	// could be read; the files that could not get their own finding.
	for _, s := range asm.Series {
		st.Series = append(st.Series, rules.NewSeriesAudit(cfg, s, nil, nil))
	}
	for _, d := range asm.Derived {
		rep.Derived = append(rep.Derived, DerivedReport{StudyUID: in.uid, SeriesUID: d.SeriesInstanceUID, SeriesNumber: d.SeriesNumber,
			SeriesDescription: d.SeriesDescription, Kind: d.Kind.String(), Images: d.Images})
	}
	_ = e.parallel(ctx, len(st.Series), func(i int) {
		sa := st.Series[i]
		if sa.Err != nil {
			return
		}
		if sa.Result, sa.Err = analysis.Analyze(sa.Series, e.Analysis); sa.Err != nil {
			sa.Result = nil
		}
	})
	placed := map[string]bool{}
	for _, s := range asm.Series {
		placed[s.SeriesInstanceUID] = true
	}
	for _, se := range asm.Failed {
		placed[se.SeriesInstanceUID] = true
		se := *se
		se.Err = fmt.Errorf("cannot be assembled: %w", se.Err)
		st.Series = append(st.Series, rules.NewSeriesAudit(cfg, nil, nil, &se))
	}
	for _, d := range asm.Derived {
		placed[d.SeriesInstanceUID] = true
	}
	for _, uid := range sortedKeys(failedFiles) {
		if !placed[uid] {
			id := failedFiles[uid][0].id
			st.Series = append(st.Series, rules.NewSeriesAudit(cfg, nil, nil,
				&dwi.SeriesError{SeriesInstanceUID: uid, SeriesNumber: id.SeriesNumber, Err: filesError(failedFiles[uid])}))
		}
	}

	// The rules, each on its own: rules.Run turns a panic into
	// audit-failed findings naming the rule, and the others still run.
	rs := make([]rules.Rule, len(e.Rules))
	for i, r := range e.Rules {
		rs[i] = loggedRule{r, log}
	}
	found := rules.Run(rs, st, cfg)
	if ctx.Err() != nil {
		return st
	}

	// Series the audit could not judge.
	faulted := map[string]bool{}
	for _, f := range found {
		if f.Severity >= rules.SeverityWarning {
			faulted[f.SeriesUID] = true
		}
	}
	var failed []rules.Finding
	for _, sa := range st.Series {
		if s := sa.Series; s != nil && sa.Err == nil {
			if fe := failedFiles[s.SeriesInstanceUID]; len(fe) > 0 {
				failed = append(failed, rules.ImagesUnreadable(sa, filesError(fe).Error()))
			}
			if ng := s.Facts.NoGeometry; len(ng) > 0 {
				failed = append(failed, rules.ImagesUnreadable(sa, fmt.Sprintf(
					"%d image(s) have no usable Image Position and Orientation (Patient) and cannot be placed on the slice grid (the first: %s)", len(ng), ng[0])))
			}
		}
		switch {
		case sa.Err != nil:
			failed = append(failed, rules.AuditFailed(sa, sa.Err.Error()))
		case sa.Result.CannotCompute != "":
			// Explained elsewhere: a b0-only series that lends its b0 to
			// others is not meant to give an ADC, and a series another
			// rule already faulted (no b0, say) needs no second word.
			s := sa.Series
			if !faulted[s.SeriesInstanceUID] && !e.lender(s, asm) {
				failed = append(failed, rules.AuditFailed(sa, "the ADC cannot be computed: "+sa.Result.CannotCompute))
			}
		}
	}
	found = append(found, rules.Apply(cfg, failed)...)
	if !cfg.Enabled(rules.IDAuditFailed) {
		found = slices.DeleteFunc(found, func(f rules.Finding) bool { return f.Rule == rules.IDAuditFailed })
	}
	for i := range found {
		fill(&found[i], st, in.known)
	}
	rep.Findings = append(rep.Findings, found...)
	for _, sa := range st.Series {
		rep.Series = append(rep.Series, seriesReport(in.uid, sa, in.known, cfg))
	}
	return st
}

// loggedRule logs a rule's panic, with its stack, before rules.Run
// recovers it.
type loggedRule struct {
	rules.Rule
	log *slog.Logger
}

func (r loggedRule) Check(s *rules.Study, cfg *rules.Config) []rules.Finding {
	defer func() {
		if p := recover(); p != nil {
			r.log.Error("rule panicked", "rule", r.ID(), "panic", fmt.Sprint(p), "stack", string(debug.Stack()))
			panic(p)
		}
	}()
	return r.Rule.Check(s, cfg)
}

// lender says whether s holds only reference (b0) images that another
// series of the study borrowed or tried to borrow: it is not meant to
// give an ADC of its own.
func (e *Engine) lender(s *dwi.Series, asm *dwi.Study) bool {
	for _, b := range s.Facts.BValues {
		if b > e.Analysis.ReferenceBMax {
			return false
		}
	}
	for _, o := range asm.Series {
		if o == s {
			continue
		}
		if o.Facts.B0FromSeries == s.SeriesInstanceUID || slices.Contains(o.Facts.B0Unmatched, s.SeriesInstanceUID) {
			return true
		}
	}
	return false
}

// filesError says which files of a series could not be read and why
// (the first few, then a count).
func filesError(fe []fileError) error {
	const listed = 3 // enough to see the pattern, short enough to read
	var parts []string
	for i, f := range fe {
		if i == listed {
			parts = append(parts, fmt.Sprintf("and %d more", len(fe)-listed))
			break
		}
		parts = append(parts, fmt.Sprintf("%s: %v", filepath.Base(f.path), f.err))
	}
	return fmt.Errorf("%d file(s) of the series cannot be read (%s)", len(fe), strings.Join(parts, "; "))
}

// fileFailed is the finding of a file whose study is unknown.
func (e *Engine) fileFailed(path string, err error) []rules.Finding {
	if !e.Config.Enabled(rules.IDAuditFailed) {
		return nil
	}
	return rules.Apply(e.Config, []rules.Finding{rules.AuditFailed(nil, fmt.Sprintf("file %s cannot be read: %v", path, err))})
}

// fill completes what a rule left out of a finding: the study UID, and
// from the series it names, its number, description and scanner.
func fill(f *rules.Finding, st *rules.Study, known map[string]header.Identity) {
	if f.StudyUID == "" {
		f.StudyUID = st.StudyUID
	}
	if f.SeriesUID == "" {
		return
	}
	for _, sa := range st.Series {
		if s := sa.Series; s != nil && s.SeriesInstanceUID == f.SeriesUID {
			f.SeriesNumber = cmp.Or(f.SeriesNumber, s.SeriesNumber)
			f.SeriesDescription = cmp.Or(f.SeriesDescription, s.SeriesDescription)
			f.Scanner = cmp.Or(f.Scanner, scannerOf(s.Scanner))
			return
		}
	}
	if id, ok := known[f.SeriesUID]; ok {
		f.SeriesNumber = cmp.Or(f.SeriesNumber, id.SeriesNumber)
		f.SeriesDescription = cmp.Or(f.SeriesDescription, id.SeriesDescription)
		f.Scanner = cmp.Or(f.Scanner, id.StationName)
	}
}

// seriesReport summarises one series of study: assembled, or (nil
// Series) known only from its error and its files' headers.
func seriesReport(study string, sa *rules.SeriesAudit, known map[string]header.Identity, cfg *rules.Config) SeriesReport {
	r := SeriesReport{StudyUID: study, Measures: undefinedMeasures(), PhantomADC: math.NaN(), PhantomExpectedADC: math.NaN(), PhantomUniformity: math.NaN()}
	if s := sa.Series; s != nil {
		r.SeriesUID, r.SeriesNumber, r.SeriesDescription = s.SeriesInstanceUID, s.SeriesNumber, s.SeriesDescription
		r.Scanner, r.BValues = scannerOf(s.Scanner), slices.Clone(s.Facts.BValues)
		r.Volumes = s.GradientTable()
	} else {
		var se *dwi.SeriesError
		if errors.As(sa.Err, &se) {
			id := known[se.SeriesInstanceUID]
			r.SeriesUID, r.SeriesNumber = se.SeriesInstanceUID, cmp.Or(se.SeriesNumber, id.SeriesNumber)
			r.SeriesDescription, r.Scanner = id.SeriesDescription, id.StationName
		}
	}
	switch {
	case sa.Phantom != nil:
		r.Protocol = sa.Phantom.Name
		r.PhantomExpectedADC = sa.Phantom.ExpectedADC
		if cfg != nil {
			r.PhantomADC, _ = rules.PhantomCentralADC(sa, cfg)
		}
		r.PhantomUniformity = rules.PhantomADCUniformity(sa)
	case sa.Protocol != nil:
		r.Protocol = sa.Protocol.Name
	}
	switch {
	case sa.Err != nil:
		r.CannotCompute = sa.Err.Error()
	case sa.Result != nil:
		r.Measures = sa.Result.Measures
		r.CannotCompute = sa.Result.CannotCompute
	}
	return r
}

// undefinedMeasures are the measures of a series not computed.
func undefinedMeasures() analysis.Measures {
	nan := math.NaN()
	m := analysis.Measures{
		ParenchymaMedianADC: nan, CSFADC: nan, FractionAboveFreeWater: nan, FractionNegative: nan,
		B0SNR: nan, HighBTissueSNR: nan, HighB: nan,
	}
	m.Noise.Sigma, m.HighBNoise.Sigma = nan, nan
	return m
}

// scannerOf is the label a series is reported under: the configured
// label, else the Station Name (0008,1010).
func scannerOf(s dwi.Scanner) string {
	return cmp.Or(s.Label, s.StationName)
}

// sort orders the report (see Report).
func (r *Report) sort() {
	slices.SortStableFunc(r.Series, func(a, b SeriesReport) int {
		return cmp.Or(strings.Compare(a.StudyUID, b.StudyUID), cmp.Compare(a.SeriesNumber, b.SeriesNumber), strings.Compare(a.SeriesUID, b.SeriesUID))
	})
	slices.SortStableFunc(r.Derived, func(a, b DerivedReport) int {
		return cmp.Or(strings.Compare(a.StudyUID, b.StudyUID), cmp.Compare(a.SeriesNumber, b.SeriesNumber), strings.Compare(a.SeriesUID, b.SeriesUID))
	})
	slices.SortStableFunc(r.Findings, func(a, b rules.Finding) int {
		return cmp.Or(strings.Compare(a.StudyUID, b.StudyUID), cmp.Compare(a.SeriesNumber, b.SeriesNumber),
			strings.Compare(a.SeriesUID, b.SeriesUID), strings.Compare(a.Rule, b.Rule))
	})
}

func sortedKeys[V any](m map[string]V) []string {
	keys := make([]string, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	return keys
}
