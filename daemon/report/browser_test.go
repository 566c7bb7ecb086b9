package report

import (
	"context"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/chromedp/chromedp"
)

// chromium returns the headless browser to test with: PLUMBLINE_CHROMIUM_BIN
// (set by scripts/testenv.sh), else chromium on the PATH. A missing browser
// fails the test: the page's check in a real browser is part of the suite.
func chromium(t *testing.T) string {
	t.Helper()
	if p := os.Getenv("PLUMBLINE_CHROMIUM_BIN"); p != "" {
		return p
	}
	for _, name := range []string{"chromium", "chromium-browser", "/usr/bin/chromium"} {
		if p, err := exec.LookPath(name); err == nil {
			return p
		}
	}
	t.Fatal("no headless Chromium: install Debian's chromium (apt-get install -y chromium) or set PLUMBLINE_CHROMIUM_BIN")
	return ""
}

// pageCheck is what the browser reports about the page.
type pageCheck struct {
	SVGs     int    `json:"svgs"`
	Figures  int    `json:"figures"`
	Small    int    `json:"small"`
	Drawn    int    `json:"drawn"`
	Images   int    `json:"images"`
	Font     string `json:"font"`
	Tables   int    `json:"tables"`
	Cautions int    `json:"cautions"`
}

const checkJS = `(async () => {
  await document.fonts.ready;
  const svgs = [...document.querySelectorAll('svg')];
  return {
    svgs: svgs.length,
    figures: document.querySelectorAll('figure > svg').length,
    small: svgs.filter(s => { const r = s.getBoundingClientRect(); return r.width < 300 || r.height < 100; }).length,
    drawn: svgs.filter(s => s.querySelectorAll('path').length >= 10 && s.querySelectorAll('text').length >= 3).length,
    images: document.querySelectorAll('svg image').length,
    font: [...document.fonts].filter(f => f.family.replace(/"/g, '') === 'Liberation Serif').map(f => f.status).join(','),
    tables: document.querySelectorAll('table').length,
    cautions: document.querySelectorAll('.caution').length,
  };
})()`

// openInBrowser loads a report page in headless Chromium with every host
// name unresolvable (a page that needed the network would log errors),
// and returns the page check and the console errors. With shot set, it
// also writes a full-page screenshot there.
func openInBrowser(t *testing.T, page, shot string) (pageCheck, []string) {
	t.Helper()
	opts := []chromedp.ExecAllocatorOption{
		chromedp.ExecPath(chromium(t)),
		chromedp.Headless, chromedp.NoSandbox, chromedp.DisableGPU, chromedp.NoFirstRun, chromedp.NoDefaultBrowserCheck,
		chromedp.Flag("disable-quic", true), chromedp.Flag("disable-background-networking", true),
		chromedp.Flag("disable-component-update", true), chromedp.Flag("disable-sync", true),
		chromedp.Flag("host-resolver-rules", "MAP * ~NOTFOUND"),
		chromedp.UserDataDir(t.TempDir()), chromedp.WindowSize(1200, 900),
	}
	ctx, cancel := context.WithTimeout(context.Background(), 90*time.Second)
	defer cancel()
	actx, acancel := chromedp.NewExecAllocator(ctx, opts...)
	defer acancel()
	tctx, tcancel := chromedp.NewContext(actx)
	defer tcancel()

	var mu sync.Mutex
	var errs []string
	msgs := chromedp.Console(tctx)
	done := make(chan struct{})
	go func() {
		defer close(done)
		for m, err := range msgs {
			if err != nil {
				return
			}
			if m.Type == chromedp.ConsoleError || m.IsException() {
				mu.Lock()
				errs = append(errs, m.String())
				mu.Unlock()
			}
		}
	}()
	abs, err := filepath.Abs(page)
	if err != nil {
		t.Fatal(err)
	}
	if err := chromedp.Do(tctx, chromedp.Navigate("file://"+abs)); err != nil {
		t.Fatalf("open %s in Chromium: %v", page, err)
	}
	check, err := chromedp.Run(tctx, chromedp.Evaluate[pageCheck](checkJS, chromedp.EvalAwaitPromise))
	if err != nil {
		t.Fatalf("check %s in Chromium: %v", page, err)
	}
	if shot != "" {
		png, err := chromedp.Run(tctx, chromedp.FullScreenshot(100))
		if err != nil {
			t.Fatalf("screenshot: %v", err)
		}
		if err := os.WriteFile(shot, png, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	// Let late messages (a failed resource load) arrive, then stop.
	if err := chromedp.Do(tctx, chromedp.Sleep(300*time.Millisecond)); err != nil {
		t.Fatal(err)
	}
	tcancel()
	<-done
	mu.Lock()
	defer mu.Unlock()
	return check, append([]string(nil), errs...)
}

// The report opens in headless Chromium with no console error, every
// plot present and drawn at a readable size, the plot font loaded from
// the page itself, and both caution boxes shown.
func TestReportInChromium(t *testing.T) {
	dir := t.TempDir()
	r := buildScenario(t, 0)
	files, err := r.WriteFiles(filepath.Join(dir, "report.html"))
	if err != nil {
		t.Fatal(err)
	}
	// Plots by construction: the network map, balance and heat strip, and
	// for each of the two zones balance, CUSUM, night flow, heat strip and
	// map: 3 + 2×5.
	const wantPlots = 3 + 2*5
	if files.Plots != wantPlots {
		t.Errorf("writer reports %d plots, want %d", files.Plots, wantPlots)
	}
	check, errs := openInBrowser(t, files.HTML, os.Getenv("PLUMBLINE_REPORT_SCREENSHOT"))
	for _, e := range errs {
		t.Errorf("console: %s", e)
	}
	if check.SVGs != wantPlots || check.Figures != wantPlots {
		t.Errorf("browser sees %d svg elements (%d in figures), want %d", check.SVGs, check.Figures, wantPlots)
	}
	if check.Small != 0 {
		t.Errorf("%d plots drawn smaller than 300×100 px", check.Small)
	}
	if check.Drawn != wantPlots {
		t.Errorf("%d of %d plots have paths and text", check.Drawn, wantPlots)
	}
	if check.Images != 3 {
		t.Errorf("%d heat-strip images, want 3 (network and two zones)", check.Images)
	}
	if !strings.Contains(check.Font, "loaded") {
		t.Errorf("embedded font status %q, want loaded", check.Font)
	}
	if check.Tables != 2 || check.Cautions != 2 {
		t.Errorf("%d tables and %d caution boxes, want 2 and 2", check.Tables, check.Cautions)
	}
	for _, p := range []string{files.JSON, files.CSV} {
		if st, err := os.Stat(p); err != nil || st.Size() == 0 {
			t.Errorf("summary %s: %v", p, err)
		}
	}
}

// The browser check itself sees what it must catch: a script error and
// a resource the page tries to fetch from outside.
func TestBrowserCheckSeesErrors(t *testing.T) {
	page := filepath.Join(t.TempDir(), "bad.html")
	html := `<!DOCTYPE html><html><head><title>bad</title></head><body>
<img src="http://unreachable.invalid/x.png"><svg width="10" height="10"></svg>
<script>throw new Error("boom")</script></body></html>`
	if err := os.WriteFile(page, []byte(html), 0o644); err != nil {
		t.Fatal(err)
	}
	check, errs := openInBrowser(t, page, "")
	var boom, fetch bool
	for _, e := range errs {
		boom = boom || strings.Contains(e, "boom")
		fetch = fetch || strings.Contains(e, "ERR_NAME_NOT_RESOLVED") || strings.Contains(e, "Failed to load")
	}
	if !boom || !fetch {
		t.Errorf("console errors %q: script error seen %v, outside fetch seen %v", errs, boom, fetch)
	}
	if check.SVGs != 1 || check.Small != 1 {
		t.Errorf("check of a 10×10 svg: %+v", check)
	}
}
