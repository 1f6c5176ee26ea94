// Package report builds what department leads read: the daily
// discrepancy list (every finding of the studies audited on one calendar
// day in the node's time zone) and the compliance report (per protocol
// and scanner, the share of studies without a warning or an error, the
// rules most often broken, and the trend against the period before).
//
// The package is pure building and rendering. It reads the audits through
// small interfaces it declares (Source, ListStore), which *store.Store
// implements; it never opens the index itself.
//
//   - daily.go: DailyList and Row, and Builder.Daily, which turns the
//     current audits of a day (store.Findings) into rows, one per finding,
//     ordered by severity (error first), then audit time.
//   - compliance.go: Compliance and Builder.Compliance; test studies
//     (store.AuditRecord.TestPatient) are left out.
//   - values.go: measured and expected values in words (ADC as
//     "0.79e-3 mm²/s", b-values in s/mm²), patient ID masking, links.
//   - archive.go: Archive keeps a day's list frozen in the store once the
//     day is over and its freeze time (reports.daily_at) has passed, so a
//     past day reads the same however many studies arrive later.
//   - render.go, and the templates in html.go: CSV (RFC 4180, header row,
//     pure data), JSON, printable HTML (embedded CSS, no external fetch)
//     and a terminal table.
//
// Every format but CSV carries Caution: the auditor checks acquisitions,
// it does not diagnose. CSV stays header row plus rows so spreadsheets
// and scripts read it; the caution travels with the JSON, HTML and text
// forms, and the README says so.
package report
