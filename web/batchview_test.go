package web

import (
	"bytes"
	"image"
	"image/png"
	"os"
	"path/filepath"
	"testing"
	"time"

	"rolloff/sweep/batch"
	"rolloff/sweep/event"
)

// darkPixels counts the pixels of img darker than grey 60.
func darkPixels(img image.Image) int {
	n := 0
	b := img.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			r, g, bl, _ := img.At(x, y).RGBA()
			if (r+g+bl)/3 < 60<<8 {
				n++
			}
		}
	}
	return n
}

// TestBatchView: the batch's counts and yield from the run list, and the
// overlay of its units drawn with the mask they were checked against.
func TestBatchView(t *testing.T) {
	d := startDemo(t, demoOpts{})
	p := smallPlan("fixed")
	p["batch"] = "proto-B"
	// Flat within ±0.5 dB of the 1 kHz gain up to 30 kHz: the demo DUT
	// (corner at 95 kHz) passes.
	p["mask"] = map[string]any{"name": "line acceptance", "relative": true,
		"upper": [][]float64{{1000, 0.5}, {30000, 0.5}}, "lower": [][]float64{{1000, -0.5}, {30000, -0.5}}}
	var ids []string
	for _, u := range []string{"LD-0100", "LD-0101", "LD-0100"} { // LD-0100 measured twice
		p["unit"] = u
		res, data := d.do("POST", "/api/runs", p)
		want(t, "submit", res, data, 201, "")
		id := decode[map[string]string](t, data)["id"]
		d.waitState(t, id, true, 60*time.Second, event.Done)
		ids = append(ids, id)
	}
	res, data := d.do("GET", "/api/batches/proto-B", nil)
	want(t, "batch", res, data, 200, "")
	v := decode[BatchView](t, data)
	if v.Runs != 3 || v.Done != 3 || v.Checked != 3 || v.Passed != 3 || v.Units != 2 || v.UnitsPassed != 2 || v.Yield == nil || *v.Yield != 1 {
		t.Errorf("batch view %+v", v)
	}
	res, data = d.do("GET", "/api/batches/proto-B/overlay.png", nil)
	want(t, "overlay", res, data, 200, "")
	if out := os.Getenv("ROLLOFF_BATCH_SHOT"); out != "" {
		os.WriteFile(out, data, 0o644)
	}
	img, err := png.Decode(bytes.NewReader(data))
	if err != nil {
		t.Fatalf("overlay: %v", err)
	}
	// The mask's heavy lines darken the plot: drawn without them, fewer
	// pixels are dark.
	dirs := make([]string, len(ids))
	for i, id := range ids {
		dirs[i] = filepath.Join(d.dir, id)
	}
	b, err := batch.Load(dirs, batch.Options{})
	if err != nil || b.Mask == nil {
		t.Fatalf("batch: %v (mask %v)", err, b != nil && b.Mask != nil)
	}
	b.Mask = nil
	var buf bytes.Buffer
	if err := drawBatch(&buf, "proto-B", b); err != nil {
		t.Fatal(err)
	}
	bare, err := png.Decode(&buf)
	if err != nil {
		t.Fatal(err)
	}
	if with, without := darkPixels(img), darkPixels(bare); with <= without+200 {
		t.Errorf("overlay with the mask has %d dark pixels, without %d: mask not drawn", with, without)
	}
	for _, c := range []struct {
		path   string
		status int
		field  string
	}{{"/api/batches/none", 404, "batch"}, {"/api/batches/proto-B/summary.doc", 404, "path"}} {
		res, data := d.do("GET", c.path, nil)
		want(t, c.path, res, data, c.status, c.field)
	}
}
