package web

import (
	"bytes"
	"context"
	"encoding/json"
	"flag"
	"fmt"
	"image"
	"image/png"
	"math"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/chromedp/cdproto/cdp"
	cdplog "github.com/chromedp/cdproto/log"
	cdpnet "github.com/chromedp/cdproto/network"
	"github.com/chromedp/cdproto/runtime"
	"github.com/chromedp/chromedp"
	"github.com/rs/zerolog"

	"plumbline/model/network"
)

var updateScreenshot = flag.Bool("update-screenshot", false, "write the browser test's screenshot to docs/operator-page.png")

// chromiumBin is the browser the test drives: PLUMBLINE_CHROMIUM_BIN
// (scripts/testenv.sh installs and exports it), else Debian's path.
func chromiumBin(t *testing.T) string {
	bin := os.Getenv("PLUMBLINE_CHROMIUM_BIN")
	if bin == "" {
		bin = "/usr/bin/chromium"
	}
	st, err := os.Stat(bin)
	if err != nil || st.IsDir() || st.Mode()&0o111 == 0 {
		t.Fatalf("no Chromium at %s (set PLUMBLINE_CHROMIUM_BIN or run under scripts/testenv.sh, which installs Debian's chromium): %v", bin, err)
	}
	return bin
}

// highlight is the page's colour for suspected locations (#e3127d).
var highlight = [3]int{0xe3, 0x12, 0x7d}

func isHighlight(r, g, b int) bool {
	return abs(r-highlight[0])+abs(g-highlight[1])+abs(b-highlight[2]) < 60
}

func abs(x int) int {
	if x < 0 {
		return -x
	}
	return x
}

// TestOperatorPage drives the page in headless Chromium against the
// handler on a real loopback listener, with the demo town's view and a
// real alerts manager behind the alerts API.
func TestOperatorPage(t *testing.T) {
	bin := chromiumBin(t)
	d := loadDemo(t)
	const token = "op-token-7f3a"
	api := d.openAlerts(t, token)
	p := &demoProvider{d: d, ready: true}
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	srv := &http.Server{Handler: NewHandler(d.cfg.Network, p, api, zerolog.Nop()), ReadHeaderTimeout: 5 * time.Second}
	served := make(chan error, 1)
	go func() { served <- srv.Serve(ln) }()
	defer func() {
		srv.Close()
		<-served
	}()
	base := "http://" + ln.Addr().String()

	alloc, cancelAlloc := chromedp.NewExecAllocator(context.Background(),
		chromedp.ExecPath(bin),
		chromedp.Flag("headless", true),
		chromedp.NoSandbox,
		chromedp.Flag("disable-gpu", true),
		chromedp.Flag("disable-quic", true),
		chromedp.NoFirstRun,
		chromedp.Flag("disable-background-networking", true),
		chromedp.Flag("disable-component-update", true),
		chromedp.Flag("disable-sync", true),
		chromedp.Flag("hide-scrollbars", true),
		chromedp.UserDataDir(t.TempDir()),
		chromedp.WindowSize(1400, 1000),
	)
	defer cancelAlloc()
	bctx, cancelBrowser := chromedp.NewContext(alloc)
	defer cancelBrowser()
	ctx, cancel := context.WithTimeout(bctx, 90*time.Second)
	defer cancel()

	var mu sync.Mutex
	var problems, requests []string
	if err := chromedp.Listen(bctx, func(ev any) {
		mu.Lock()
		defer mu.Unlock()
		switch e := ev.(type) {
		case *runtime.EventConsoleAPICalled:
			if e.Type == runtime.ConsoleAPICalledTypeError || e.Type == runtime.ConsoleAPICalledTypeWarning {
				var parts []string
				for _, a := range e.Args {
					parts = append(parts, string(a.Value)+a.Description)
				}
				problems = append(problems, "console."+string(e.Type)+": "+strings.Join(parts, " "))
			}
		case *runtime.EventExceptionThrown:
			problems = append(problems, "exception: "+e.ExceptionDetails.Text+" "+describe(e.ExceptionDetails.Exception))
		case *cdplog.EventEntryAdded:
			// The wrong-token step below is answered 401 on purpose; the
			// browser logs that response, and nothing else may be logged.
			if e.Entry.Level == cdplog.EntryLevelError || e.Entry.Level == cdplog.EntryLevelWarning {
				if e.Entry.Source == cdplog.EntrySourceNetwork && strings.Contains(e.Entry.Text, "401") && strings.Contains(e.Entry.URL, "/api/alerts/") {
					return
				}
				problems = append(problems, "log "+string(e.Entry.Level)+": "+e.Entry.Text+" "+e.Entry.URL)
			}
		case *cdpnet.EventRequestWillBeSent:
			requests = append(requests, e.Request.URL)
		}
	}); err != nil {
		t.Fatal(err)
	}
	if _, err := chromedp.Call(ctx, cdplog.Enable, cdp.Empty{}); err != nil {
		t.Fatal(err)
	}
	if _, err := chromedp.Call(ctx, cdpnet.Enable, cdpnet.EnableParams{}); err != nil {
		t.Fatal(err)
	}
	if err := chromedp.Do(ctx,
		chromedp.Navigate(base+"/"),
		chromedp.WaitVisible(chromedp.CSS(`body[data-loaded]`)),
		chromedp.WaitReady(chromedp.CSS(`#map g.cand[data-rank="1"]`)),
		chromedp.WaitVisible(chromedp.CSS(`#alerts .alert[data-id]`)),
	); err != nil {
		t.Fatalf("page did not load: %v", err)
	}

	// Every link with a polyline is drawn once.
	wantLinks := 0
	for i := range d.cfg.Network.Links {
		if drawable(d.cfg.Network, i) {
			wantLinks++
		}
	}
	gotLinks, err := chromedp.Run(ctx, chromedp.Evaluate[int](`document.querySelectorAll('#map .links polyline.link').length`))
	if err != nil {
		t.Fatal(err)
	}
	if gotLinks != wantLinks || wantLinks == 0 {
		t.Errorf("map: %d link elements, want %d", gotLinks, wantLinks)
	}
	// The rank-1 candidate is the leak junction; every candidate is ranked.
	ranked, err := chromedp.Run(ctx, chromedp.Evaluate[[]string](`[...document.querySelectorAll('#map g.cand.leak')].sort((a,b)=>a.dataset.rank-b.dataset.rank).map(g=>g.dataset.rank+":"+g.dataset.id)`))
	if err != nil {
		t.Fatal(err)
	}
	var want []string
	for i, id := range d.cands {
		want = append(want, fmt.Sprintf("%d:%s", i+1, id))
	}
	if strings.Join(ranked, " ") != strings.Join(want, " ") {
		t.Errorf("leak candidates on the map: got %v, want %v", ranked, want)
	}
	// The blockage candidates are traced along their links, best first.
	traced, err := chromedp.Run(ctx, chromedp.Evaluate[[]string](`[...document.querySelectorAll('#map g.cand.blockage')].filter(g=>g.querySelector('polyline.trace')).sort((a,b)=>a.dataset.rank-b.dataset.rank).map(g=>g.dataset.rank+":"+g.dataset.id)`))
	if err != nil {
		t.Fatal(err)
	}
	want = want[:0]
	for i, id := range d.blocked {
		want = append(want, fmt.Sprintf("%d:%s", i+1, id))
	}
	if strings.Join(traced, " ") != strings.Join(want, " ") {
		t.Errorf("blockage candidates on the map: got %v, want %v", traced, want)
	}
	// One sensor marker per positioned sensor, coloured by quality.
	sensors, err := chromedp.Run(ctx, chromedp.Evaluate[map[string]string](`Object.fromEntries([...document.querySelectorAll('#map g.sensors [data-id]')].map(e=>[e.dataset.id, e.dataset.quality]))`))
	if err != nil {
		t.Fatal(err)
	}
	if len(sensors) != len(d.view.Sensors) || sensors[d.view.Sensors[3].ID] != "stale" || sensors[d.view.Sensors[5].ID] != "missing" {
		t.Errorf("sensor markers: got %d %v, want %d with sensor 3 stale and 5 missing", len(sensors), sensors, len(d.view.Sensors))
	}
	// The zone table: one row per zone with a sparkline of 15 nights.
	rows, err := chromedp.Run(ctx, chromedp.Evaluate[[]int](`[...document.querySelectorAll('#zones tbody tr[data-zone]')].map(r=>r.querySelectorAll('svg.spark circle').length)`))
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) != len(d.cfg.Zones) {
		t.Errorf("zone table: %d rows, want %d", len(rows), len(d.cfg.Zones))
	}
	for i, n := range rows {
		if n != 15 {
			t.Errorf("zone row %d: %d night points, want 15", i, n)
		}
	}

	// Acknowledge the alert: first with a wrong token (refused, asked
	// again), then with the right one.
	alerts, _ := d.manager.Alerts(false)
	id := ""
	for _, a := range alerts {
		if a.Kind == "leak" {
			id = a.ID
		}
	}
	if len(alerts) != 2 || id == "" {
		t.Fatalf("alerts: %+v, want 2 with a leak", alerts)
	}
	row := fmt.Sprintf(`#alerts .alert[data-id="%s"]`, id)
	if err := chromedp.Do(ctx,
		chromedp.Click(chromedp.CSS(row+` button[data-action="ack"]`)),
		chromedp.WaitVisible(chromedp.CSS(`#act-by`)),
		chromedp.SendKeys(chromedp.CSS(`#act-by`), "Mara Quill"),
		chromedp.SendKeys(chromedp.CSS(`#act-text`), "crew sent to the hydrant"),
		chromedp.SendKeys(chromedp.CSS(`#act-token`), "wrong"),
		chromedp.Click(chromedp.CSS(`#act-submit`)),
	); err != nil {
		t.Fatal(err)
	}
	msg, err := chromedp.Run(ctx, chromedp.Poll[string](`(t => t.includes("refused") ? t : false)(document.getElementById("act-error").textContent)`))
	if err != nil {
		t.Fatalf("wrong token: no refusal shown: %v", err)
	}
	if st, _, _ := d.manager.Get(id); st.State != "unacknowledged" {
		t.Errorf("after the wrong token: state %s, want unacknowledged", st.State)
	}
	t.Logf("wrong token: %s", msg)
	if v, _ := chromedp.Run(ctx, chromedp.Value(chromedp.CSS(`#act-token`))); v != "" {
		t.Errorf("token field after a refusal: %q, want it emptied", v)
	}
	if err := chromedp.Do(ctx,
		chromedp.SendKeys(chromedp.CSS(`#act-token`), token),
		chromedp.Click(chromedp.CSS(`#act-submit`)),
		chromedp.WaitVisible(chromedp.CSS(row+`[data-state="acknowledged"]`)),
		chromedp.WaitNotVisible(chromedp.CSS(`#act`)),
	); err != nil {
		t.Fatalf("acknowledge: %v", err)
	}
	al, audit, err := d.manager.Get(id)
	if err != nil {
		t.Fatal(err)
	}
	if al.State != "acknowledged" || al.AckedBy != "Mara Quill" || al.AckComment != "crew sent to the hydrant" {
		t.Errorf("alert after the click: state %s by %q comment %q", al.State, al.AckedBy, al.AckComment)
	}
	if len(audit) == 0 || audit[len(audit)-1].Actor != "Mara Quill" {
		t.Errorf("audit: %+v, want the last record by Mara Quill", audit)
	}
	// Shelve the blockage alert: the name and the token are remembered
	// for the session, so only the duration and the reason are given.
	var other string
	for _, a := range alerts {
		if a.ID != id {
			other = a.ID
		}
	}
	orow := fmt.Sprintf(`#alerts .alert[data-id="%s"]`, other)
	if err := chromedp.Do(ctx,
		chromedp.Click(chromedp.CSS(orow+` button[data-action="shelve"]`)),
		chromedp.WaitVisible(chromedp.CSS(`#act-duration`)),
		chromedp.SetValue(chromedp.CSS(`#act-duration`), "1h"),
		chromedp.SendKeys(chromedp.CSS(`#act-text`), "contractor on site"),
		chromedp.Click(chromedp.CSS(`#act-submit`)),
		chromedp.WaitVisible(chromedp.CSS(orow+`[data-state="shelved"]`)),
	); err != nil {
		t.Fatalf("shelve: %v", err)
	}
	sh, _, err := d.manager.Get(other)
	if err != nil {
		t.Fatal(err)
	}
	if wantUntil := d.view.Step.Add(time.Minute + time.Hour); sh.State != "shelved" || sh.ShelvedBy != "Mara Quill" || sh.ShelveReason != "contractor on site" || !sh.ShelvedUntil.Equal(wantUntil) {
		t.Errorf("shelved alert: state %s by %q reason %q until %v, want shelved by Mara Quill until %v", sh.State, sh.ShelvedBy, sh.ShelveReason, sh.ShelvedUntil, wantUntil)
	}
	// The token stays in the tab's sessionStorage only, never in the page.
	kept, err := chromedp.Run(ctx, chromedp.Evaluate[[]bool](fmt.Sprintf(`[sessionStorage.getItem("plumbline.token") === %q, document.documentElement.outerHTML.includes(%q)]`, token, token)))
	if err != nil {
		t.Fatal(err)
	}
	if !kept[0] || kept[1] {
		t.Errorf("token: in sessionStorage %v (want true), in the HTML %v (want false)", kept[0], kept[1])
	}

	// Where the rank-1 candidate must be drawn: the fitting rule of the
	// package doc, applied here to the SVG box the browser laid out.
	type box struct{ Left, Top, W, H float64 }
	raw, err := chromedp.Run(ctx, chromedp.Evaluate[[]byte](`(() => { const s = document.getElementById('map'); const r = s.getBoundingClientRect();
		return {Left: r.left + window.scrollX + s.clientLeft, Top: r.top + window.scrollY + s.clientTop, W: s.clientWidth, H: s.clientHeight}; })()`))
	if err != nil {
		t.Fatal(err)
	}
	var b box
	if err := json.Unmarshal(raw, &b); err != nil {
		t.Fatal(err)
	}
	md := BuildMap(d.cfg.Network)
	at := func(id string) (float64, float64) {
		i, _ := d.cfg.Network.NodeIndex(id)
		return pixel(md, b.W, b.H, *md.Nodes[i].X, *md.Nodes[i].Y)
	}
	cx, cy := at(d.leak)
	cx, cy = cx+b.Left, cy+b.Top
	// A junction far from every candidate, for contrast.
	far, farDist := "", 0.0
	for i := range d.cfg.Network.Nodes {
		nd := &d.cfg.Network.Nodes[i]
		if nd.Kind != network.Junction || !nd.HasCoord {
			continue
		}
		dist := math.Inf(1)
		for _, c := range d.cands {
			j, _ := d.cfg.Network.NodeIndex(c)
			dist = math.Min(dist, network.GreatCircle(nd.Coord, d.cfg.Network.Nodes[j].Coord))
		}
		if dist > farDist {
			far, farDist = nd.ID, dist
		}
	}
	fx, fy := at(far)
	fx, fy = fx+b.Left, fy+b.Top

	shot, err := chromedp.Run(ctx, chromedp.FullScreenshot(100))
	if err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(bytes.NewReader(shot))
	if err != nil {
		t.Fatalf("screenshot is not a PNG: %v", err)
	}
	// Not blank: the luminance varies and many colours are present.
	var sum, sum2 float64
	colours := map[[3]uint8]bool{}
	bounds := img.Bounds()
	totalMark := 0
	for y := bounds.Min.Y; y < bounds.Max.Y; y++ {
		for x := bounds.Min.X; x < bounds.Max.X; x++ {
			r, g, bl := rgb(img, x, y)
			l := 0.2126*float64(r) + 0.7152*float64(g) + 0.0722*float64(bl) // Rec. 709 luma weights
			sum, sum2 = sum+l, sum2+l*l
			if len(colours) < 5000 {
				colours[[3]uint8{uint8(r), uint8(g), uint8(bl)}] = true
			}
			if isHighlight(r, g, bl) {
				totalMark++
			}
		}
	}
	n := float64(bounds.Dx() * bounds.Dy())
	sd := math.Sqrt(math.Max(0, sum2/n-(sum/n)*(sum/n)))
	if sd < 10 || len(colours) < 100 {
		t.Errorf("screenshot looks blank: luminance sd %.1f, %d colours", sd, len(colours))
	}
	near := countHighlight(img, cx, cy, 26)
	away := countHighlight(img, fx, fy, 8)
	if near < 150 {
		t.Errorf("screenshot: %d highlight pixels within 26 px of the rank-1 candidate %s at (%.0f, %.0f), want >= 150", near, d.leak, cx, cy)
	}
	if away > 0 {
		t.Errorf("screenshot: %d highlight pixels within 8 px of %s, %.0f m from every candidate, want 0", away, far, farDist)
	}
	if frac := float64(totalMark) / n; frac > 0.01 {
		t.Errorf("screenshot: %.2f%% of the page in the highlight colour, want < 1%%", 100*frac)
	}
	t.Logf("screenshot %dx%d: luminance sd %.1f, %d highlight pixels near %s, %d in all", bounds.Dx(), bounds.Dy(), sd, near, d.leak, totalMark)

	out := filepath.Join(t.TempDir(), "operator-page.png")
	if *updateScreenshot {
		out = filepath.Join("..", "..", "docs", "operator-page.png")
		if err := os.MkdirAll(filepath.Dir(out), 0o755); err != nil {
			t.Fatal(err)
		}
	}
	if err := os.WriteFile(out, shot, 0o644); err != nil {
		t.Fatal(err)
	}

	// Only the service's own origin was asked for anything.
	mu.Lock()
	defer mu.Unlock()
	for _, u := range requests {
		if !strings.HasPrefix(u, base+"/") && !strings.HasPrefix(u, "data:") {
			t.Errorf("page requested %s, outside %s", u, base)
		}
	}
	if len(requests) < 4 {
		t.Errorf("requests seen: %v, want the page, its files and the API", requests)
	}
	for _, pr := range problems {
		t.Errorf("browser: %s", pr)
	}
}

// pixel applies the page's fitting rule (package doc): the bounds fit the
// box less 24 px a side, centred, north up, one scale.
func pixel(md MapData, w, h, x, y float64) (float64, float64) {
	const pad = 24
	bd := md.Bounds
	dx, dy := math.Max(bd.MaxX-bd.MinX, 1), math.Max(bd.MaxY-bd.MinY, 1)
	s := math.Min((w-2*pad)/dx, (h-2*pad)/dy)
	ox, oy := (w-s*dx)/2, (h-s*dy)/2
	return ox + (x-bd.MinX)*s, oy + (bd.MaxY-y)*s
}

func drawable(n *network.Network, i int) bool {
	l := &n.Links[i]
	return len(l.Geometry) >= 2 || (n.Nodes[l.From].HasCoord && n.Nodes[l.To].HasCoord)
}

func rgb(img image.Image, x, y int) (int, int, int) {
	r, g, b, _ := img.At(x, y).RGBA()
	return int(r >> 8), int(g >> 8), int(b >> 8)
}

func countHighlight(img image.Image, cx, cy, radius float64) int {
	n := 0
	for y := int(cy - radius); y <= int(cy+radius); y++ {
		for x := int(cx - radius); x <= int(cx+radius); x++ {
			if !(image.Point{x, y}.In(img.Bounds())) || math.Hypot(float64(x)-cx, float64(y)-cy) > radius {
				continue
			}
			if r, g, b := rgb(img, x, y); isHighlight(r, g, b) {
				n++
			}
		}
	}
	return n
}

func describe(o *runtime.RemoteObject) string {
	if o == nil {
		return ""
	}
	return o.Description
}
