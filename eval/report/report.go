package report

import (
	"bytes"
	"encoding/base64"
	"fmt"
	"html/template"
	"io"
	"strings"
)

// Report is the content of one report.
type Report struct {
	Title    string
	Subtitle string // e.g. run folder and date
	Sections []Section
	// Cautions are shown in a highlighted box near the top. Repeating each
	// caution next to the numbers it concerns (as a Section note) is the
	// caller's job.
	Cautions []string
}

// Section is one section of the report, listed in the table of contents.
// Its parts appear in this order: paragraphs, notes, figures, tables, code.
type Section struct {
	ID, Heading string   // ID becomes the anchor "s-<ID>" (cleaned, made unique)
	Paragraphs  []string // plain text, escaped
	Notes       []string // warnings, shown as a list with a warning style
	Figures     []Figure
	Tables      []Table
	Code        string // preformatted text, e.g. the resolved YAML config
}

// Figure is a figure with a caption; figures are numbered through the report.
type Figure struct {
	Caption string
	SVG     []byte // inlined as markup (preferred: sharp and printable)
	PNG     []byte // inlined as a data: URI if SVG is nil
	Alt     string // text alternative; the caption is used when empty
}

// Table is a table with a caption; tables are numbered through the report.
type Table struct {
	Caption string
	Header  []string
	Rows    [][]string
	Numeric []bool // right-align these columns (by column index)
}

type figView struct {
	N       int
	ID      string
	Caption string
	Alt     string
	SVG     template.HTML
	PNG     template.URL
}

type tableView struct {
	N       int
	ID      string
	Caption string
	Header  []cell
	Rows    [][]cell
}

type cell struct {
	Text    string
	Numeric bool
}

type sectionView struct {
	ID, Heading string
	Paragraphs  []string
	Notes       []string
	Figures     []figView
	Tables      []tableView
	Code        string
}

type view struct {
	Title, Subtitle string
	Cautions        []string
	Sections        []sectionView
	NFig, NTab      int
	CSS             template.CSS
}

var pngMagic = []byte("\x89PNG\r\n\x1a\n")

// build checks r and prepares the template's view of it.
func build(r *Report) (*view, error) {
	v := &view{Title: r.Title, Subtitle: r.Subtitle, Cautions: r.Cautions, CSS: template.CSS(css)}
	if v.Title == "" {
		v.Title = "stria report"
	}
	used := map[string]bool{}
	for si, s := range r.Sections {
		sv := sectionView{Heading: s.Heading, Paragraphs: s.Paragraphs, Notes: s.Notes, Code: s.Code}
		if sv.Heading == "" {
			sv.Heading = fmt.Sprintf("Section %d", si+1)
		}
		sv.ID = anchor(s.ID, si, used)
		for _, f := range s.Figures {
			v.NFig++
			fv := figView{N: v.NFig, ID: fmt.Sprintf("fig-%d", v.NFig), Caption: f.Caption, Alt: f.Alt}
			if fv.Alt == "" {
				fv.Alt = f.Caption
			}
			switch {
			case f.SVG != nil:
				svg, err := cleanSVG(f.SVG, fmt.Sprintf("f%d-", v.NFig), fv.Alt)
				if err != nil {
					return nil, fmt.Errorf("report: figure %d (section %q): bad SVG: %w", v.NFig, sv.Heading, err)
				}
				fv.SVG = template.HTML(svg)
			case f.PNG != nil:
				if !bytes.HasPrefix(f.PNG, pngMagic) {
					return nil, fmt.Errorf("report: figure %d (section %q): PNG bytes lack the PNG signature", v.NFig, sv.Heading)
				}
				fv.PNG = template.URL("data:image/png;base64," + base64.StdEncoding.EncodeToString(f.PNG))
			default:
				return nil, fmt.Errorf("report: figure %d (section %q) has neither SVG nor PNG", v.NFig, sv.Heading)
			}
			sv.Figures = append(sv.Figures, fv)
		}
		for _, t := range s.Tables {
			v.NTab++
			tv := tableView{N: v.NTab, ID: fmt.Sprintf("table-%d", v.NTab), Caption: t.Caption}
			num := func(j int) bool { return j < len(t.Numeric) && t.Numeric[j] }
			for j, h := range t.Header {
				tv.Header = append(tv.Header, cell{h, num(j)})
			}
			for _, row := range t.Rows {
				var cells []cell
				for j, c := range row {
					cells = append(cells, cell{c, num(j)})
				}
				tv.Rows = append(tv.Rows, cells)
			}
			sv.Tables = append(sv.Tables, tv)
		}
		v.Sections = append(v.Sections, sv)
	}
	return v, nil
}

// anchor makes the section id "s-<id>" from the letters, digits, '-' and
// '_' of id (or "s-<i+1>" when none are left), unique within the report.
func anchor(id string, i int, used map[string]bool) string {
	var b strings.Builder
	for _, r := range strings.ToLower(id) {
		switch {
		case r >= 'a' && r <= 'z', r >= '0' && r <= '9', r == '-', r == '_':
			b.WriteRune(r)
		case r == ' ':
			b.WriteRune('-')
		}
	}
	a := "s-" + b.String()
	if b.Len() == 0 {
		a = fmt.Sprintf("s-%d", i+1)
	}
	base := a
	for n := 2; used[a]; n++ {
		a = fmt.Sprintf("%s-%d", base, n)
	}
	used[a] = true
	return a
}

// Render returns the report as one self-contained HTML document.
func Render(r *Report) ([]byte, error) {
	v, err := build(r)
	if err != nil {
		return nil, err
	}
	var b bytes.Buffer
	if err := pageTmpl.Execute(&b, v); err != nil {
		return nil, fmt.Errorf("report: %w", err)
	}
	return b.Bytes(), nil
}

// Write renders the report and writes it to w as one self-contained HTML
// file (see the package documentation). Nothing is written when the report
// cannot be rendered. Errors name the figure whose SVG or PNG could not be
// used, or say that w failed.
func Write(w io.Writer, r *Report) error {
	b, err := Render(r)
	if err != nil {
		return err
	}
	if _, err := w.Write(b); err != nil {
		return fmt.Errorf("report: write: %w", err)
	}
	return nil
}
