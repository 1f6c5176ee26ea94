package main

// The node's Prometheus metrics: audit/metrics holds the collectors in
// their own registry; this file builds them from the configuration and
// connects them to the acceptor, the ingest adapter, the pipeline and
// the HTTP server (serve.go calls these).

import (
	"log/slog"
	"runtime"
	"runtime/debug"

	"github.com/prometheus/client_golang/prometheus/collectors"

	"dwiaudit/audit/metrics"
	"dwiaudit/config"
	"dwiaudit/rules"
	"dwiaudit/scp"
)

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
