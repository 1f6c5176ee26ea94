package web

// GET /api/v1/series/{uid}/preview.png[?slice=N]: one slice of a stored
// diffusion series as the audit computed it (b0, DWI, eADC, ADC) with
// the regions of its current findings outlined (audit/preview). The
// study's files are audited again to get the maps (the store keeps
// findings and measures, not maps); a small cache keeps the last few
// computed studies, so the previews of one study page compute it once.

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"log/slog"
	"net/http"
	"path/filepath"
	"strconv"
	"sync"
	"time"

	"dwiaudit/audit"
	"dwiaudit/audit/preview"
	"dwiaudit/rules"
	"dwiaudit/store"
)

// Limits of the preview endpoint.
const (
	// previewCacheStudies is how many computed studies are kept: a
	// 256x256x60 study with its maps is about 200 MiB (DEVELOPERS.md,
	// Analyze figures), and a study page shows the previews of one
	// study, so two (the page being read and the one before) bound the
	// memory at about 400 MiB while paging back and forth stays fast.
	previewCacheStudies = 2
	// previewComputeTimeout bounds the audit behind a preview; the same
	// as the pipeline's (audit.DefaultAuditTimeout).
	previewComputeTimeout = audit.DefaultAuditTimeout
	// previewMaxAge is how long a browser may reuse a preview: findings
	// change only when a study is audited again, rarely within a minute.
	previewMaxAge = 60 * time.Second
)

// previewStore is what the preview endpoint needs of the store
// (*store.Store has it).
type previewStore interface {
	Series(uid string) (store.Series, error)
	Study(uid string) (store.Study, error)
	Instances(seriesUID string) ([]store.Instance, error)
	SeriesAudits(seriesUID string) ([]store.AuditRecord, error)
	Dir() string
}

// previews serves the preview endpoint.
type previews struct {
	store    previewStore
	engine   *audit.Engine // KeepStudies set: the report holds the maps
	renderer *preview.Renderer
	cache    *studyCache
	// computing lets one study's computation run at a time, so memory
	// stays at the cache plus one study.
	computing chan struct{}
	log       *slog.Logger
}

// newPreviews builds the endpoint on an audit engine of its own, which
// it sets to keep the computed studies (their maps).
func newPreviews(st previewStore, eng *audit.Engine, log *slog.Logger) (*previews, error) {
	eng.KeepStudies = true
	r, err := preview.NewRenderer()
	if err != nil {
		return nil, err
	}
	return &previews{
		store: st, engine: eng, renderer: r, log: log,
		cache:     newStudyCache(previewCacheStudies),
		computing: make(chan struct{}, 1),
	}, nil
}

func (p *previews) serve(w http.ResponseWriter, r *http.Request) {
	uid := r.PathValue("uid")
	slice := -1
	if s := r.URL.Query().Get("slice"); s != "" {
		n, err := strconv.Atoi(s)
		if err != nil || n < 0 {
			writeError(w, http.StatusBadRequest, fmt.Sprintf("slice %.20q is not a slice index (0, 1, 2, ...)", s))
			return
		}
		slice = n
	}
	se, err := p.store.Series(uid)
	if err != nil {
		p.storeError(w, err, fmt.Sprintf("no series %.70q", uid))
		return
	}
	rep, err := p.study(r.Context(), se.StudyInstanceUID)
	if err != nil {
		if errors.Is(err, store.ErrClosed) || errors.Is(err, context.Canceled) {
			writeError(w, http.StatusServiceUnavailable, "the node is stopping")
			return
		}
		p.log.Warn("preview: computing a study failed", "err", err)
		writeError(w, http.StatusInternalServerError, "computing the study failed: "+err.Error())
		return
	}
	sa := seriesAudit(rep, uid)
	switch {
	case sa == nil:
		writeError(w, http.StatusUnprocessableEntity, fmt.Sprintf("series %d is not a diffusion series the audit computes (a scanner map, a b0 lent to another series, or no diffusion images)", se.SeriesNumber))
		return
	case sa.Err != nil:
		writeError(w, http.StatusUnprocessableEntity, "the series could not be computed: "+sa.Err.Error())
		return
	case !sa.Computed():
		reason := "no maps"
		if sa.Result != nil && sa.Result.CannotCompute != "" {
			reason = sa.Result.CannotCompute
		}
		writeError(w, http.StatusUnprocessableEntity, "the series could not be computed: "+reason)
		return
	}
	findings, err := p.findings(uid, rep)
	if err != nil {
		p.storeError(w, err, "")
		return
	}
	if slice < 0 {
		slice = preview.DefaultSlice(sa.Result, findings)
	}
	pic, err := p.renderer.Render(sa.Result, slice, findings)
	var rangeErr *preview.SliceRangeError
	switch {
	case errors.As(err, &rangeErr):
		writeError(w, http.StatusBadRequest, fmt.Sprintf("slice %d is outside the series' slices 0..%d", rangeErr.Slice, rangeErr.Slices-1))
		return
	case errors.Is(err, preview.ErrNoMaps):
		writeError(w, http.StatusUnprocessableEntity, err.Error())
		return
	case err != nil:
		writeError(w, http.StatusInternalServerError, err.Error())
		return
	}
	var buf bytes.Buffer
	if err := pic.EncodePNG(&buf); err != nil {
		writeError(w, http.StatusInternalServerError, "encoding the preview failed: "+err.Error())
		return
	}
	h := w.Header()
	h.Set("Content-Type", "image/png")
	h.Set("Cache-Control", fmt.Sprintf("private, max-age=%d", int(previewMaxAge.Seconds())))
	h.Set("Content-Length", strconv.Itoa(buf.Len()))
	h.Set("X-Preview-Slice", strconv.Itoa(slice))
	h.Set("X-Preview-Slices", strconv.Itoa(preview.Slices(sa.Result)))
	w.WriteHeader(http.StatusOK)
	w.Write(buf.Bytes()) // a failed write means the client went away
}

// storeError answers a store error: notFound (404) for ErrNotFound,
// 503 while the node stops, 500 otherwise.
func (p *previews) storeError(w http.ResponseWriter, err error, notFound string) {
	switch {
	case errors.Is(err, store.ErrNotFound) && notFound != "":
		writeError(w, http.StatusNotFound, notFound)
	case errors.Is(err, store.ErrClosed):
		writeError(w, http.StatusServiceUnavailable, "the node is stopping")
	default:
		p.log.Error("preview: reading the store failed", "err", err)
		writeError(w, http.StatusInternalServerError, "reading the store failed: "+err.Error())
	}
}

// study returns the audit report of a stored study with its maps, from
// the cache when the study has not changed since it was computed.
func (p *previews) study(ctx context.Context, studyUID string) (*audit.Report, error) {
	st, err := p.store.Study(studyUID)
	if err != nil {
		return nil, err
	}
	// The version changes whenever an instance arrives.
	version := fmt.Sprintf("%d", st.LastReceived.UnixNano())
	for _, se := range st.Series {
		version += "/" + strconv.Itoa(se.Instances)
	}
	return p.cache.get(ctx, studyUID, version, func(ctx context.Context) (*audit.Report, error) {
		select {
		case p.computing <- struct{}{}:
			defer func() { <-p.computing }()
		case <-ctx.Done():
			return nil, ctx.Err()
		}
		var paths []string
		for _, se := range st.Series {
			ins, err := p.store.Instances(se.SeriesInstanceUID)
			if err != nil {
				return nil, err
			}
			for _, in := range ins {
				if !in.Pruned && !in.Missing {
					paths = append(paths, filepath.Join(p.store.Dir(), filepath.FromSlash(in.Path)))
				}
			}
		}
		if len(paths) == 0 {
			return nil, fmt.Errorf("the study's files are no longer kept (retention)")
		}
		return p.engine.AuditFiles(ctx, paths)
	})
}

// seriesAudit finds the computed series uid in rep.
func seriesAudit(rep *audit.Report, uid string) *rules.SeriesAudit {
	for _, st := range rep.Studies {
		for _, sa := range st.Series {
			if sa.Series != nil && sa.Series.SeriesInstanceUID == uid {
				return sa
			}
		}
	}
	return nil
}

// findings returns the findings to outline: those of the series'
// current stored audit, or, before its first audit is stored, those the
// computation just gave.
func (p *previews) findings(uid string, rep *audit.Report) ([]rules.Finding, error) {
	audits, err := p.store.SeriesAudits(uid)
	if err != nil {
		return nil, err
	}
	if len(audits) > 0 {
		var fs []rules.Finding
		cur := audits[len(audits)-1]
		if len(cur.Findings) > 0 {
			if err := json.Unmarshal(cur.Findings, &fs); err != nil {
				return nil, fmt.Errorf("stored findings of the series: %w", err)
			}
		}
		return fs, nil
	}
	var fs []rules.Finding
	for _, f := range rep.Findings {
		if f.SeriesUID == uid {
			fs = append(fs, f)
		}
	}
	return fs, nil
}

// studyCache keeps the last few computed studies (least recently used
// goes first) and makes concurrent requests for one study wait for one
// computation.
type studyCache struct {
	max int

	mu      sync.Mutex    // guards entries
	entries []*cacheEntry // least recently used first
}

// cacheEntry is one study, computed or being computed.
type cacheEntry struct {
	study, version string
	done           chan struct{} // closed once rep and err are set
	rep            *audit.Report
	err            error
}

func newStudyCache(n int) *studyCache { return &studyCache{max: n} }

// get returns the study's report at version: cached, awaited from a
// computation already running, or computed now by compute. compute runs
// without the caller's cancellation (others may wait for it), within
// previewComputeTimeout; a failed computation is not kept.
func (c *studyCache) get(ctx context.Context, study, version string, compute func(context.Context) (*audit.Report, error)) (*audit.Report, error) {
	c.mu.Lock()
	var e *cacheEntry
	for i, x := range c.entries {
		if x.study != study {
			continue
		}
		c.entries = append(c.entries[:i], c.entries[i+1:]...)
		if x.version == version {
			e = x
		}
		break
	}
	owner := e == nil
	if owner {
		e = &cacheEntry{study: study, version: version, done: make(chan struct{})}
	}
	c.entries = append(c.entries, e) // most recently used last
	if len(c.entries) > c.max {
		c.entries = c.entries[len(c.entries)-c.max:]
	}
	c.mu.Unlock()

	if owner {
		cctx, cancel := context.WithTimeout(context.WithoutCancel(ctx), previewComputeTimeout)
		e.rep, e.err = compute(cctx)
		cancel()
		if e.err != nil {
			c.forget(e)
		}
		close(e.done)
	}
	select {
	case <-e.done:
		return e.rep, e.err
	case <-ctx.Done():
		return nil, ctx.Err()
	}
}

// forget drops e from the cache.
func (c *studyCache) forget(e *cacheEntry) {
	c.mu.Lock()
	defer c.mu.Unlock()
	for i, x := range c.entries {
		if x == e {
			c.entries = append(c.entries[:i], c.entries[i+1:]...)
			return
		}
	}
}
