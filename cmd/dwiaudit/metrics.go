package main

// The node's Prometheus metrics: audit/metrics holds the collectors in
// their own registry; this file builds them from the configuration and
// connects them to the acceptor, the ingest adapter, the pipeline and
// the HTTP server (serve.go calls these).

import (
	"log/slog"
	"runtime"
	"runtime/debug"
	"time"

	"github.com/prometheus/client_golang/prometheus/collectors"

	"dwiaudit/audit/metrics"
	"dwiaudit/config"
	"dwiaudit/rules"
	"dwiaudit/scp"
	"dwiaudit/store"
)

// seedDays is how many days of stored audits the drift gauges are seeded
// from at start: a scanner audited in the last month shows its latest
// values after a restart; one silent for longer is stale on any
// dashboard anyway.
const seedDays = 31

// newNodeMetrics builds the node's metrics: label bounds from the
// configuration (peer scanner labels, protocol and phantom names, the
// rule IDs), the disk floor, the data folder's free space and the
// pipeline's backlog read at scrape, and Go runtime and process metrics.
func newNodeMetrics(cfg config.Config, free func() (uint64, error), backlog func() int, log *slog.Logger) *metrics.Metrics {
	var scanners, protocols, phantoms []string
	for _, p := range cfg.Peers {
		scanners = append(scanners, p.Scanner)
	}
	for _, p := range cfg.Audit.Protocols {
		protocols = append(protocols, p.Name)
	}
	for _, p := range cfg.Audit.Phantoms {
		phantoms = append(phantoms, p.Name)
	}
	ruleIDs := []string{rules.IDAuditFailed}
	for _, r := range rules.All() {
		ruleIDs = append(ruleIDs, r.ID())
	}
	m := metrics.New(metrics.Options{
		Version:       buildVersion(),
		GoVersion:     runtime.Version(),
		Labels:        metrics.NewLabels(scanners, protocols, phantoms, ruleIDs),
		DiskFloor:     uint64(cfg.Limits.DiskFloor),
		FreeBytes:     free,
		QueuedStudies: backlog,
		Logger:        log,
	})
	m.Registry().MustRegister(
		collectors.NewGoCollector(),
		collectors.NewProcessCollector(collectors.ProcessCollectorOpts{}),
	)
	return m
}

// buildVersion is the module version the binary was built from, or
// "(devel)" for a build from a work tree.
func buildVersion() string {
	if bi, ok := debug.ReadBuildInfo(); ok && bi.Main.Version != "" {
		return bi.Main.Version
	}
	return "(devel)"
}

// associationMetrics is scp.Server.OnAssociation: each finished
// association and its C-STORE responses by status class.
func associationMetrics(m *metrics.Metrics) func(scp.AssociationSummary) {
	return func(s scp.AssociationSummary) {
		var classes map[string]int
		if len(s.StoreStatuses) > 0 {
			classes = make(map[string]int, 3)
			for st, n := range s.StoreStatuses {
				classes[st.Class().String()] += n // PS3.7 Annex C status classes
			}
		}
		m.Association(s.Result, classes)
	}
}

// auditsByDay lists the current audits of a day (store.Store.Findings)
// and reads their studies.
type auditsByDay interface {
	Findings(day string) ([]store.AuditRecord, error)
	Study(uid string) (store.Study, error)
}

// seedDriftMetrics sets the drift gauges from the audits of the last
// seedDays days (in the node's time zone), so that a restart does not
// blank a dashboard.
func seedDriftMetrics(m *metrics.Metrics, st auditsByDay, now time.Time, log *slog.Logger) {
	n := 0
	for i := seedDays - 1; i >= 0; i-- {
		day := now.AddDate(0, 0, -i).Format(dayLayout)
		recs, err := st.Findings(day)
		if err != nil {
			log.Warn("seeding the drift metrics: reading stored audits failed", "day", day, "err", err)
			return
		}
		m.Seed(recs, st.Study)
		n += len(recs)
	}
	if n > 0 {
		log.Info("drift metrics seeded from stored audits", "audits", n, "days", seedDays)
	}
}
