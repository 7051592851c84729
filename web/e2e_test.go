package web

import (
	"bytes"
	"context"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/cdproto/browser"
	"github.com/chromedp/cdproto/input"
	"github.com/chromedp/chromedp"

	"rolloff/configs"
)

// chromiumPath finds a Chromium binary, or "" when there is none.
func chromiumPath() string {
	for _, p := range []string{os.Getenv("ROLLOFF_CHROMIUM"), "/usr/bin/chromium", "/usr/bin/chromium-browser", "/usr/bin/google-chrome"} {
		if p == "" {
			continue
		}
		if _, err := os.Stat(p); err == nil {
			return p
		}
	}
	if p, err := exec.LookPath("chromium"); err == nil {
		return p
	}
	return ""
}

// newBrowser starts a headless Chromium with a fresh profile.
func newBrowser(t *testing.T) (context.Context, context.CancelFunc) {
	t.Helper()
	bin := chromiumPath()
	if bin == "" {
		t.Skip("no chromium binary found (install Debian's chromium, or set ROLLOFF_CHROMIUM): skipping the browser test")
	}
	opts := []chromedp.ExecAllocatorOption{
		chromedp.ExecPath(bin),
		chromedp.Headless,
		chromedp.NoSandbox,
		chromedp.DisableGPU,
		chromedp.NoFirstRun,
		chromedp.NoDefaultBrowserCheck,
		chromedp.UserDataDir(t.TempDir()),
		chromedp.WindowSize(1400, 1000),
		chromedp.Flag("disable-quic", true),
		chromedp.Flag("disable-background-networking", true),
		chromedp.Flag("disable-component-update", true),
		chromedp.Flag("disable-sync", true),
		chromedp.Flag("disable-dev-shm-usage", true),
	}
	actx, acancel := chromedp.NewExecAllocator(context.Background(), opts...)
	ctx, cancel := chromedp.NewContext(actx)
	ctx, tcancel := context.WithTimeout(ctx, 75*time.Second)
	return ctx, func() { tcancel(); cancel(); acancel() }
}

func jsBool(ctx context.Context, expr string) (bool, error) {
	return chromedp.Run(ctx, chromedp.Evaluate[bool](`!!(`+expr+`)`))
}

func jsString(ctx context.Context, expr string) string {
	v, _ := chromedp.Run(ctx, chromedp.Evaluate[string](`String(`+expr+`)`))
	return v
}

// waitJS polls a JavaScript condition until it is true.
func waitJS(t *testing.T, ctx context.Context, what, cond string, timeout time.Duration) {
	t.Helper()
	deadline := time.Now().Add(timeout)
	for {
		ok, err := jsBool(ctx, cond)
		if err != nil {
			t.Fatalf("waiting for %s: %v", what, err)
		}
		if ok {
			return
		}
		if time.Now().After(deadline) {
			t.Fatalf("timed out waiting for %s (status %q; log %q)", what,
				jsString(ctx, `document.getElementById('status').innerText`),
				jsString(ctx, `document.getElementById('live-log').innerText + ' | ' + document.getElementById('notice').innerText + ' | ' + document.getElementById('form-error').innerText`))
		}
		time.Sleep(50 * time.Millisecond)
	}
}

// TestBrowserSweep drives the page in a real headless Chromium: start a
// sweep on the simulated bench, watch points appear, answer the range
// prompt, see the corners, download the CSV and compare it with the run
// directory.
func TestBrowserSweep(t *testing.T) {
	ctx, cancel := newBrowser(t)
	defer cancel()
	d := startDemo(t, demoOpts{})
	dl := t.TempDir()
	if err := chromedp.Do(ctx, chromedp.Navigate("about:blank")); err != nil {
		t.Fatal(err)
	}
	if _, err := chromedp.CallBrowser(ctx, browser.SetDownloadBehavior, browser.SetDownloadBehaviorParams{
		Behavior: browser.SetDownloadBehaviorBehaviorAllow, DownloadPath: dl, EventsEnabled: new(true),
	}); err != nil {
		t.Fatal(err)
	}
	done := make(chan string, 4)
	go func() {
		for ev, err := range chromedp.BrowserEvents(ctx, browser.DownloadProgress) {
			if err != nil {
				return
			}
			if ev.State == browser.DownloadProgressStateCompleted {
				done <- ev.GUID
			}
		}
	}()
	if err := chromedp.Do(ctx, chromedp.Navigate(d.srv.URL()), chromedp.WaitVisible(chromedp.ID("plan-form"))); err != nil {
		t.Fatal(err)
	}
	waitJS(t, ctx, "the bench", `document.getElementById('bench-chip').textContent.indexOf('simulated bench') >= 0`, 10*time.Second)
	if c := jsString(ctx, `document.getElementById('caution').innerText`); !strings.Contains(c, "isolation") || !strings.Contains(c, "ratings") {
		t.Fatalf("safety caution missing near the start button: %q", c)
	}
	pl := d.browserPlan
	field := func(name string) chromedp.CSS { return chromedp.CSS(`#plan-form [name=` + name + `]`) }
	if err := chromedp.Do(ctx,
		chromedp.SetValue(field("name"), "browser check"),
		chromedp.SetValue(field("start_hz"), pl.start),
		chromedp.SetValue(field("stop_hz"), pl.stop),
		chromedp.SetValue(field("points_per_decade"), pl.ppd),
		chromedp.SetValue(field("vrms"), pl.vrms),
		chromedp.SetValue(field("strategy"), "operator"),
		chromedp.Click(chromedp.ID("btn-estimate")),
	); err != nil {
		t.Fatal(err)
	}
	waitJS(t, ctx, "the estimate", `!document.getElementById('estimate').hidden && !document.getElementById('btn-start').disabled`, 10*time.Second)
	if est := jsString(ctx, `document.getElementById('estimate').innerText`); !strings.Contains(est, "points") {
		t.Fatalf("estimate text %q", est)
	}
	if err := chromedp.Do(ctx, chromedp.Click(chromedp.ID("btn-start"))); err != nil {
		t.Fatal(err)
	}
	waitJS(t, ctx, "points in the plot", `+document.getElementById('plot').dataset.points >= 3`, 30*time.Second)
	waitJS(t, ctx, "the range prompt", `!document.getElementById('prompt').hidden`, 40*time.Second)
	if r := jsString(ctx, `document.getElementById('prompt-range').textContent`); r == "" {
		t.Fatal("the prompt names no range")
	}
	if f := os.Getenv("ROLLOFF_SCREENSHOT_PROMPT"); f != "" {
		if png, err := chromedp.Run(ctx, chromedp.FullScreenshot(100)); err == nil {
			_ = os.WriteFile(f, png, 0o644)
		}
	}
	prompts := 0
	deadline := time.Now().Add(60 * time.Second)
	for {
		st := jsString(ctx, `document.getElementById('st-state').dataset.state`)
		if st == "done" {
			break
		}
		if st == "failed" || st == "aborted" {
			t.Fatalf("run ended %s", st)
		}
		if open, _ := jsBool(ctx, `!document.getElementById('prompt').hidden && !document.getElementById('btn-confirm').disabled`); open {
			if err := chromedp.Do(ctx, chromedp.Click(chromedp.ID("btn-confirm"))); err != nil {
				t.Fatal(err)
			}
			prompts++
		}
		if time.Now().After(deadline) {
			in, _ := d.srv.Queue().Get(d.lastRunID(t))
			t.Fatalf("run not done (state %q; prompts answered %d; daemon prompt %+v; page: %q; log %q)", st, prompts, in.Prompt,
				jsString(ctx, `document.getElementById('prompt').hidden + ' ' + document.getElementById('btn-confirm').disabled + ' ' + document.getElementById('notice').innerText`),
				jsString(ctx, `document.getElementById('live-log').innerText`))
		}
		time.Sleep(100 * time.Millisecond)
	}
	if prompts == 0 {
		t.Fatal("no prompt was answered")
	}
	waitJS(t, ctx, "the final corners", `document.getElementById('st-corners').dataset.final === '1' && /Hz/.test(document.getElementById('st-corners').textContent)`, 10*time.Second)
	id := d.lastRunID(t)
	stored := d.points(t, id)
	waitJS(t, ctx, "every stored point on the page", `window.rolloff.points.size === `+strconv.Itoa(len(stored)), 5*time.Second)
	// Download the CSV from the history table.
	sel := `#runs-body tr[data-id="` + id + `"] a[data-file="response.csv"]`
	waitJS(t, ctx, "the CSV download button", `document.querySelector('`+sel+`')`, 15*time.Second)
	if err := chromedp.Do(ctx, chromedp.Click(chromedp.CSS(sel))); err != nil {
		t.Fatal(err)
	}
	select {
	case <-done:
	case <-time.After(15 * time.Second):
		t.Fatal("the CSV download did not complete")
	}
	got, err := os.ReadFile(filepath.Join(dl, id+"-response.csv"))
	if err != nil {
		t.Fatal(err)
	}
	want, err := os.ReadFile(filepath.Join(d.runDir(t, id), "response.csv"))
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(got, want) || len(want) == 0 {
		t.Fatalf("downloaded CSV (%d bytes) differs from the run directory's (%d bytes)", len(got), len(want))
	}
	// Hovering a point shows its values.
	xy, err := chromedp.Run(ctx, chromedp.Evaluate[[]float64](`(function(){
		const pl = window.rolloff.plot, r = document.getElementById('plot').getBoundingClientRect();
		const p = Array.from(window.rolloff.points.values())[2];
		return [r.left + pl.X(p.freq_hz), r.top + pl.Y(p.gain_db)];
	})()`))
	if err != nil {
		t.Fatal(err)
	}
	if err := chromedp.Do(ctx, chromedp.MouseEvent(input.DispatchMouseEventTypeMouseMoved, xy[0], xy[1]), chromedp.Sleep(150*time.Millisecond)); err != nil {
		t.Fatal(err)
	}
	if tip := jsString(ctx, `document.getElementById('tip').hidden ? '' : document.getElementById('tip').innerText`); !strings.Contains(tip, "dB") || !strings.Contains(tip, "Hz") {
		t.Fatalf("hover tip %q", tip)
	}
	// A plan file (the shipped demo plan, TOML) is uploaded and estimated.
	planFile := filepath.Join(t.TempDir(), "demo-plan.toml")
	data, err := configs.ReadFile("demo-plan.toml")
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(planFile, data, 0o644); err != nil {
		t.Fatal(err)
	}
	if err := chromedp.Do(ctx, chromedp.SetUploadFiles(chromedp.ID("plan-file"), []string{planFile})); err != nil {
		t.Fatal(err)
	}
	waitJS(t, ctx, "the plan file read", `/demo-plan.toml/.test(document.getElementById('plan-file-info').textContent)`, 5*time.Second)
	if err := chromedp.Do(ctx, chromedp.Click(chromedp.ID("btn-estimate"))); err != nil {
		t.Fatal(err)
	}
	waitJS(t, ctx, "the uploaded plan's estimate", `!document.getElementById('estimate').hidden && /points/.test(document.getElementById('estimate').textContent)`, 10*time.Second)
	if os.Getenv("ROLLOFF_SCREENSHOT") != "" {
		png, err := chromedp.Run(ctx, chromedp.FullScreenshot(100))
		if err == nil {
			_ = os.WriteFile(os.Getenv("ROLLOFF_SCREENSHOT"), png, 0o644)
		}
	}
}
