package web

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"image/color"
	"math"
	"net/http"
	"net/url"
	"path/filepath"
	"strings"
	"time"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"

	"rolloff/sweep/batch"
	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/queue"
	"rolloff/web/guard"
)

// sample is a legend's line of style ls.
type sample draw.LineStyle

func (s sample) Thumbnail(c *draw.Canvas) {
	y := c.Center().Y
	c.StrokeLine2(draw.LineStyle(s), c.Min.X, y, c.Max.X, y)
}

// MaxBatchOverlayUnits is the most units one batch overlay draws: the
// newest finished ones.
const MaxBatchOverlayUnits = 400

// BatchView is the body of GET /api/batches/{batch}: the batch's runs
// counted from the run list (the verdicts the runs recorded).
type BatchView struct {
	Batch string `json:"batch"`
	// Runs is every run of the batch; Done those that finished, Checked
	// those checked against a mask, Passed and Failed their verdicts.
	Runs    int `json:"runs"`
	Done    int `json:"done"`
	Checked int `json:"checked"`
	Passed  int `json:"passed"`
	Failed  int `json:"failed"`
	// Units is how many serial numbers the batch's runs name; a unit
	// measured again counts once, with its newest finished run.
	Units int `json:"units"`
	// Yield is Passed/Checked over each unit's newest finished run, nil
	// when no unit was checked.
	Yield       *float64 `json:"yield"`
	UnitsPassed int      `json:"units_passed"`
	UnitsFailed int      `json:"units_failed"`
	// First and Last are the creation times of its oldest and newest run.
	First time.Time `json:"first"`
	Last  time.Time `json:"last"`
}

// maskPass reads the mask verdict of a run's result: pass, and whether
// the run was checked against a mask at all.
func maskPass(res json.RawMessage) (pass, checked bool) {
	if len(res) == 0 {
		return false, false
	}
	var r struct {
		Mask *struct {
			Pass bool `json:"pass"`
		} `json:"mask"`
	}
	if json.Unmarshal(res, &r) != nil || r.Mask == nil {
		return false, false
	}
	return r.Mask.Pass, true
}

// batchRuns returns the runs of batch b, newest first.
func (s *Server) batchRuns(b string) []queue.Info {
	f := runFilter{batch: b}
	runs, _ := s.queue.Page(f.keep, 0, -1)
	return runs
}

func viewOf(b string, runs []queue.Info) BatchView {
	v := BatchView{Batch: b, Runs: len(runs)}
	units := map[string]bool{}
	for _, in := range runs { // newest first
		if v.Last.IsZero() || in.Created.After(v.Last) {
			v.Last = in.Created
		}
		if v.First.IsZero() || in.Created.Before(v.First) {
			v.First = in.Created
		}
		unit := in.ID
		if in.Plan != nil && in.Plan.Unit != "" {
			unit = strings.ToLower(in.Plan.Unit)
		}
		newest := !units[unit]
		if in.State != event.Done {
			if _, seen := units[unit]; !seen {
				units[unit] = false // named, not finished yet
			}
			continue
		}
		v.Done++
		pass, checked := maskPass(in.Result)
		if checked {
			v.Checked++
			if pass {
				v.Passed++
			} else {
				v.Failed++
			}
		}
		if newest {
			units[unit] = true
			if checked {
				if pass {
					v.UnitsPassed++
				} else {
					v.UnitsFailed++
				}
			}
		}
	}
	v.Units = len(units)
	if n := v.UnitsPassed + v.UnitsFailed; n > 0 {
		y := float64(v.UnitsPassed) / float64(n)
		v.Yield = &y
	}
	return v
}

// batchRoute answers /api/batches/{batch} (the counts and yield) and
// /api/batches/{batch}/overlay.png (every finished unit's response with
// the mask).
func (s *Server) batchRoute(w http.ResponseWriter, r *http.Request, rest string) {
	if !method(w, r, http.MethodGet) {
		return
	}
	name, tail, _ := strings.Cut(rest, "/")
	b, err := url.PathUnescape(name)
	if err != nil || b == "" || len(b) > plan.MaxUnitBytes {
		s.fail(w, badRequest("batch", "batch %q: want 1..%d bytes", clip(name), plan.MaxUnitBytes))
		return
	}
	runs := s.batchRuns(b)
	if len(runs) == 0 {
		s.fail(w, &apiError{status: http.StatusNotFound, field: "batch", msg: fmt.Sprintf("no run of batch %q", clip(b))})
		return
	}
	switch tail {
	case "":
		writeJSON(w, http.StatusOK, viewOf(b, runs))
	case "overlay.png":
		ov, ok := s.be.(batchOverlayer)
		if !ok {
			s.fail(w, &apiError{status: http.StatusNotFound, field: "path", msg: "no batch overlay on this daemon"})
			return
		}
		var ids []string
		for _, in := range runs {
			if in.State == event.Done && len(ids) < MaxBatchOverlayUnits {
				ids = append(ids, in.ID)
			}
		}
		if len(ids) == 0 {
			s.fail(w, &apiError{status: http.StatusConflict, field: "batch", msg: fmt.Sprintf("batch %q has no finished run yet", clip(b))})
			return
		}
		ctx, cancel := context.WithTimeout(r.Context(), 30*time.Second)
		defer cancel()
		var buf bytes.Buffer
		if err := ov.BatchOverlay(ctx, &buf, b, ids); err != nil {
			s.fail(w, err)
			return
		}
		h := w.Header()
		h.Set("Content-Type", "image/png")
		h.Set("X-Content-Type-Options", "nosniff")
		h.Set("Cache-Control", "no-store")
		_, _ = w.Write(buf.Bytes())
	default:
		guard.WriteError(w, http.StatusNotFound, "path", fmt.Sprintf("no such resource %q", clip(r.URL.Path)))
	}
}

// batchOverlayer is an optional capability of a backend: the overlay of
// a batch's units with its mask.
type batchOverlayer interface {
	BatchOverlay(ctx context.Context, w *bytes.Buffer, name string, ids []string) error
}

var _ batchOverlayer = (*bridge)(nil)

// BatchOverlay draws the units of runs ids (finished runs of batch name)
// over each other with the mask they were checked against, as PNG:
// passing units in light grey, failing ones dark and dashed, the mask's
// limit lines heavy; the title gives the yield.
func (g *bridge) BatchOverlay(ctx context.Context, w *bytes.Buffer, name string, ids []string) error {
	dirs := make([]string, len(ids))
	for i, id := range ids {
		dirs[i] = filepath.Join(g.st.Dir(), id)
	}
	b, err := batch.Load(dirs, batch.Options{})
	if err != nil {
		return &apiError{status: 422, field: "batch", msg: fmt.Sprintf("cannot load batch %q: %v", clip(name), err)}
	}
	if err := ctx.Err(); err != nil {
		return err
	}
	return drawBatch(w, name, b)
}

// drawBatch renders the overlay of b's units; the gains are relative to
// each unit's reference level unless the mask is absolute.
func drawBatch(w *bytes.Buffer, name string, b *batch.Batch) error {
	rel := b.Mask == nil || b.Mask.Relative
	p := plot.New()
	p.X.Scale, p.X.Tick.Marker = plot.LogScale{}, plot.LogTicks{Prec: -1}
	p.X.Label.Text = "frequency (Hz)"
	p.Y.Label.Text = "gain re reference (dB)"
	if !rel {
		p.Y.Label.Text = "gain (dB)"
	}
	checked, passed := 0, 0
	for _, u := range b.Units {
		if u.Verdict == batch.Pass || u.Verdict == batch.Fail {
			checked++
			if u.Verdict == batch.Pass {
				passed++
			}
		}
	}
	title := fmt.Sprintf("batch %s: %d runs", name, len(b.Units))
	if checked > 0 {
		title += fmt.Sprintf(", %.1f %% pass the mask (%d of %d)", 100*float64(passed)/float64(checked), passed, checked)
	} else {
		title += ", no mask checked"
	}
	p.Title.Text = title
	p.Add(plotter.NewGrid())
	passLine := draw.LineStyle{Color: color.Gray{Y: 165}, Width: vg.Points(0.6)}
	failLine := draw.LineStyle{Color: color.Gray{Y: 30}, Width: vg.Points(1.1), Dashes: []vg.Length{vg.Points(4), vg.Points(2)}}
	maskLine := draw.LineStyle{Color: color.Gray{Y: 0}, Width: vg.Points(2.2)}
	loHz, hiHz := math.Inf(1), math.Inf(-1)
	var fails []*plotter.Line
	drawn := 0
	for _, u := range b.Units {
		r := u.In.Result
		if r == nil {
			continue
		}
		var xy plotter.XYs
		for _, smp := range r.Samples {
			g := smp.GainDB
			if rel {
				g -= r.ReferenceGainDB
			}
			if smp.Excluded || !(smp.FreqHz > 0) || math.IsNaN(g) || math.IsInf(g, 0) {
				continue
			}
			xy = append(xy, plotter.XY{X: smp.FreqHz, Y: g})
			loHz, hiHz = math.Min(loHz, smp.FreqHz), math.Max(hiHz, smp.FreqHz)
		}
		if len(xy) < 2 {
			continue
		}
		l, err := plotter.NewLine(xy)
		if err != nil {
			continue
		}
		drawn++
		if u.Verdict == batch.Fail {
			l.LineStyle = failLine
			fails = append(fails, l)
			continue
		}
		l.LineStyle = passLine
		p.Add(l)
	}
	for _, l := range fails { // on top of the passing ones
		p.Add(l)
	}
	if drawn == 0 {
		return &apiError{status: 422, field: "batch", msg: fmt.Sprintf("batch %q: no unit has an analysed response to draw", clip(name))}
	}
	p.Legend.Add("passing unit", sample(passLine))
	if len(fails) > 0 {
		p.Legend.Add("failing unit", sample(failLine))
	}
	if m := b.Mask; m != nil {
		first := true
		for _, line := range [][][2]float64{m.Upper, m.Lower} {
			var xy plotter.XYs
			for _, v := range line {
				if v[0] > 0 && !math.IsInf(v[1], 0) && !math.IsNaN(v[1]) {
					xy = append(xy, plotter.XY{X: v[0], Y: v[1]})
				}
			}
			if len(xy) < 2 {
				continue
			}
			ml, err := plotter.NewLine(xy)
			if err != nil {
				continue
			}
			ml.LineStyle = maskLine
			p.Add(ml)
			if first {
				p.Legend.Add("mask", ml)
				first = false
			}
		}
	}
	p.Legend.Top, p.Legend.Left = false, true
	p.X.Min, p.X.Max = loHz, hiHz
	c := vgimg.NewWith(vgimg.UseWH(20*vg.Centimeter, 12*vg.Centimeter), vgimg.UseDPI(110))
	p.Draw(draw.New(c))
	_, err := vgimg.PngCanvas{Canvas: c}.WriteTo(w)
	return err
}
