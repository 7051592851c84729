package export

import (
	"bytes"
	"encoding/json"
	"errors"
	"flag"
	"image"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"

	"rolloff/sweep/analysis"
	"rolloff/sweep/point"
	"rolloff/sweep/store"
)

var update = flag.Bool("update", false, "rewrite the golden images in testdata")

// scipyPoints reads a SciPy reference table (testdata/scipy, made by
// make_tables.py with scipy.signal.freqs) through ReadCSV and gives the
// points a realistic uncertainty budget.
func scipyPoints(t testing.TB, name string) []point.Point {
	t.Helper()
	f, err := os.Open(filepath.Join("..", "..", "testdata", "scipy", name+".csv"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	pts, err := ReadCSV(f, name+".csv", ReadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	for i := range pts {
		g := pts[i].GainDB
		pts[i].VinVrms = 0.5
		pts[i].VoutVrms = 0.5 * math.Pow(10, g/20)
		pts[i].ConvAccRel = 0.005
		pts[i].StdRel = 0.0005
		pts[i].DCVolts = 0.4
		pts[i].DCAccV = 0.0002
		pts[i].Range, pts[i].RangeIndex, pts[i].RangeFSVrms = "1 V", 3, 1
		pts[i].Readings = 8
		pts[i].SettleS = 0.25
		pts[i].Time = time.Date(2025, 3, 1, 12, 0, i, 125000000, time.UTC)
	}
	return pts
}

func TestCSVRoundTrip(t *testing.T) {
	pts := scipyPoints(t, "butter_bp2")
	pts[7].Flags = []string{point.FlagUnderRange, point.FlagRefined}
	// Out of order on input: the CSV is sorted by frequency.
	pts[3], pts[4] = pts[4], pts[3]
	var buf bytes.Buffer
	if err := WriteCSV(&buf, pts, nil); err != nil {
		t.Fatal(err)
	}
	header := strings.SplitN(buf.String(), "\n", 2)[0]
	for _, c := range []string{"frequency_hz", "vin_vrms", "vout_vrms", "gain_db", "u_gain_db", "range", "flags", "dc_v", "range_fs_vrms", "readings", "settle_s"} {
		if !strings.Contains(","+header+",", ","+c+",") {
			t.Errorf("header %q lacks %s", header, c)
		}
	}
	if !strings.Contains(buf.String(), "under-range|refined") {
		t.Errorf("flags not joined with |")
	}
	got, err := ReadCSV(bytes.NewReader(buf.Bytes()), "response.csv", ReadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	pts[3], pts[4] = pts[4], pts[3]
	for i := range pts {
		want := pts[i]
		want.GainDB, _ = analysis.GainOf(want)
		if !reflect.DeepEqual(got[i], want) {
			t.Fatalf("row %d:\n got %+v\nwant %+v", i, got[i], want)
		}
	}
}

func TestReadCSVErrors(t *testing.T) {
	cases := []struct{ text, want string }{
		{"", "empty file"},
		{"freq,gain_db\n1,2\n", "no frequency_hz column"},
		{"frequency_hz,phase\n1,2\n", "no gain_db or vout_vrms"},
		{"frequency_hz,vout_vrms\n1,2\n", "give the input level"},
		{"frequency_hz,gain_db\n", "no data rows"},
		{"frequency_hz,gain_db\n100,-1\n200,abc\n", `x.csv:3: column "gain_db": value "abc"`},
		{"frequency_hz,gain_db\n100,-1\n-5,1\n", `x.csv:3: column "frequency_hz": value "-5": want a positive`},
		{"frequency_hz,gain_db\n100,-1\n,1\n", `x.csv:3: column "frequency_hz"`},
		{"# comment\nfrequency_hz,gain_db\n100,-1\n200,-1,3\n", "x.csv:4"},
		{"frequency_hz,gain_db,frequency_hz\n1,2,3\n", `column "frequency_hz" appears twice`},
		{"frequency_hz,gain_db,readings\n1,2,-3\n", `column "readings": value "-3"`},
		{"frequency_hz,gain_db,time\n1,2,yesterday\n", `column "time"`},
		{"frequency_hz,gain_db\n1,NaN\n", `column "gain_db": value "NaN"`},
		{"frequency_hz,gain_db\n1,\"2\n", "x.csv:2"},
	}
	for _, c := range cases {
		_, err := ReadCSV(strings.NewReader(c.text), "x.csv", ReadOptions{})
		if !errors.Is(err, ErrCSV) || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%q: error %v, want %q", c.text, err, c.want)
		}
	}
	// vout_vrms with --vin.
	pts, err := ReadCSV(strings.NewReader("Frequency_Hz, vout_vrms\n1000, 0.5\n"), "x.csv", ReadOptions{VinVrms: 1})
	if err != nil || len(pts) != 1 || pts[0].VinVrms != 1 || math.Abs(pts[0].GainDB-20*math.Log10(0.5)) > 1e-12 {
		t.Errorf("--vin: %+v %v", pts, err)
	}
	if _, err := ReadCSV(strings.NewReader("frequency_hz,gain_db\n1,2\n2,3\n3,4\n"), "x.csv", ReadOptions{MaxRows: 2}); err == nil || !strings.Contains(err.Error(), "x.csv:4: more than 2 rows") {
		t.Errorf("row cap: %v", err)
	}
}

// TestLoadRunJSONL reads a run directory's points.jsonl through the
// store's reader: a torn end is left out, a bad line before it names the
// line.
func TestLoadRunJSONL(t *testing.T) {
	var b bytes.Buffer
	for i, p := range scipyPoints(t, "bessel_lp4")[:5] {
		p.Seq, p.Index = i, i
		j, _ := json.Marshal(p)
		b.Write(j)
		b.WriteByte('\n')
	}
	b.WriteString(`{"seq": 5, "freq_h`) // torn by a crash
	dir := t.TempDir()
	if err := os.WriteFile(filepath.Join(dir, store.FilePoints), b.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	pts, err := LoadRun(dir, ReadOptions{})
	if err != nil || len(pts) != 5 {
		t.Fatalf("%d points, %v", len(pts), err)
	}
	if err := os.WriteFile(filepath.Join(dir, store.FilePoints), []byte("{\"seq\":1}\nnot json\n{\"seq\":2}\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	_, err = LoadRun(dir, ReadOptions{})
	if !errors.Is(err, store.ErrCorrupt) || !strings.Contains(err.Error(), "points.jsonl:2") {
		t.Errorf("bad middle line: %v", err)
	}
}

// dirWriter writes a run's files into a directory with the store's
// atomic writer.
type dirWriter string

func (d dirWriter) WriteFileAtomic(name string, data []byte) error {
	return store.WriteFileAtomic(filepath.Join(string(d), name), data)
}

func TestWriteAll(t *testing.T) {
	pts := scipyPoints(t, "butter_bp2")
	pts[2].Flags = []string{point.FlagClipped}
	m, err := analysis.DecodeMaskTOML("m.toml", []byte("relative = true\nupper = [[10, 0.5], [1e5, 0.5]]\nlower = [[200, -1], [5000, -1]]\n"))
	if err != nil {
		t.Fatal(err)
	}
	res, err := analysis.Analyze(pts, analysis.Options{Mask: m})
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	if err := WriteAll(dirWriter(dir), pts, res); err != nil {
		t.Fatal(err)
	}
	ents, _ := os.ReadDir(dir)
	var names []string
	for _, e := range ents {
		names = append(names, e.Name())
	}
	if strings.Join(names, " ") != "response.csv response.pdf response.png response.svg result.json" {
		t.Errorf("files %v (no temporary files may remain)", names)
	}
	data, _ := os.ReadFile(filepath.Join(dir, store.FileResult))
	var obj map[string]any
	if err := json.Unmarshal(data, &obj); err != nil {
		t.Fatal(err)
	}
	for _, k := range []string{"reference_gain_db", "level_db", "low_hz", "high_hz", "low_u_hz", "high_u_hz", "bandwidth_hz",
		"peaking_db", "peaking_hz", "slope_db_per_decade_low", "slope_db_per_decade_high", "model", "points", "excluded", "mask",
		"estimators", "agreement", "low_beyond_hz", "high_beyond_hz"} {
		if _, ok := obj[k]; !ok {
			t.Errorf("result.json lacks %q", k)
		}
	}
	if obj["low_beyond_hz"] != nil || obj["low_hz"] == nil {
		t.Errorf("low_hz %v, low_beyond_hz %v", obj["low_hz"], obj["low_beyond_hz"])
	}
	magic := map[string]string{store.FileResponsePNG: "\x89PNG", store.FileResponseSVG: "<?xml", store.FileResponsePDF: "%PDF"}
	for name, want := range magic {
		b, _ := os.ReadFile(filepath.Join(dir, name))
		if !bytes.HasPrefix(b, []byte(want)) {
			t.Errorf("%s starts %q", name, b[:min(8, len(b))])
		}
	}
	svg, _ := os.ReadFile(filepath.Join(dir, store.FileResponseSVG))
	for _, s := range []string{"excluded (flagged)", "limit mask", "1 kHz", "100 kHz", "47.00 Hz ±"} {
		if !bytes.Contains(svg, []byte(s)) {
			t.Errorf("svg lacks %q", s)
		}
	}
}

func TestDecimate(t *testing.T) {
	var in []float64
	var ys []float64
	for i := 0; i < 10000; i++ {
		in = append(in, 10*math.Pow(1e5, float64(i)/9999))
		ys = append(ys, math.Sin(float64(i)))
	}
	ys[5000] = 7 // a spike must survive
	out := decimate(finiteXYs(in, ys), 500)
	if len(out) > 4*500 || len(out) < 500 {
		t.Fatalf("%d points", len(out))
	}
	found := false
	for i, v := range out {
		if v.Y == 7 {
			found = true
		}
		if i > 0 && v.X < out[i-1].X {
			t.Fatalf("not in x order at %d", i)
		}
	}
	if !found || out[0].X != in[0] || out[len(out)-1].X != in[len(in)-1] {
		t.Errorf("spike kept %v, ends %v %v", found, out[0].X, out[len(out)-1].X)
	}
}

func TestHzTicks(t *testing.T) {
	var labels []string
	for _, tk := range (hzTicks{}).Ticks(10, 2e6) {
		if tk.Label != "" {
			labels = append(labels, tk.Label)
		}
	}
	if got := strings.Join(labels, ","); got != "10 Hz,100 Hz,1 kHz,10 kHz,100 kHz,1 MHz" {
		t.Errorf("labels %s", got)
	}
}

// golden compares a rendered PNG with testdata/name_golden.png, tolerating
// a few pixels of anti-aliasing difference (≤ 0.5 % of pixels off by more
// than 48 levels in any channel); -update rewrites it.
func golden(t *testing.T, name string, got []byte) {
	t.Helper()
	path := filepath.Join("testdata", name+"_golden.png")
	if *update {
		if err := os.WriteFile(path, got, 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	wantB, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run go test -update to create it)", err)
	}
	gi, err1 := png.Decode(bytes.NewReader(got))
	wi, err2 := png.Decode(bytes.NewReader(wantB))
	if err1 != nil || err2 != nil {
		t.Fatal(err1, err2)
	}
	if gi.Bounds() != wi.Bounds() {
		t.Fatalf("%s: size %v, golden %v", name, gi.Bounds(), wi.Bounds())
	}
	bad := 0
	b := gi.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			if pixelDiff(gi, wi, x, y) > 48 {
				bad++
			}
		}
	}
	if frac := float64(bad) / float64(b.Dx()*b.Dy()); frac > 0.005 {
		os.WriteFile(filepath.Join(t.TempDir(), name+".png"), got, 0o644)
		t.Errorf("%s: %.2f %% of pixels differ from the golden image", name, 100*frac)
	}
}

func pixelDiff(a, b image.Image, x, y int) int {
	r1, g1, b1, _ := a.At(x, y).RGBA()
	r2, g2, b2, _ := b.At(x, y).RGBA()
	d := 0
	for _, p := range [][2]uint32{{r1, r2}, {g1, g2}, {b1, b2}} {
		v := int(p[0]>>8) - int(p[1]>>8)
		if v < 0 {
			v = -v
		}
		d = max(d, v)
	}
	return d
}

func TestGoldenResponse(t *testing.T) {
	pts := scipyPoints(t, "butter_bp2")
	pts[4].Flags = []string{point.FlagUnderRange}
	pts[4].VoutVrms *= 1.5
	m, err := analysis.DecodeMaskTOML("m.toml", []byte("relative = true\nupper = [[10, 0.5], [1e5, 0.5]]\nlower = [[200, -1], [5000, -1], [10000, -2]]\n"))
	if err != nil {
		t.Fatal(err)
	}
	res, err := analysis.Analyze(pts, analysis.Options{Mask: m})
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := WritePlot(&buf, "png", pts, res, PlotOptions{Title: "band-pass prototype"}); err != nil {
		t.Fatal(err)
	}
	golden(t, "response", buf.Bytes())
}

func TestGoldenOverlayDiff(t *testing.T) {
	a := scipyPoints(t, "butter_lp3")
	b := scipyPoints(t, "bessel_lp4")
	var buf bytes.Buffer
	if err := Overlay(&buf, "png", PlotOptions{}, Series{Name: "third-order", Points: a}, Series{Name: "fourth-order", Points: b}); err != nil {
		t.Fatal(err)
	}
	golden(t, "overlay", buf.Bytes())
	buf.Reset()
	if err := DiffPlot(&buf, "png", PlotOptions{}, Series{Name: "before", Points: a}, Series{Name: "after", Points: b}); err != nil {
		t.Fatal(err)
	}
	golden(t, "diff", buf.Bytes())
	// The difference itself: B − A at a grid frequency equals the two
	// interpolants' difference, and at 1 kHz both are flat (≈ 0 dB).
	d, err := Diff(Series{Name: "a", Points: a}, Series{Name: "b", Points: b})
	if err != nil {
		t.Fatal(err)
	}
	if len(d.FreqHz) != DiffPoints || d.FreqHz[0] != 10 || d.FreqHz[len(d.FreqHz)-1] != 1e5 {
		t.Fatalf("grid %d points %v..%v", len(d.FreqHz), d.FreqHz[0], d.FreqHz[len(d.FreqHz)-1])
	}
	for i, f := range d.FreqHz {
		if f > 990 && f < 1010 && math.Abs(d.DiffDB[i]) > 0.05 {
			t.Errorf("difference at %v Hz: %v dB", f, d.DiffDB[i])
		}
	}
	if err := WritePlot(&buf, "gif", a, nil, PlotOptions{}); !errors.Is(err, ErrFormat) {
		t.Errorf("gif: %v", err)
	}
}
