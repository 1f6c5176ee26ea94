package report

import (
	"html/template"
	"io"
	"time"
)

// pageCSS is embedded in every page: the pages fetch nothing from
// elsewhere, so they print and archive as one file. Severity is written
// out in words; the left border only repeats it for the eye.
const pageCSS = `
body { font: 14px/1.4 system-ui, sans-serif; margin: 1.5em; color: #1d1d1f; }
h1 { font-size: 1.3em; margin: 0 0 .3em; }
p.caution { border: 1px solid #8a6d00; background: #fff8e0; padding: .5em .8em; font-weight: 600; }
p.meta { color: #444; }
table { border-collapse: collapse; width: 100%; }
th, td { border-bottom: 1px solid #ccc; padding: .3em .5em; text-align: left; vertical-align: top; }
th { background: #eef1f4; }
tr.sev-error td:first-child { border-left: 5px solid #7a1f1f; }
tr.sev-warning td:first-child { border-left: 5px solid #a86b00; }
tr.sev-info td:first-child { border-left: 5px solid #4a6a8a; }
td.num { text-align: right; }
td.expl { max-width: 40em; }
span.test { font-size: .85em; border: 1px solid #666; padding: 0 .3em; }
@media print {
  body { margin: 0; font-size: 10pt; }
  a { color: inherit; text-decoration: none; }
  tr { page-break-inside: avoid; }
  th { background: none; }
  p.caution { background: none; }
}
`

var pageFuncs = template.FuncMap{
	"clock":    func(t time.Time) string { return t.Format("15:04:05") },
	"stamp":    func(t time.Time) string { return t.Format(time.RFC3339) },
	"dash":     dash,
	"pct":      pct,
	"points":   points,
	"topRules": topRules,
	"css":      func() template.CSS { return template.CSS(pageCSS) },
}

var dailyPage = template.Must(template.New("daily").Funcs(pageFuncs).Parse(`<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<title>Daily discrepancy list {{.Day}}</title>
<style>{{css}}</style>
</head>
<body>
<h1>Daily discrepancy list {{.Day}}</h1>
<p class="caution">{{.Caution}}</p>
<p class="meta">{{.StudiesAudited}} studies audited, {{.StudiesWithFindings}} with findings, {{len .Rows}} findings. Time zone {{.TimeZone}}; patient IDs {{.PatientID}}; {{if .FrozenAt}}kept since {{stamp .FrozenAt}}{{else}}built live at {{stamp .GeneratedAt}}{{end}}.</p>
{{if .Rows}}<table>
<thead><tr><th>Severity</th><th>Rule</th><th>Audited</th><th>Study date</th><th>Accession</th><th>Patient ID</th><th>Scanner</th><th>Series</th><th>Measured</th><th>Expected</th><th>Explanation</th></tr></thead>
<tbody>
{{range .Rows}}<tr class="sev-{{.Severity}}"><td>{{.Severity}}{{if .Test}} <span class="test">test</span>{{end}}</td><td>{{.Rule}}</td><td>{{clock .AuditTime}}</td><td>{{dash .StudyDate}}</td><td>{{dash .AccessionNumber}}</td><td>{{dash .PatientID}}</td><td>{{dash .Scanner}}</td><td><a href="{{.Link}}">{{.SeriesNumber}}{{if .SeriesDescription}} {{.SeriesDescription}}{{end}}</a></td><td>{{dash .Measured}}</td><td>{{dash .Expected}}</td><td class="expl">{{.Explanation}}</td></tr>
{{end}}</tbody>
</table>{{else}}<p>No findings.</p>{{end}}
</body>
</html>
`))

var compliancePage = template.Must(template.New("compliance").Funcs(pageFuncs).Parse(`<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<title>Protocol compliance {{.From}} to {{.To}}</title>
<style>{{css}}</style>
</head>
<body>
<h1>Protocol compliance {{.From}} to {{.To}}</h1>
<p class="caution">{{.Caution}}</p>
<p class="meta">{{.Days}} days in {{.TimeZone}}, compared with {{.PreviousFrom}} to {{.PreviousTo}}. A study is compliant when none of its series has a finding of severity warning or error. {{.TestStudiesExcluded}} test studies left out. Built {{stamp .GeneratedAt}}.</p>
<table>
<thead><tr><th>Protocol</th><th>Scanner</th><th>Studies</th><th>Compliant</th><th>Before</th><th>Change</th><th>Most frequent rules (studies)</th></tr></thead>
<tbody>
{{with .Overall}}<tr><td><strong>{{.Protocol}}</strong></td><td><strong>{{.Scanner}}</strong></td><td class="num">{{.Studies}}</td><td class="num">{{pct .SharePercent}}</td><td class="num">{{pct .PreviousSharePercent}}</td><td class="num">{{points .DeltaPoints}}</td><td>{{topRules .TopRules}}</td></tr>{{end}}
{{range .Groups}}<tr><td>{{.Protocol}}</td><td>{{.Scanner}}</td><td class="num">{{.Studies}}</td><td class="num">{{pct .SharePercent}}</td><td class="num">{{pct .PreviousSharePercent}}</td><td class="num">{{points .DeltaPoints}}</td><td>{{topRules .TopRules}}</td></tr>
{{end}}</tbody>
</table>
</body>
</html>
`))

// WriteHTML writes a printable page: the caution, a summary, and the
// rows with links to their series.
func (l *DailyList) WriteHTML(w io.Writer) error { return dailyPage.Execute(w, l) }

// writeHTML writes a printable page of the compliance report.
func (c *Compliance) writeHTML(w io.Writer) error { return compliancePage.Execute(w, c) }
