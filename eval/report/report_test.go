package report

import (
	"bytes"
	"encoding/xml"
	"errors"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"github.com/strialab/stria/eval/figure"
)

// sampleReport draws synthetic figures with eval/figure into dir and returns a
// report with nSVG inlined SVG figures, one PNG figure, two tables, notes,
// cautions and a code block. The data are a synthetic heading-tuned population.
func sampleReport(t testing.TB, dir string) (r *Report, nFig int) {
	t.Helper()
	rng := rand.New(rand.NewPCG(11, 12))
	ax := figure.AxisLabels{Label: "heading", Unit: "deg", Periodic: true, Period: 360}
	const C, K = 4, 9
	filt := make([]float64, C*K)
	for i := range filt {
		filt[i] = rng.NormFloat64() * math.Exp(-math.Pow(float64(i%K-4), 2)/8)
	}
	toFiles := func(base string) func(*figure.Image, error) error {
		return func(im *figure.Image, err error) error {
			if err != nil {
				return err
			}
			if err := os.WriteFile(base+".svg", im.SVG, 0o644); err != nil {
				return err
			}
			return os.WriteFile(base+".png", im.PNG, 0o644)
		}
	}
	must := func(err error) {
		t.Helper()
		if err != nil {
			t.Fatal(err)
		}
	}
	must(toFiles(filepath.Join(dir, "filters"))(figure.Filters(filt, C, K, 6, ax)))
	var cen, mean, sem, fx, fy []float64
	vm := func(d float64) float64 { return 3 + 15*math.Exp(1.5*(math.Cos((d-200)*math.Pi/180)-1)) }
	for b := range 60 {
		x := 3 + 6*float64(b)
		cen, mean, sem = append(cen, x), append(mean, vm(x)+rng.NormFloat64()), append(sem, 0.5+0.5*rng.Float64())
	}
	for i := 0; i <= 360; i += 2 {
		fx, fy = append(fx, float64(i)), append(fy, vm(float64(i)))
	}
	must(toFiles(filepath.Join(dir, "tuning"))(figure.Tuning(cen, mean, sem,
		[]figure.Curve{{Name: "encoder", X: cen, Y: mean}, {Name: "von Mises", X: fx, Y: fy}}, ax, "rate (spikes/s)")))
	a, b := make([]float64, 800), make([]float64, 800)
	pref := make([]float64, 800)
	for i := range a {
		a[i] = 0.55 + 0.15*rng.NormFloat64()
		b[i] = a[i] + 0.04 + 0.07*rng.NormFloat64()
		pref[i] = 360 * rng.Float64()
	}
	a[5] = math.NaN()
	must(toFiles(filepath.Join(dir, "hists"))(figure.Histograms(map[string][]float64{"von Mises": a, "encoder": b}, []string{"von Mises", "encoder"}, "CC_norm", 30)))
	must(toFiles(filepath.Join(dir, "scatter"))(figure.Scatter(a, b, "von Mises", "encoder", "CC_norm")))
	must(toFiles(filepath.Join(dir, "preferred"))(figure.Preferred(pref, ax, 24)))
	read := func(name string) []byte {
		t.Helper()
		data, err := os.ReadFile(filepath.Join(dir, name))
		must(err)
		return data
	}
	r = &Report{
		Title:    "Synthetic heading population <test & check>",
		Subtitle: "run folder runs/demo-0001 · 2025-01-01",
		Cautions: []string{"12 neurons have signal power <= 0: their CC_norm is NaN & excluded.", "Only 4 repeats per heading: noise ceilings are uncertain."},
		Sections: []Section{
			{ID: "summary", Heading: "Summary", Paragraphs: []string{"The encoder beats the tuning fit for most neurons.", "Scores are on held-out trials <only>."},
				Tables: []Table{{Caption: "Median scores per model.", Header: []string{"model", "CC_norm", "R²"}, Numeric: []bool{false, true, true},
					Rows: [][]string{{"von Mises", "0.55", "0.21"}, {"encoder", "0.60", "0.26"}, {"constant", "—", "0.00"}}}}},
			{ID: "filters", Heading: "Shared filters", Figures: []Figure{{Caption: "First-layer filters against tap offset.", SVG: read("filters.svg")}}},
			{ID: "neurons", Heading: "Example neuron", Notes: []string{"Neuron 17 has 2 empty bins."},
				Figures: []Figure{{Caption: "Tuning of neuron 17: data and two models.", SVG: read("tuning.svg")},
					{Caption: "Same neuron as a PNG fallback.", PNG: read("tuning.png"), Alt: "tuning curve of neuron 17"}}},
			{ID: "population", Heading: "Population", Figures: []Figure{
				{Caption: "CC_norm per model.", SVG: read("hists.svg")},
				{Caption: "CC_norm, encoder against von Mises.", SVG: read("scatter.svg")},
				{Caption: "Preferred headings.", SVG: read("preferred.svg")}},
				Tables: []Table{{Caption: "Counts.", Header: []string{"what", "n"}, Numeric: []bool{false, true}, Rows: [][]string{{"neurons", "800"}, {"NaN", "1"}}}}},
			{ID: "summary", Heading: "Configuration", Code: "model:\n  filters: 4   # <channels>\n  kernel: 9\n"},
		},
	}
	return r, 6
}

func TestWrite(t *testing.T) {
	dir := t.TempDir()
	r, nFig := sampleReport(t, dir)
	path := filepath.Join(dir, "report.html")
	if err := writeFile(path, r); err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	s := string(b)
	count := func(sub string) int { return strings.Count(s, sub) }
	if got := count(`<figure class="fig"`); got != nFig {
		t.Errorf("%d figures, want %d", got, nFig)
	}
	if got := count("<svg"); got != nFig-1 {
		t.Errorf("%d inline <svg>, want %d", got, nFig-1)
	}
	if got := count(`<img src="data:image/png;base64,`); got != 1 {
		t.Errorf("%d PNG data URIs, want 1", got)
	}
	for i := 1; i <= nFig; i++ {
		if !strings.Contains(s, `<span class="label">Figure `+itoa(i)+`.</span>`) {
			t.Errorf("no caption label Figure %d", i)
		}
	}
	// Escaping: the caller's markup characters never reach the page raw.
	for _, raw := range []string{"<test & check>", "<only>", "<channels>", "NaN & excluded"} {
		if strings.Contains(s, raw) {
			t.Errorf("unescaped text %q in page", raw)
		}
	}
	for _, esc := range []string{"&lt;test &amp; check&gt;", "&lt;only&gt;", "# &lt;channels&gt;"} {
		if !strings.Contains(s, esc) {
			t.Errorf("escaped text %q missing", esc)
		}
	}
	// Self-contained: no external references of any kind.
	for _, bad := range []string{"<?xml", "<!DOCTYPE svg", "<!--", "http://", "https://", "<script", "<link", "@import", "src=\"http"} {
		// The SVG namespace URIs are attribute values, not fetches; count them apart.
		if bad == "http://" {
			rest := strings.NewReplacer("http://www.w3.org/2000/svg", "", "http://www.w3.org/1999/xlink", "").Replace(s)
			if strings.Contains(rest, bad) {
				t.Errorf("page refers to %s", bad)
			}
			continue
		}
		if strings.Contains(s, bad) {
			t.Errorf("page contains %q", bad)
		}
	}
	// Unique ids, and every TOC link points at one of them.
	ids := map[string]int{}
	for _, m := range regexp.MustCompile(` id="([^"]+)"`).FindAllStringSubmatch(s, -1) {
		ids[m[1]]++
	}
	for id, n := range ids {
		if n > 1 {
			t.Errorf("id %q used %d times", id, n)
		}
	}
	links := regexp.MustCompile(`<a href="#([^"]+)">`).FindAllStringSubmatch(s, -1)
	if len(links) != len(r.Sections) {
		t.Errorf("%d TOC links, want %d", len(links), len(r.Sections))
	}
	for _, m := range links {
		if ids[m[1]] != 1 {
			t.Errorf("TOC link #%s has no target", m[1])
		}
	}
	if ids["s-summary"] != 1 || ids["s-summary-2"] != 1 {
		t.Errorf("duplicate section ID not made unique: %v", ids)
	}
	if got := count(`<td class="n">`); got != 3*2+2 {
		t.Errorf("%d right-aligned cells, want 8", got)
	}
	if !strings.Contains(s, "@media print") {
		t.Error("no print stylesheet")
	}
	ents, _ := os.ReadDir(dir)
	for _, e := range ents {
		if strings.Contains(e.Name(), ".tmp") {
			t.Errorf("temporary file %s left behind", e.Name())
		}
	}
}

func itoa(i int) string { return string(rune('0' + i)) }

func TestCleanSVG(t *testing.T) {
	src := []byte(`<?xml version="1.0"?>
<!DOCTYPE svg PUBLIC "-//W3C//DTD SVG 1.1//EN" "x.dtd">
<!-- comment -->
<svg xmlns="http://www.w3.org/2000/svg" xmlns:xlink="http://www.w3.org/1999/xlink" width="10pt" height="10pt" onload="alert(1)" aria-label="old">
<defs><clipPath id="c1"><rect width="5" height="5"/></clipPath></defs>
<script>alert(2)</script>
<foreignObject><div>html</div></foreignObject>
<g clip-path="url(#c1)" style="fill:url( #c1 )"><use xlink:href="#c1"/><a href="javascript:alert(3)">x</a>
<image href="data:image/png;base64,AAAA"/><image xlink:href="http://example.org/x.png"/>
<text>a &lt; b &amp; c</text></g>
</svg>`)
	got, err := cleanSVG(src, "f7-", `alt "quoted" <text>`)
	if err != nil {
		t.Fatal(err)
	}
	s := string(got)
	for _, bad := range []string{"<?xml", "DOCTYPE", "comment", "onload", "alert", "<script", "foreignObject", "javascript", "example.org", `id="c1"`, "url(#c1)", `"#c1"`, "old"} {
		if strings.Contains(s, bad) {
			t.Errorf("cleaned SVG still has %q:\n%s", bad, s)
		}
	}
	for _, want := range []string{`id="f7-c1"`, `clip-path="url(#f7-c1)"`, `fill:url(#f7-c1)`, `xlink:href="#f7-c1"`, `href="data:image/png;base64,AAAA"`,
		`a &lt; b &amp; c`, `role="img" aria-label="alt &#34;quoted&#34; &lt;text&gt;"`} {
		if !strings.Contains(s, want) {
			t.Errorf("cleaned SVG lacks %q:\n%s", want, s)
		}
	}
	// The result is still well-formed XML.
	d := xml.NewDecoder(bytes.NewReader(got))
	for {
		if _, err := d.Token(); err != nil {
			if err.Error() != "EOF" {
				t.Errorf("cleaned SVG is not well-formed: %v", err)
			}
			break
		}
	}
}

func TestWriteErrors(t *testing.T) {
	for name, tc := range map[string]struct {
		fig  Figure
		want string
	}{
		"not svg":  {Figure{SVG: []byte("<html></html>")}, "figure 1"},
		"broken":   {Figure{SVG: []byte("<svg><g></svg")}, "bad SVG"},
		"not png":  {Figure{PNG: []byte("GIF89a")}, "PNG signature"},
		"no image": {Figure{Caption: "empty"}, "neither SVG nor PNG"},
	} {
		t.Run(name, func(t *testing.T) {
			var out bytes.Buffer
			err := Write(&out, &Report{Sections: []Section{{Heading: "A", Figures: []Figure{tc.fig}}}})
			if err == nil || !strings.Contains(err.Error(), tc.want) || !strings.HasPrefix(err.Error(), "report: ") {
				t.Errorf("err = %v, want a report: error containing %q", err, tc.want)
			}
			if out.Len() != 0 {
				t.Errorf("a refused report wrote %d bytes", out.Len())
			}
		})
	}
	boom := errors.New("disk full")
	if err := Write(failWriter{boom}, &Report{}); !errors.Is(err, boom) || !strings.HasPrefix(err.Error(), "report: ") {
		t.Errorf("err = %v, want a report: error wrapping the writer's", err)
	}
}

type failWriter struct{ err error }

func (f failWriter) Write([]byte) (int, error) { return 0, f.err }

// writeFile writes the report to path, as train/export does.
func writeFile(path string, r *Report) error {
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	if err := Write(f, r); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}

func TestDeterministic(t *testing.T) {
	dir := t.TempDir()
	r, _ := sampleReport(t, dir)
	x, err := Render(r)
	if err != nil {
		t.Fatal(err)
	}
	y, _ := Render(r)
	if !bytes.Equal(x, y) {
		t.Error("two renders of the same report differ")
	}
}
