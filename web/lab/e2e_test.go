package lab

import (
	"context"
	"os"
	"os/exec"
	"testing"
	"time"

	"github.com/chromedp/chromedp"

	"rolloff/sweep/publish"
	"rolloff/sweep/publish/brokertest"
)

// TestPageInBrowser opens the lab page in Debian's chromium while two
// simulated benches publish: each gets a card that says online, its
// run's point count reaches the stored count, its plot is drawn and
// its result row shows the corner; a bench that stops is shown
// offline. Skipped when chromium is not installed.
func TestPageInBrowser(t *testing.T) {
	bin := ""
	for _, p := range []string{os.Getenv("ROLLOFF_CHROMIUM"), "/usr/bin/chromium"} {
		if _, err := os.Stat(p); p != "" && err == nil {
			bin = p
			break
		}
	}
	if bin == "" {
		if p, err := exec.LookPath("chromium"); err == nil {
			bin = p
		}
	}
	if bin == "" {
		t.Skip("no chromium binary found (apt-get install chromium, or set ROLLOFF_CHROMIUM): skipping the lab browser test")
	}
	br := brokertest.Start(t, brokertest.Opts{})
	b := publish.Broker{URL: br.URL()}
	l := startLab(t, b)
	waitFor(t, 10*time.Second, "lab subscribed", l.BrokerConnected)

	actx, acancel := chromedp.NewExecAllocator(context.Background(),
		chromedp.ExecPath(bin), chromedp.Headless, chromedp.NoSandbox, chromedp.DisableGPU, chromedp.NoFirstRun,
		chromedp.NoDefaultBrowserCheck, chromedp.UserDataDir(t.TempDir()), chromedp.WindowSize(1200, 900),
		chromedp.Flag("disable-dev-shm-usage", true), chromedp.Flag("disable-background-networking", true))
	defer acancel()
	ctx, cancel := chromedp.NewContext(actx)
	defer cancel()
	ctx, tcancel := context.WithTimeout(ctx, 60*time.Second)
	defer tcancel()
	if _, err := chromedp.Run(ctx, chromedp.Navigate(l.URL())); err != nil {
		t.Fatal(err)
	}
	waitJS := func(what, cond string) {
		t.Helper()
		deadline := time.Now().Add(15 * time.Second)
		for {
			ok, err := chromedp.Run(ctx, chromedp.Evaluate[bool](`!!(`+cond+`)`))
			if err == nil && ok {
				return
			}
			if time.Now().After(deadline) {
				html, _ := chromedp.Run(ctx, chromedp.Evaluate[string](`document.body.innerText`))
				t.Fatalf("%s: not within 15 s (%v); page:\n%s", what, err, html)
			}
			time.Sleep(50 * time.Millisecond)
		}
	}
	waitJS("broker badge", `document.getElementById("broker").textContent === "broker: connected"`)

	pa, sa := startBench(t, b, "bench-a")
	_, sb := startBench(t, b, "bench-b")
	_, da := simSweep(t, sa, "line driver A", 40, 5*time.Millisecond)
	_, db := simSweep(t, sb, "line driver B", 60, 5*time.Millisecond)
	<-da
	<-db
	for id, n := range map[string]string{"bench-a": "40", "bench-b": "60"} {
		card := `document.getElementById("bench-` + id + `")`
		waitJS(id+" online", card+` && `+card+`.querySelector(".badge").textContent === "online"`)
		waitJS(id+" points and state", card+`.querySelector(".run").textContent.includes("done — `+n+` / 73 points")`)
		waitJS(id+" plot drawn", card+`.querySelector("canvas") && `+card+`.querySelector("canvas").width > 0`)
		waitJS(id+" result row", card+`.querySelector("table") && `+card+`.querySelector("table").textContent.includes("high 20.00 kHz")`)
	}
	if shot := os.Getenv("ROLLOFF_LAB_SCREENSHOT"); shot != "" {
		png, err := chromedp.Run(ctx, chromedp.FullScreenshot(100))
		if err == nil {
			err = os.WriteFile(shot, png, 0o644)
		}
		if err != nil {
			t.Errorf("screenshot: %v", err)
		}
	}
	ctxStop, cancelStop := context.WithTimeout(context.Background(), 3*time.Second)
	defer cancelStop()
	_ = pa.Stop(ctxStop)
	waitJS("bench-a offline", `document.getElementById("bench-bench-a").querySelector(".badge").textContent.startsWith("offline")`)
}
