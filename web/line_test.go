package web

import (
	"context"
	"encoding/json"
	"os"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/chromedp"
	"github.com/chromedp/chromedp/kb"
)

// TestLinePage serves the production-line page and its assets.
func TestLinePage(t *testing.T) {
	d := startDemo(t, demoOpts{})
	res, data := d.do("GET", "/line", nil)
	if res.StatusCode != 200 || !strings.Contains(string(data), `id="serial"`) || !strings.Contains(res.Header.Get("Content-Type"), "text/html") {
		t.Fatalf("/line: %d %q", res.StatusCode, res.Header.Get("Content-Type"))
	}
	for _, a := range []string{"/line.js", "/line.css"} {
		if res, _ := d.do("GET", a, nil); res.StatusCode != 200 {
			t.Errorf("%s: %d", a, res.StatusCode)
		}
	}
}

// TestLineBrowser drives the production-line page in Chromium as an
// operator with a barcode scanner would: the serial number typed and
// Enter pressed, the verdict shown large, the field ready for the next
// unit, the unit in the history.
func TestLineBrowser(t *testing.T) {
	ctx, cancel := newBrowser(t)
	defer cancel()
	d := startDemo(t, demoOpts{})
	p := smallPlan("fixed")
	// Flat within ±0.5 dB of the 1 kHz gain up to 30 kHz (corner at 95 kHz).
	p["mask"] = map[string]any{"name": "line acceptance", "relative": true,
		"upper": [][]float64{{1000, 0.5}, {30000, 0.5}}, "lower": [][]float64{{1000, -0.5}, {30000, -0.5}}}
	planJSON, _ := json.Marshal(p)
	if err := chromedp.Do(ctx, chromedp.Navigate(d.base+"/line"), chromedp.WaitVisible(chromedp.ID("serial"))); err != nil {
		t.Fatal(err)
	}
	if err := chromedp.Do(ctx,
		chromedp.SetValue(chromedp.ID("plan"), string(planJSON)),
		chromedp.SetValue(chromedp.ID("batch"), "proto-A"),
		chromedp.SendKeys(chromedp.ID("serial"), "LD-0042"+kb.Enter),
	); err != nil {
		t.Fatal(err)
	}
	waitLine(t, ctx, `window.rolloffLine.last && window.rolloffLine.last.unit === 'LD-0042'`, 60*time.Second)
	if v := jsString(ctx, `document.getElementById('verdict').innerText`); v != "PASS" {
		t.Errorf("verdict %q (error %q), want PASS", v, jsString(ctx, `document.getElementById('line-error').innerText`))
	}
	if s := jsString(ctx, `document.getElementById('verdict-detail').innerText`); !strings.Contains(s, "worst margin +") {
		t.Errorf("verdict detail %q", s)
	}
	waitLine(t, ctx, `document.activeElement.id === 'serial' && document.getElementById('serial').value === '' && window.rolloffLine.listed === 1`, 10*time.Second)
	if h := jsString(ctx, `document.getElementById('history').innerText`); !strings.Contains(h, "LD-0042") || !strings.Contains(h, "proto-A") {
		t.Errorf("history %q", h)
	}
	if y := jsString(ctx, `document.getElementById('yield').innerText`); !strings.Contains(y, "yield 100.0 %") {
		t.Errorf("yield %q", y)
	}

	// The next unit against a mask it cannot meet (−0.02 dB up to 100 kHz,
	// where the 95 kHz low-pass is 0.5 dB down at 56 kHz): FAIL, yield 50 %.
	p["mask"] = map[string]any{"name": "too tight", "relative": true,
		"lower": [][]float64{{1000, -0.02}, {100000, -0.02}}}
	planJSON, _ = json.Marshal(p)
	if err := chromedp.Do(ctx,
		chromedp.SetValue(chromedp.ID("plan"), string(planJSON)),
		chromedp.SendKeys(chromedp.ID("serial"), "LD-0043"+kb.Enter),
	); err != nil {
		t.Fatal(err)
	}
	waitLine(t, ctx, `window.rolloffLine.last.unit === 'LD-0043' && window.rolloffLine.listed === 2`, 60*time.Second)
	if v := jsString(ctx, `document.getElementById('verdict').innerText`); v != "FAIL" {
		t.Errorf("verdict %q, want FAIL", v)
	}
	if y := jsString(ctx, `document.getElementById('yield').innerText`); !strings.Contains(y, "yield 50.0 %") {
		t.Errorf("yield %q", y)
	}
	// The history overlays the units listed.
	waitLine(t, ctx, `window.rolloffLine.overlaid === 2 && document.getElementById('overlay').naturalWidth > 0`, 20*time.Second)
	// The batch view: both units of batch proto-A, their yield, and
	// their overlay with the mask drawn by the daemon.
	waitLine(t, ctx, `window.rolloffLine.batchOverlaid === 2 && document.getElementById('batch-overlay').naturalWidth > 0`, 20*time.Second)
	if y := jsString(ctx, `document.getElementById('batch-yield').innerText`); !strings.Contains(y, "yield 50.0 %") || !strings.Contains(y, "2 units") {
		t.Errorf("batch yield %q", y)
	}
	if p := jsString(ctx, `document.getElementById('page-info').innerText`); p != "runs 1–2 of 2" {
		t.Errorf("page info %q", p)
	}
	// The history filters by unit.
	if err := chromedp.Do(ctx, chromedp.SetValue(chromedp.ID("f-unit"), "LD-0043"), chromedp.Click(chromedp.CSS(`#filter-form button`))); err != nil {
		t.Fatal(err)
	}
	waitLine(t, ctx, `window.rolloffLine.listed === 1`, 10*time.Second)
	if h := jsString(ctx, `document.getElementById('history').innerText`); strings.Contains(h, "LD-0042") {
		t.Errorf("filtered history %q", h)
	}
	if png, err := chromedp.Run(ctx, chromedp.FullScreenshot(100)); err == nil && os.Getenv("ROLLOFF_LINE_SHOT") != "" {
		os.WriteFile(os.Getenv("ROLLOFF_LINE_SHOT"), png, 0o644)
	}
}

func waitLine(t *testing.T, ctx context.Context, cond string, timeout time.Duration) {
	t.Helper()
	deadline := time.Now().Add(timeout)
	for {
		if ok, err := jsBool(ctx, cond); err != nil {
			t.Fatalf("waiting for %s: %v", cond, err)
		} else if ok {
			return
		}
		if time.Now().After(deadline) {
			t.Fatalf("timed out waiting for %s (verdict %q, error %q)", cond,
				jsString(ctx, `document.getElementById('verdict').innerText`), jsString(ctx, `document.getElementById('line-error').innerText`))
		}
		time.Sleep(100 * time.Millisecond)
	}
}
