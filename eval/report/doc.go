// Package report writes stria's report: one self-contained HTML file with a
// table of contents, numbered figures and tables, notes, cautions and code
// blocks, readable on a laptop screen and printable to PDF.
//
// Self-contained means no network at all: the CSS is inline, text uses the
// reader's own system fonts, there are no scripts, and figures are inlined.
// An SVG figure is inlined as markup (sharp at any zoom, selectable text,
// prints as vectors) after a strict clean-up: the XML prolog, doctype,
// comments and processing instructions are dropped; <script> and
// <foreignObject> elements, event-handler attributes (on...) and links to
// anything other than a fragment or a data:image URI are removed; and every
// id is prefixed with the figure's number ("f3-"), with url(#...) and
// href="#..." references rewritten to match, so ids from different figures
// cannot collide. A PNG figure is inlined as a data: URI in an <img>.
//
// All text from the caller (title, headings, paragraphs, captions, table
// cells, code) is HTML-escaped. The package never touches the file system:
// Write renders to an io.Writer (train/export writes the file).
package report
