package main

import (
	"context"
	"fmt"
	"net/http/httptest"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/cdproto/page"
	"github.com/chromedp/chromedp"
	"github.com/prometheus/client_golang/prometheus"
	"github.com/rs/zerolog"

	"github.com/lockstep-project/lockstep/stats"
	"github.com/lockstep-project/lockstep/window"
)

// Browser tests: the dashboard in headless Chromium (Debian's chromium,
// which .ci/run installs), driven with chromedp. They skip only when no
// chromium binary is found and LOCKSTEP_REQUIRE_BROWSER is unset; CI sets
// it, so that CI never skips them silently. On failure (or always, with
// LOCKSTEP_BROWSER_SCREENSHOTS set) a screenshot of the page is written to
// a temporary directory and its path logged.

// chromiumPath returns the browser binary, or "".
func chromiumPath() string {
	for _, name := range []string{"chromium", "chromium-browser"} {
		if p, err := exec.LookPath(name); err == nil {
			return p
		}
	}
	return ""
}

// newBrowser starts a headless browser for the test and returns its
// context (each action gets at most timeout).
func newBrowser(t *testing.T, timeout time.Duration) context.Context {
	t.Helper()
	path := chromiumPath()
	if path == "" {
		if os.Getenv("LOCKSTEP_REQUIRE_BROWSER") != "" {
			t.Fatal("no chromium binary on PATH, and LOCKSTEP_REQUIRE_BROWSER is set: install it (apt-get install -y chromium)")
		}
		t.Skip("no chromium binary on PATH: the browser tests are skipped (apt-get install -y chromium runs them; LOCKSTEP_REQUIRE_BROWSER=1 makes this a failure)")
	}
	opts := append(chromedp.DefaultExecAllocatorOptions[:],
		chromedp.ExecPath(path),
		chromedp.NoSandbox, // as root
		chromedp.DisableGPU,
		chromedp.NoFirstRun,
		chromedp.Flag("disable-background-networking", true),
		chromedp.Flag("disable-component-update", true),
		chromedp.Flag("disable-sync", true),
		chromedp.UserDataDir(t.TempDir()),
		chromedp.WindowSize(1366, 768),
	)
	actx, cancelAlloc := chromedp.NewExecAllocator(context.Background(), opts...)
	bctx, cancelBrowser := chromedp.NewContext(actx)
	if err := chromedp.Do(bctx); err != nil { // start the browser
		cancelBrowser()
		cancelAlloc()
		t.Fatalf("start %s: %v", path, err)
	}
	ctx, cancel := context.WithTimeout(bctx, timeout)
	t.Cleanup(func() {
		cancel()
		cancelBrowser()
		cancelAlloc()
	})
	t.Cleanup(func() { // runs first, while the page is still open
		if !t.Failed() && os.Getenv("LOCKSTEP_BROWSER_SCREENSHOTS") == "" {
			return
		}
		sctx, scancel := context.WithTimeout(bctx, 10*time.Second)
		defer scancel()
		shot, err := chromedp.Run(sctx, chromedp.FullScreenshot(100)) // 100: PNG
		if err != nil {
			t.Logf("no screenshot: %v", err)
			return
		}
		dir, err := os.MkdirTemp("", "lockstep-browser-")
		if err != nil {
			t.Logf("no screenshot: %v", err)
			return
		}
		p := filepath.Join(dir, strings.ReplaceAll(t.Name(), "/", "_")+".png")
		if err := os.WriteFile(p, shot, 0o644); err != nil {
			t.Logf("no screenshot: %v", err)
			return
		}
		t.Logf("screenshot: %s", p)
	})
	return ctx
}

// TestBrowserDemo opens the dashboard of a running demo (fast), waits for
// the drifting line's alert on the fill-weight tile naming L3, opens the
// detail, acknowledges the alert and sees its state change.
func TestBrowserDemo(t *testing.T) {
	if testing.Short() {
		t.Skip("starts a browser, NATS, the daemon and the simulator")
	}
	ctx := newBrowser(t, 50*time.Second)
	d := startDemo(t, "120")

	tile := chromedp.CSS(`a.tile[data-characteristic="fill-weight"]`)
	if err := chromedp.Do(ctx,
		chromedp.Navigate(d.url),
		chromedp.WaitVisible(tile),
		chromedp.WaitVisible(tile+`[data-state="raised"] .moved[data-alert]`),
	); err != nil {
		t.Fatalf("waiting for the raised fill-weight tile: %v", err)
	}
	tileText, err := chromedp.Run(ctx, textJS(tile))
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(tileText, "L3") || !strings.Contains(strings.ToLower(tileText), "raised") || !strings.Contains(tileText, "means diverge") {
		t.Fatalf("fill-weight tile %q: want it raised, means diverge, naming L3", tileText)
	}
	a := waitL3(t, d.url, 5*time.Second) // the same alert, through the API
	id, _ := a["id"].(string)
	row := chromedp.CSS(fmt.Sprintf(`#detail-alerts article.alert[data-alert=%q]`, id))
	form := row + " form.ack"
	// The tile is a link; a click of the element itself (not at the
	// coordinates of its box, which moves as the live figures change).
	if err := chromedp.Do(ctx,
		clickJS(tile),
		chromedp.WaitVisible(chromedp.CSS(`#view-detail .detail-head h1`)),
		chromedp.WaitVisible(chromedp.CSS(`#view-detail svg.chart`)),
		chromedp.WaitVisible(form),
		chromedp.SendKeys(form+` input[name="by"]`, "shift engineer"),
		chromedp.SendKeys(form+` input[name="note"]`, "L3 checked"),
		chromedp.Click(form+` button[type="submit"]`),
		chromedp.WaitVisible(row+`[data-state="acknowledged"]`),
	); err != nil {
		t.Fatalf("acknowledging alert %s in the detail: %v", id, err)
	}
	if head, err := chromedp.Run(ctx, textJS(chromedp.CSS(`#view-detail .detail-head h1`))); err != nil || head != "fill-weight" {
		t.Errorf("detail heading %q, %v", head, err)
	}
	rowText, err := chromedp.Run(ctx, textJS(row))
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(rowText, "shift engineer") || !strings.Contains(rowText, "L3 checked") {
		t.Errorf("acknowledged row %q lacks who and the note", rowText)
	}
	// The alerts list shows it acknowledged too.
	listed := chromedp.CSS(fmt.Sprintf(`#alert-list article.alert[data-alert=%q][data-state="acknowledged"]`, id))
	if err := chromedp.Do(ctx, clickJS(chromedp.CSS(`#nav-alerts`)), chromedp.WaitVisible(listed)); err != nil {
		t.Errorf("the alerts list: %v", err)
	}
	for _, x := range demoAlerts(t, d.url) {
		if x["id"] == id && (x["state"] != "acknowledged" || x["acknowledged_by"] != "shift engineer") {
			t.Errorf("the daemon has %v", x)
		}
	}
}

// clickJS clicks the element sel selects, as a script would.
func clickJS(sel chromedp.CSS) chromedp.Action[chromedp.Void] {
	return chromedp.Steps(
		chromedp.WaitVisible(sel),
		chromedp.Func(func(ctx context.Context, t *chromedp.Target) error {
			_, err := chromedp.Evaluate[bool](fmt.Sprintf(`(document.querySelector(%q).click(), true)`, string(sel)))(ctx, t)
			return err
		}),
	)
}

// textJS reads the text of the element sel selects in one script, so that
// a live update that replaces the element between finding it and reading
// it (chromedp.Text takes two calls) cannot fail the read.
func textJS(sel chromedp.CSS) chromedp.Action[string] {
	return chromedp.Evaluate[string](fmt.Sprintf(`(() => { const e = document.querySelector(%q); return e ? e.innerText : ""; })()`, string(sel)))
}

// hostile is a name that would run a script if it were put into the page
// as markup.
const hostile = `<img src=x onerror=alert(1)>`

// TestBrowserHostileNames: names from the data show as text everywhere
// (tile, detail, alert) and no script comes with them.
func TestBrowserHostileNames(t *testing.T) {
	if testing.Short() {
		t.Skip("starts a browser")
	}
	ctx := newBrowser(t, 30*time.Second)
	char := `fill"><svg onload=alert(2)>`
	reg := prometheus.NewRegistry()
	hub := newStreamHub(streamOptions{}, reg)
	book := newReportBook()
	book.onPut = hub.summary
	srv := httptest.NewUnstartedServer(newAPIHandler(apiState{book: book, reg: reg, log: zerolog.Nop(), stream: hub}))
	srv.Config.RegisterOnShutdown(hub.close)
	srv.Start()
	defer srv.Close()
	defer hub.close() // first: Close waits for the browser's open stream

	w, err := window.New(window.Config{})
	if err != nil {
		t.Fatal(err)
	}
	t0 := time.Now().UTC().Truncate(time.Minute)
	for i := range 60 {
		g := w.Group([]string{"L1", hostile}[i%2])
		w.Add(g, t0.Add(time.Duration(i)*time.Second), float64(i%5)*0.1+float64(i%2))
	}
	ref := stats.NewReference(mustDecimal(t, "500.00"))
	ev := w.Evaluate(t0.Add(time.Minute), stats.DefaultOptions(), ref)
	lr, err := buildLive(liveInput{Name: char, Unit: "g", Evaluated: t0.Add(time.Minute), Eval: ev, Win: w, Ref: ref})
	if err != nil {
		t.Fatal(err)
	}
	book.put(lr)

	tile := chromedp.CSS(`a.tile[data-characteristic]`)
	// Count any dialog a script of the data might open.
	if _, err := chromedp.Call(ctx, page.AddScriptToEvaluateOnNewDocument, page.AddScriptToEvaluateOnNewDocumentParams{
		Source: `window.__ran = 0; window.alert = function () { window.__ran++; };`,
	}); err != nil {
		t.Fatal(err)
	}
	if err := chromedp.Do(ctx, chromedp.Navigate(srv.URL+"/"), chromedp.WaitVisible(tile)); err != nil {
		t.Fatalf("open the dashboard: %v", err)
	}
	// An alert event naming the group arrives live.
	hub.alert(fmt.Appendf(nil, `{"event":"e1","time":%q,"transition":"raised","previous":"watch","alert":{"id":"a1","characteristic":%q,"kind":"means-diverge","key":"","state":"raised","groups":[%q],"direction":1,"shift":1.2,"lower":0.9,"upper":1.5,"unit":"g","test":"F","f":30,"p":1e-9,"effect":0.3,"ratio":null,"reject_rate":null,"detector":"F 1m","window":{"from":null,"to":null},"reason":%q,"opened":%q,"raised":%q,"acknowledged":null,"acknowledged_by":"","note":"","cleared":null,"updated":%q}}`,
		t0.Format(time.RFC3339), char, hostile, "group "+hostile+" runs high", t0.Format(time.RFC3339), t0.Format(time.RFC3339), t0.Format(time.RFC3339)))
	if err := chromedp.Do(ctx, chromedp.WaitVisible(tile+`[data-state="raised"]`)); err != nil {
		t.Fatalf("the live alert: %v", err)
	}
	tileText, err := chromedp.Run(ctx, textJS(tile))
	if err != nil {
		t.Fatal(err)
	}
	if err := chromedp.Do(ctx,
		clickJS(tile), // to #/c/NAME
		chromedp.WaitVisible(chromedp.CSS(`#view-detail svg.chart text`)),
		chromedp.WaitVisible(chromedp.CSS(`#detail-alerts article.alert`)),
	); err != nil {
		t.Fatalf("the detail of the hostile characteristic: %v", err)
	}
	h1, err := chromedp.Run(ctx, textJS(chromedp.CSS(`#view-detail .detail-head h1`)))
	if err != nil {
		t.Fatal(err)
	}
	detailText, err := chromedp.Run(ctx, chromedp.TextContent(chromedp.CSS(`#view-detail`)))
	if err != nil {
		t.Fatal(err)
	}
	scripts, err := chromedp.Run(ctx, chromedp.Evaluate[int](`window.__ran`))
	if err != nil {
		t.Fatal(err)
	}
	imgs, err := chromedp.Run(ctx, chromedp.Evaluate[int](`document.querySelectorAll("img, [onload], [onerror]").length`))
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(tileText, char) || !strings.Contains(tileText, hostile) {
		t.Errorf("tile text %q: want the names as text", tileText)
	}
	if h1 != char {
		t.Errorf("detail heading %q, want %q", h1, char)
	}
	if n := strings.Count(detailText, hostile); n < 3 { // groups table, alert, reason at least
		t.Errorf("detail shows the hostile group as text %d times: %q", n, detailText)
	}
	if scripts != 0 || imgs != 0 {
		t.Errorf("a name was taken as markup: %d scripts ran, %d elements made from names", scripts, imgs)
	}
}
