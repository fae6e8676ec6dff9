package report

// css is the report's own stylesheet: a single readable column, system fonts
// only (nothing to download), zebra tables, and a print stylesheet.
const css = `
:root {
  --ink: #1c2026; --muted: #5a6270; --rule: #d9dde3; --paper: #ffffff;
  --accent: #1230d8; --zebra: #f3f5f8; --warn-bg: #fff6e0; --warn-edge: #b07800;
  --code-bg: #f5f6f8;
}
* { box-sizing: border-box; }
html { font-size: 100%; }
body {
  margin: 0 auto; padding: 2rem 1.25rem 4rem; max-width: 48rem;
  color: var(--ink); background: var(--paper);
  font: 1rem/1.55 system-ui, -apple-system, "Segoe UI", "Liberation Sans", Arial, sans-serif;
}
h1 { font-size: 1.75rem; line-height: 1.25; margin: 0 0 .25rem; letter-spacing: -.01em; }
h2 { font-size: 1.3rem; margin: 2.5rem 0 .75rem; padding-top: .5rem; border-top: 1px solid var(--rule); }
h2 .num { color: var(--muted); font-weight: 500; margin-right: .35rem; }
p { margin: .6rem 0; }
a { color: var(--accent); }
.masthead { margin-bottom: 1.5rem; }
.subtitle { color: var(--muted); margin: 0; font-size: .95rem; }
.counts { color: var(--muted); margin: .25rem 0 0; font-size: .85rem; }
.cautions {
  background: var(--warn-bg); border-left: .35rem solid var(--warn-edge);
  padding: .75rem 1rem; margin: 1.25rem 0; border-radius: .25rem;
}
.cautions h2 { border: 0; margin: 0 0 .4rem; padding: 0; font-size: 1rem; }
.cautions ul { margin: 0; padding-left: 1.2rem; }
.toc { margin: 1.25rem 0 2rem; padding: .75rem 1rem; background: var(--zebra); border-radius: .25rem; }
.toc h2 { border: 0; margin: 0 0 .3rem; padding: 0; font-size: 1rem; }
.toc ol { margin: 0; padding-left: 1.4rem; columns: 2 16rem; }
.toc a { text-decoration: none; }
.toc a:hover { text-decoration: underline; }
ul.notes { list-style: none; padding: 0; margin: .75rem 0; }
ul.notes li {
  margin: .35rem 0; padding: .4rem .75rem .4rem 2rem; position: relative;
  background: var(--warn-bg); border-left: .25rem solid var(--warn-edge);
}
ul.notes li::before { content: "!"; position: absolute; left: .75rem; font-weight: 700; color: var(--warn-edge); }
figure.fig { margin: 1.5rem 0; }
.plot { text-align: center; }
.plot svg, .plot img { display: inline-block; width: 100%; max-width: 36rem; height: auto; }
figcaption { font-size: .9rem; color: var(--muted); margin-top: .4rem; }
.label { font-weight: 650; color: var(--ink); }
figure.tab { margin: 1.25rem 0; }
figure.tab figcaption { margin: 0 0 .4rem; overflow-wrap: anywhere; }
.table-wrap { overflow-x: auto; }
table { border-collapse: collapse; font-size: .9rem; min-width: 50%; }
th, td { padding: .3rem .7rem; text-align: left; vertical-align: top; }
thead th { border-bottom: 2px solid var(--ink); font-weight: 600; }
tbody tr:nth-child(even) { background: var(--zebra); }
tbody tr:last-child td { border-bottom: 1px solid var(--rule); }
td.n, th.n { text-align: right; font-variant-numeric: tabular-nums; }
pre.code {
  background: var(--code-bg); border: 1px solid var(--rule); border-radius: .25rem;
  padding: .75rem 1rem; overflow-x: auto; font-size: .85rem; line-height: 1.45;
}
code, pre { font-family: ui-monospace, "DejaVu Sans Mono", "Liberation Mono", Menlo, Consolas, monospace; }
footer { margin-top: 3rem; border-top: 1px solid var(--rule); color: var(--muted); font-size: .8rem; }

@media print {
  @page { size: auto; margin: 18mm 16mm; }
  body { max-width: none; padding: 0; font-size: 10.5pt; color: #000; }
  h1, h2, .label, .subtitle, .counts, figcaption, footer { color: #000; }
  nav.toc { display: none; }
  a { color: #000; text-decoration: none; }
  h2 { break-after: avoid; page-break-after: avoid; }
  figure.fig, figure.tab, pre.code, .cautions, ul.notes li { break-inside: avoid; page-break-inside: avoid; }
  .plot svg, .plot img { width: auto; max-width: 100%; }
  .plot img { width: 3.5in; }
  .cautions, ul.notes li { background: none; border-left-color: #000; }
  tbody tr:nth-child(even) { background: #eeeeee; -webkit-print-color-adjust: exact; print-color-adjust: exact; }
  .table-wrap { overflow: visible; }
  pre.code { white-space: pre-wrap; background: none; }
}
`
