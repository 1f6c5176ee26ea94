// Package metrics holds the node's Prometheus collectors: what the DICOM
// acceptor received, how the store kept it, how the audit pipeline is
// doing, and the per-scanner drift gauges MR physicists watch (tissue and
// CSF ADC, b0 SNR, phantom ADC against its known value).
//
// Everything lives in one Metrics value with its own registry
// (prometheus.NewRegistry, served with promhttp.HandlerFor); there is no
// global registry and no init(). The command wires it: cmd/dwiaudit
// feeds it from scp.Server.OnAssociation, the C-STORE ingest adapter and
// the audit pipeline's Observer hook (Metrics implements
// audit.Observer), and seeds the drift gauges from the newest stored
// audits at start, so a restart does not blank a dashboard.
//
// Label values are bounded (Labels): a scanner is its configured label,
// else a sanitised Station Name with at most MaxFallbackScanners distinct
// values ("other" beyond); protocols and phantoms are configured names;
// rules and severities are the known sets. Nothing that identifies a
// patient or an instance (UIDs, Patient ID or name, accession) is ever a
// label value: the functions here read only the scanner, the protocol
// and the measures of an audit record.
//
// Audits of test patients (store.AuditRecord.TestPatient) count in
// dwiaudit_audits_total and dwiaudit_findings_total but never move the
// drift gauges, which describe the scanners on clinical work.
package metrics
