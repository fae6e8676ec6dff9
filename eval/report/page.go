package report

import "html/template"

// pageTmpl is the report's HTML. Everything the caller gives is escaped by
// html/template; only the cleaned SVG (template.HTML) and the PNG data URI
// (template.URL) are trusted.
var pageTmpl = template.Must(template.New("report").Funcs(template.FuncMap{
	"inc": func(i int) int { return i + 1 },
}).Parse(`<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<meta name="generator" content="stria">
<title>{{.Title}}</title>
<style>{{.CSS}}</style>
</head>
<body>
<header class="masthead">
<h1>{{.Title}}</h1>
{{- if .Subtitle}}
<p class="subtitle">{{.Subtitle}}</p>
{{- end}}
<p class="counts">{{len .Sections}} sections · {{.NFig}} figures · {{.NTab}} tables</p>
</header>
{{- if .Cautions}}
<aside class="cautions" role="note" aria-label="Cautions">
<h2>Read before using these numbers</h2>
<ul>
{{- range .Cautions}}
<li>{{.}}</li>
{{- end}}
</ul>
</aside>
{{- end}}
{{- if .Sections}}
<nav class="toc" aria-label="Contents">
<h2>Contents</h2>
<ol>
{{- range .Sections}}
<li><a href="#{{.ID}}">{{.Heading}}</a></li>
{{- end}}
</ol>
</nav>
{{- end}}
<main>
{{- range $i, $s := .Sections}}
<section id="{{$s.ID}}">
<h2><span class="num">{{inc $i}}</span> {{$s.Heading}}</h2>
{{- range $s.Paragraphs}}
<p>{{.}}</p>
{{- end}}
{{- if $s.Notes}}
<ul class="notes" aria-label="Notes">
{{- range $s.Notes}}
<li>{{.}}</li>
{{- end}}
</ul>
{{- end}}
{{- range $s.Figures}}
<figure class="fig" id="{{.ID}}">
<div class="plot">{{if .SVG}}{{.SVG}}{{else}}<img src="{{.PNG}}" alt="{{.Alt}}">{{end}}</div>
<figcaption><span class="label">Figure {{.N}}.</span> {{.Caption}}</figcaption>
</figure>
{{- end}}
{{- range $s.Tables}}
<figure class="tab">
<figcaption id="{{.ID}}-caption"><span class="label">Table {{.N}}.</span> {{.Caption}}</figcaption>
<div class="table-wrap">
<table id="{{.ID}}" aria-labelledby="{{.ID}}-caption">
{{- if .Header}}
<thead><tr>{{range .Header}}<th scope="col"{{if .Numeric}} class="n"{{end}}>{{.Text}}</th>{{end}}</tr></thead>
{{- end}}
<tbody>
{{- range .Rows}}
<tr>{{range .}}<td{{if .Numeric}} class="n"{{end}}>{{.Text}}</td>{{end}}</tr>
{{- end}}
</tbody>
</table>
</div>
</figure>
{{- end}}
{{- if $s.Code}}
<pre class="code"><code>{{$s.Code}}</code></pre>
{{- end}}
</section>
{{- end}}
</main>
<footer><p>Written by stria. This file is self-contained: it loads nothing from the network and can be printed to PDF from any browser.</p></footer>
</body>
</html>
`))
