package render

import (
	"bytes"
	"fmt"
	"html/template"
	"io"

	"github.com/pickwise/pickwise/tables/result"
)

// HTML writes the printable procedure of sol as one self-contained HTML
// document, with the content Markdown writes. It has no scripts, fonts or
// other external resources; its inline style prints black on white on A4
// and US Letter alike (page margins of 15 mm leave a text width that fits
// both), keeps table rows whole across page breaks and repeats table
// headers on each page. Every table cell of the decision tables is a td
// element of class "cell"; entries that are not table cells (forced
// choices, readings of another group) have class "out". Channel names,
// the unit and the title are escaped by html/template.
func HTML(w io.Writer, sol *result.Solution, opt Options) error {
	d, err := newDocument(sol, opt)
	if err != nil {
		return err
	}
	var buf bytes.Buffer
	if err := page.Execute(&buf, d); err != nil {
		return fmt.Errorf("render: %w", err)
	}
	return flush(w, &buf)
}

// page is the HTML template of a document. It is parsed once and only
// executed afterwards, which html/template allows from any goroutine.
var page = template.Must(template.New("page").Parse(`<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{{.Title}}</title>
<style>
@page { margin: 15mm; }
html, body { background: #fff; color: #000; }
body { font: 10pt/1.35 Georgia, "Times New Roman", Times, serif; max-width: 178mm; margin: 1em auto; padding: 0 4mm; }
h1 { font-size: 16pt; margin: 0 0 0.6em; }
h2 { font-size: 13pt; margin: 1.2em 0 0.4em; break-after: avoid; page-break-after: avoid; }
h3 { font-size: 11pt; margin: 1em 0 0.3em; break-after: avoid; page-break-after: avoid; }
p, li { margin: 0.25em 0; }
table { border-collapse: collapse; margin: 0.4em 0 0.8em; }
thead { display: table-header-group; }
tr, th, td { break-inside: avoid; page-break-inside: avoid; }
th, td { border: 0.75pt solid #000; padding: 1pt 4pt; vertical-align: top; }
th { font-weight: bold; text-align: right; }
thead th { text-align: center; }
td { text-align: left; }
table.grid, table.below { font-size: 8pt; }
table.grid td, table.below td { text-align: center; }
table.model th { text-align: left; }
td.out { font-style: italic; }
.caution { border: 1.5pt solid #000; padding: 4pt 6pt; margin: 0.8em 0; break-inside: avoid; page-break-inside: avoid; }
@media print { body { max-width: none; margin: 0; padding: 0; } }
</style>
</head>
<body>
<h1>{{.Title}}</h1>
<h2>Model</h2>
{{template "table" .Model}}
<ul>
{{- range .Facts}}
<li>{{.}}</li>
{{- end}}
</ul>
<h2>Guarantee</h2>
<ul>
{{- range .Cert}}
<li>{{.}}</li>
{{- end}}
</ul>
<p class="caution"><strong>Caution.</strong> {{.Caution}}</p>
<h2>How to use</h2>
<ol>
{{- range .Steps}}
<li>{{.}}</li>
{{- end}}
</ol>
{{with .Below}}{{template "table" .}}{{end}}
<h2>Tables</h2>
{{- range .Sections}}
<section>
<h3>{{.Title}}</h3>
{{- range .Intro}}
<p>{{.}}</p>
{{- end}}
{{template "table" .Table}}
{{- if .Notes}}
<ul>
{{- range .Notes}}
<li>{{.}}</li>
{{- end}}
</ul>
{{- end}}
</section>
{{- end}}
</body>
</html>
{{define "table" -}}
<table class="{{.Class}}">
<thead><tr>{{range .Head}}<th>{{.}}</th>{{end}}</tr></thead>
<tbody>
{{- range .Rows}}
<tr>{{range .Heads}}<th>{{.}}</th>{{end}}{{range .Entries}}{{if .Class}}<td class="{{.Class}}">{{else}}<td>{{end}}{{.Text}}</td>{{end}}</tr>
{{- end}}
</tbody>
</table>
{{- end}}
`))
