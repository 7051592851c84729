package web

import (
	"context"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/chromedp"

	"rolloff/sweep/event"
)

// TestRunsFilterBrowser: the main page's run list filters by batch and
// unit, and shows a filtered batch's yield and overlay.
func TestRunsFilterBrowser(t *testing.T) {
	ctx, cancel := newBrowser(t)
	defer cancel()
	d := startDemo(t, demoOpts{})
	p := smallPlan("fixed")
	p["mask"] = map[string]any{"name": "line acceptance", "relative": true,
		"upper": [][]float64{{1000, 0.5}, {30000, 0.5}}, "lower": [][]float64{{1000, -0.5}, {30000, -0.5}}}
	ids := map[string]string{}
	for _, u := range [][2]string{{"LD-0201", "BX"}, {"LD-0202", "BY"}} {
		p["unit"], p["batch"] = u[0], u[1]
		res, data := d.do("POST", "/api/runs", p)
		want(t, "submit", res, data, 201, "")
		id := decode[map[string]string](t, data)["id"]
		d.waitState(t, id, true, 60*time.Second, event.Done)
		ids[u[0]] = id
	}
	if err := chromedp.Do(ctx, chromedp.Navigate(d.base+"/"), chromedp.WaitVisible(chromedp.ID("runs-filter"))); err != nil {
		t.Fatal(err)
	}
	rows := `document.querySelectorAll('#runs-body tr').length`
	waitJS(t, ctx, "both runs listed", rows+` === 2`, 10*time.Second)
	if err := chromedp.Do(ctx, chromedp.SetValue(chromedp.ID("rf-batch"), "BX"), chromedp.Click(chromedp.CSS(`#runs-filter button`))); err != nil {
		t.Fatal(err)
	}
	waitJS(t, ctx, "batch BX listed", rows+` === 1 && document.querySelector('#runs-body tr').dataset.id === '`+ids["LD-0201"]+`'`, 10*time.Second)
	waitJS(t, ctx, "batch overlay", `!document.getElementById('batch-box').hidden && document.getElementById('batch-img').naturalWidth > 0`, 20*time.Second)
	if s := jsString(ctx, `document.getElementById('batch-summary').innerText`); !strings.Contains(s, "yield 100.0 %") {
		t.Errorf("batch summary %q", s)
	}
	jsString(ctx, `document.getElementById('rf-batch').value = ''`)
	if err := chromedp.Do(ctx, chromedp.SetValue(chromedp.ID("rf-unit"), "ld-0202"), chromedp.Click(chromedp.CSS(`#runs-filter button`))); err != nil {
		t.Fatal(err)
	}
	waitJS(t, ctx, "unit LD-0202 listed", rows+` === 1 && document.querySelector('#runs-body tr').dataset.id === '`+ids["LD-0202"]+`'`, 10*time.Second)
	if !jsBoolOK(ctx, `document.getElementById('batch-box').hidden`) {
		t.Error("batch view shown without a batch filter")
	}
	if s := jsString(ctx, `document.getElementById('runs-page').innerText`); s != "runs 1–1 of 1" {
		t.Errorf("page info %q", s)
	}
}

func jsBoolOK(ctx context.Context, expr string) bool {
	ok, err := jsBool(ctx, expr)
	return err == nil && ok
}
