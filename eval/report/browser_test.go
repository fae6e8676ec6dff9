package report

import (
	"bytes"
	"os"
	"path/filepath"
	"testing"
	"time"

	"github.com/strialab/stria/eval/report/browsertest"
)

// artefactDir returns $STRIA_ARTEFACTS (created if needed) or a test temp dir.
func artefactDir(t *testing.T) string {
	if d := os.Getenv("STRIA_ARTEFACTS"); d != "" {
		if err := os.MkdirAll(d, 0o755); err != nil {
			t.Fatal(err)
		}
		return d
	}
	return t.TempDir()
}

// TestBrowser renders a report with several figures in headless Chromium
// and checks that every figure is present and visible, the contents links
// resolve, the page makes no request outside itself and reports no console
// error; it keeps a screenshot and a printed PDF as artefacts.
func TestBrowser(t *testing.T) {
	if err := browsertest.Available(); err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("CI=true: %v", err)
		}
		t.Skip(err)
	}
	dir := t.TempDir()
	r, nFig := sampleReport(t, dir)
	path := filepath.Join(dir, "report.html")
	if err := writeFile(path, r); err != nil {
		t.Fatal(err)
	}
	page, err := browsertest.Open(path, t.TempDir(), 60*time.Second)
	if err != nil {
		t.Fatal(err)
	}
	if len(page.Figures) != nFig {
		t.Errorf("page shows %d figures, want %d", len(page.Figures), nFig)
	}
	for _, f := range page.Figures {
		if !f.OK {
			t.Errorf("figure %s (%s) not visible: %+v", f.ID, f.Kind, f)
		}
	}
	if page.TOC != len(r.Sections) || len(page.TOCBroken) > 0 {
		t.Errorf("TOC has %d links (want %d), broken %v", page.TOC, len(r.Sections), page.TOCBroken)
	}
	if page.Tables != 2 {
		t.Errorf("%d tables, want 2", page.Tables)
	}
	for _, u := range page.Requests {
		t.Errorf("page requested %s; only the file itself and data: URIs are allowed", u)
	}
	for _, p := range page.Problems {
		t.Errorf("browser reported %s", p)
	}
	out := artefactDir(t)
	if !bytes.HasPrefix(page.Screenshot, pngMagic) {
		t.Errorf("screenshot is not a PNG (%d bytes)", len(page.Screenshot))
	}
	if len(page.PDF) < 10000 || !bytes.HasPrefix(page.PDF, []byte("%PDF-")) {
		t.Errorf("PDF has %d bytes, want a non-empty PDF", len(page.PDF))
	}
	for name, b := range map[string][]byte{"report-screenshot.png": page.Screenshot, "report-print.pdf": page.PDF} {
		p := filepath.Join(out, name)
		if err := os.WriteFile(p, b, 0o644); err != nil {
			t.Fatal(err)
		}
		t.Logf("%s (%d bytes, page height %.0f px): %s", name, len(b), page.Height, p)
	}
	if d := os.Getenv("STRIA_ARTEFACTS"); d != "" {
		b, err := os.ReadFile(path)
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(d, "report.html"), b, 0o644); err != nil {
			t.Fatal(err)
		}
	}
}
