package report

import (
	"bytes"
	"context"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/chromedp/cdproto/emulation"
	"github.com/chromedp/cdproto/log"
	"github.com/chromedp/cdproto/network"
	"github.com/chromedp/cdproto/runtime"
	"github.com/chromedp/chromedp"
)

const chromiumPath = "/usr/bin/chromium" // Debian's chromium package

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

// pageCheck is what the in-page JavaScript reports.
type pageCheck struct {
	Count     int      `json:"count"`
	Figures   []figRes `json:"figures"`
	TOC       int      `json:"toc"`
	TOCBroken []string `json:"tocBroken"`
	Tables    int      `json:"tables"`
	Resources []string `json:"resources"`
	Height    float64  `json:"height"`
}

type figRes struct {
	ID      string  `json:"id"`
	Kind    string  `json:"kind"`
	OK      bool    `json:"ok"`
	W       float64 `json:"w"`
	H       float64 `json:"h"`
	Natural int     `json:"natural"`
}

const checkJS = `(() => {
  const figs = [...document.querySelectorAll('figure.fig')];
  const res = figs.map(f => {
    const svg = f.querySelector('.plot > svg'), img = f.querySelector('.plot > img');
    const el = svg || img;
    const b = el ? el.getBoundingClientRect() : {width: 0, height: 0};
    const cs = el ? getComputedStyle(el) : null;
    let ok = !!el && b.width > 0 && b.height > 0 && cs.visibility !== 'hidden' && cs.display !== 'none';
    let natural = 0;
    if (svg) ok = ok && svg.childElementCount > 0 && svg.querySelectorAll('path').length > 0;
    if (img) { natural = img.naturalWidth; ok = ok && img.complete && natural > 0; }
    return {id: f.id, kind: svg ? 'svg' : (img ? 'img' : 'none'), ok, w: b.width, h: b.height, natural};
  });
  const links = [...document.querySelectorAll('nav.toc a')];
  const broken = links.filter(a => !document.getElementById(a.getAttribute('href').slice(1))).map(a => a.getAttribute('href'));
  return {count: figs.length, figures: res, toc: links.length, tocBroken: broken,
    tables: document.querySelectorAll('table').length,
    resources: performance.getEntriesByType('resource').map(e => e.name),
    height: document.documentElement.scrollHeight};
})()`

func TestBrowser(t *testing.T) {
	if _, err := os.Stat(chromiumPath); err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("CI=true but %s is missing: install Debian's chromium package", chromiumPath)
		}
		t.Skipf("%s not found (install Debian's chromium package to run the browser check)", chromiumPath)
	}
	dir := t.TempDir()
	r, nFig := sampleReport(t, dir)
	path := filepath.Join(dir, "report.html")
	if err := Write(path, r); err != nil {
		t.Fatal(err)
	}
	fileURL := "file://" + path

	opts := []chromedp.ExecAllocatorOption{
		chromedp.ExecPath(chromiumPath),
		chromedp.Headless,
		chromedp.NoSandbox,
		chromedp.DisableGPU,
		chromedp.Flag("disable-quic", true),
		chromedp.NoFirstRun,
		chromedp.Flag("disable-background-networking", true),
		chromedp.Flag("disable-component-update", true),
		chromedp.Flag("disable-sync", true),
		chromedp.UserDataDir(t.TempDir()),
	}
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	actx, acancel := chromedp.NewExecAllocator(ctx, opts...)
	defer acancel()
	bctx, bcancel := chromedp.NewContext(actx)
	defer bcancel()

	// Open the tab first so that the listener sees every event of the page.
	if err := chromedp.Do(bctx); err != nil {
		t.Fatalf("start %s: %v", chromiumPath, err)
	}
	var mu sync.Mutex
	var requests, problems []string
	err := chromedp.Listen(bctx, func(ev any) {
		mu.Lock()
		defer mu.Unlock()
		switch e := ev.(type) {
		case *network.EventRequestWillBeSent:
			requests = append(requests, e.Request.URL)
		case *runtime.EventConsoleAPICalled:
			if e.Type == "error" || e.Type == "assert" {
				var args []string
				for _, a := range e.Args {
					args = append(args, string(a.Value)+a.Description)
				}
				problems = append(problems, fmt.Sprintf("console.%s: %s", e.Type, strings.Join(args, " ")))
			}
		case *runtime.EventExceptionThrown:
			d := e.ExceptionDetails
			problems = append(problems, fmt.Sprintf("exception: %s at %s:%d", d.Text, d.URL, d.LineNumber))
		case *log.EventEntryAdded:
			if e.Entry.Level == log.EntryLevelError {
				problems = append(problems, fmt.Sprintf("log %s: %s %s", e.Entry.Source, e.Entry.Text, e.Entry.URL))
			}
		}
	})
	if err != nil {
		t.Fatal(err)
	}

	err = chromedp.Do(bctx,
		chromedp.EmulateViewport(1280, 900),
		chromedp.Navigate(fileURL),
		chromedp.WaitReady("body"),
	)
	if err != nil {
		t.Fatalf("browser: %v", err)
	}
	if _, err := chromedp.Run(bctx, chromedp.Poll[bool](`document.readyState === "complete"`, chromedp.WithPollingTimeout(20*time.Second))); err != nil {
		t.Fatalf("page did not finish loading: %v", err)
	}
	check, err := chromedp.Run(bctx, chromedp.Evaluate[pageCheck](checkJS))
	if err != nil {
		t.Fatalf("evaluate checks: %v", err)
	}
	shot, err := chromedp.Run(bctx, chromedp.FullScreenshot(100))
	if err != nil {
		t.Fatalf("screenshot: %v", err)
	}

	if check.Count != nFig {
		t.Errorf("page shows %d figures, want %d", check.Count, nFig)
	}
	for _, f := range check.Figures {
		if !f.OK {
			t.Errorf("figure %s (%s) not visible: %+v", f.ID, f.Kind, f)
		}
	}
	if check.TOC != len(r.Sections) || len(check.TOCBroken) > 0 {
		t.Errorf("TOC has %d links (want %d), broken %v", check.TOC, len(r.Sections), check.TOCBroken)
	}
	if check.Tables != 2 {
		t.Errorf("%d tables, want 2", check.Tables)
	}
	for _, u := range append(requests, check.Resources...) {
		if u != fileURL && !strings.HasPrefix(u, "data:") {
			t.Errorf("page requested %s; only the file itself and data: URIs are allowed", u)
		}
	}
	mu.Lock()
	for _, p := range problems {
		t.Errorf("browser reported %s", p)
	}
	mu.Unlock()

	out := artefactDir(t)
	shotPath := filepath.Join(out, "report-screenshot.png")
	if !bytes.HasPrefix(shot, pngMagic) {
		t.Errorf("screenshot is not a PNG (%d bytes)", len(shot))
	}
	if err := os.WriteFile(shotPath, shot, 0o644); err != nil {
		t.Fatal(err)
	}
	t.Logf("screenshot (%d bytes, page height %.0f px): %s", len(shot), check.Height, shotPath)

	// Print media emulation, then PDF through CDP.
	if _, err := chromedp.Call(bctx, emulation.SetEmulatedMedia, emulation.SetEmulatedMediaParams{Media: "print"}); err != nil {
		t.Fatalf("emulate print media: %v", err)
	}
	pdf, err := chromedp.Run(bctx, chromedp.PrintToPDF(chromedp.PDFPrintBackground(), chromedp.PDFPreferCSSPageSize()))
	if err != nil {
		t.Fatalf("print to PDF: %v", err)
	}
	if len(pdf) < 10000 || !bytes.HasPrefix(pdf, []byte("%PDF-")) {
		t.Errorf("PDF has %d bytes and starts %q, want a non-empty PDF", len(pdf), pdf[:min(8, len(pdf))])
	}
	pdfPath := filepath.Join(out, "report-print.pdf")
	if err := os.WriteFile(pdfPath, pdf, 0o644); err != nil {
		t.Fatal(err)
	}
	t.Logf("print PDF (%d bytes): %s", len(pdf), pdfPath)
	if d := os.Getenv("STRIA_ARTEFACTS"); d != "" {
		if err := os.WriteFile(filepath.Join(d, "report.html"), mustRead(t, path), 0o644); err != nil {
			t.Fatal(err)
		}
	}
}

func mustRead(t *testing.T, p string) []byte {
	b, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	return b
}
