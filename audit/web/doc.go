// Package web is the node's HTTP listener: one route table
// (Server.routes, server.go) and the middleware every request passes
// through (Server.Handler: access log, security headers, access
// control), in front of the JSON API (api.go: health checks, studies,
// findings, and the JSON types the command-line clients decode too),
// the reports (reports.go), the previews (preview.go), the Prometheus
// metrics and the pages.
//
// The pages are for people: the daily discrepancy
// list (/ for today, /days/{YYYY-MM-DD} for a past day), a study with its
// series, measures, findings and previews (/studies/{StudyUID}), and the
// scanners with trend plots of their ADC measures (/scanners,
// /scanners/{label}); and the access control in front of the whole HTTP
// listener (Auth: a bearer token and/or users with bcrypt passwords).
//
// Pages are html/template with the templates and the one stylesheet
// embedded (go:embed); nothing is fetched from elsewhere, no script runs.
// Trend plots are SVG drawn here (plot.go), one circle per series, so a
// page prints and reads without a browser plug-in or network.
//
// The data comes from the store through the small Store interface,
// declared here and implemented by *store.Store. The rows of the daily
// list are built in daily.go from the current audits of the day
// (dailyRows), the one place to change if the list's rows come from
// elsewhere.
//
// Every page says, visibly, that dwiaudit checks acquisitions and does
// not diagnose, and defers to the radiologist and local policy (Caution).
// Pages never show patient names; patient IDs are masked to their last
// three characters; URLs carry no identifier other than DICOM UIDs and
// scanner labels.
package web
