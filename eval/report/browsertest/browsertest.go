// Package browsertest opens an HTML report in headless Chromium (Debian's
// chromium package) and reports what a reader would see: the figures and
// whether each is visible, the contents links, the tables, every network
// request, and the console errors and exceptions of the page; with a
// full-page screenshot and a PDF printed with print media. It serves the
// tests of the report and of the commands that write reports, so that the
// browser driver stays out of the stria binary.
package browsertest

import (
	"context"
	"errors"
	"fmt"
	"os"
	"strings"
	"sync"
	"time"

	"github.com/chromedp/cdproto/emulation"
	"github.com/chromedp/cdproto/log"
	"github.com/chromedp/cdproto/network"
	"github.com/chromedp/cdproto/runtime"
	"github.com/chromedp/chromedp"
)

// Chromium is the browser used: Debian's chromium package.
const Chromium = "/usr/bin/chromium"

// ErrNoBrowser is returned by Available when Chromium is not installed.
var ErrNoBrowser = errors.New("browsertest: " + Chromium + " not found (install Debian's chromium package)")

// Available reports whether the browser is installed.
func Available() error {
	if _, err := os.Stat(Chromium); err != nil {
		return ErrNoBrowser
	}
	return nil
}

// Figure is one figure of the page as rendered.
type Figure struct {
	ID      string  `json:"id"`
	Kind    string  `json:"kind"` // "svg", "img" or "none"
	OK      bool    `json:"ok"`   // present, non-empty and visible
	W       float64 `json:"w"`
	H       float64 `json:"h"`
	Natural int     `json:"natural"`
}

// Page is what the page showed.
type Page struct {
	Figures   []Figure `json:"figures"`
	TOC       int      `json:"toc"`
	TOCBroken []string `json:"tocBroken"`
	Tables    int      `json:"tables"`
	Resources []string `json:"resources"`
	Height    float64  `json:"height"`

	// Requests are the URLs the page asked for other than the file itself
	// and data: URIs (a self-contained report has none).
	Requests []string `json:"-"`
	// Problems are console errors and assertions, uncaught exceptions and
	// browser log errors.
	Problems   []string `json:"-"`
	Screenshot []byte   `json:"-"` // PNG of the whole page
	PDF        []byte   `json:"-"` // printed with print media
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
  return {figures: res, toc: links.length, tocBroken: broken,
    tables: document.querySelectorAll('table').length,
    resources: performance.getEntriesByType('resource').map(e => e.name),
    height: document.documentElement.scrollHeight};
})()`

// Open renders the HTML file at path (an absolute path) in a fresh
// headless Chromium with its own profile folder userDir, waits for the
// page to load, and returns what it showed. The browser runs with the
// network features that would reach out disabled; timeout bounds the
// whole visit.
func Open(path, userDir string, timeout time.Duration) (*Page, error) {
	if err := Available(); err != nil {
		return nil, err
	}
	fileURL := "file://" + path
	opts := []chromedp.ExecAllocatorOption{
		chromedp.ExecPath(Chromium),
		chromedp.Headless,
		chromedp.NoSandbox,
		chromedp.DisableGPU,
		chromedp.Flag("disable-quic", true),
		chromedp.NoFirstRun,
		chromedp.Flag("disable-background-networking", true),
		chromedp.Flag("disable-component-update", true),
		chromedp.Flag("disable-sync", true),
		chromedp.UserDataDir(userDir),
	}
	ctx, cancel := context.WithTimeout(context.Background(), timeout)
	defer cancel()
	actx, acancel := chromedp.NewExecAllocator(ctx, opts...)
	defer acancel()
	bctx, bcancel := chromedp.NewContext(actx)
	defer bcancel()

	// Open the tab first so that the listener sees every event of the page.
	if err := chromedp.Do(bctx); err != nil {
		return nil, fmt.Errorf("browsertest: start %s: %w", Chromium, err)
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
		return nil, err
	}
	if err := chromedp.Do(bctx, chromedp.EmulateViewport(1280, 900), chromedp.Navigate(fileURL), chromedp.WaitReady("body")); err != nil {
		return nil, fmt.Errorf("browsertest: open %s: %w", path, err)
	}
	if _, err := chromedp.Run(bctx, chromedp.Poll[bool](`document.readyState === "complete"`, chromedp.WithPollingTimeout(20*time.Second))); err != nil {
		return nil, fmt.Errorf("browsertest: %s did not finish loading: %w", path, err)
	}
	page, err := chromedp.Run(bctx, chromedp.Evaluate[Page](checkJS))
	if err != nil {
		return nil, fmt.Errorf("browsertest: evaluate the checks: %w", err)
	}
	if page.Screenshot, err = chromedp.Run(bctx, chromedp.FullScreenshot(100)); err != nil {
		return nil, fmt.Errorf("browsertest: screenshot: %w", err)
	}
	if _, err := chromedp.Call(bctx, emulation.SetEmulatedMedia, emulation.SetEmulatedMediaParams{Media: "print"}); err != nil {
		return nil, fmt.Errorf("browsertest: emulate print media: %w", err)
	}
	if page.PDF, err = chromedp.Run(bctx, chromedp.PrintToPDF(chromedp.PDFPrintBackground(), chromedp.PDFPreferCSSPageSize())); err != nil {
		return nil, fmt.Errorf("browsertest: print to PDF: %w", err)
	}
	mu.Lock()
	defer mu.Unlock()
	for _, u := range append(requests, page.Resources...) {
		if u != fileURL && !strings.HasPrefix(u, "data:") {
			page.Requests = append(page.Requests, u)
		}
	}
	page.Problems = problems
	return &page, nil
}
