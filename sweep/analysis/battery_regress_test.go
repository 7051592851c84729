package analysis

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"
)

// The regression record of the reference battery: per family × density ×
// noise level the figures the analysis reaches, kept in
// testdata/battery/reached.json. Each figure is "lower is better" and has
// the target the battery must eventually meet; a row that meets its target
// is recorded as met and is held to the target itself, a row that does not
// yet is held to the figure reached, so that no change can make either
// worse. make battery still checks every target and fails while one is
// missed; make battery-regress (what CI runs) fails only on a regression.

// regressSlack is the relative slack on a recorded figure (the run is
// deterministic; this only absorbs the decimal rounding of the record).
const regressSlack = 1e-9

// jfloat is a float64 that writes ±Inf as the strings "inf" and "-inf".
type jfloat float64

func (f jfloat) MarshalJSON() ([]byte, error) {
	switch {
	case math.IsInf(float64(f), 1):
		return []byte(`"inf"`), nil
	case math.IsInf(float64(f), -1):
		return []byte(`"-inf"`), nil
	case math.IsNaN(float64(f)):
		return []byte(`"nan"`), nil
	}
	return json.Marshal(float64(f))
}

func (f *jfloat) UnmarshalJSON(b []byte) error {
	switch string(b) {
	case `"inf"`:
		*f = jfloat(math.Inf(1))
		return nil
	case `"-inf"`:
		*f = jfloat(math.Inf(-1))
		return nil
	case `"nan"`:
		*f = jfloat(math.NaN())
		return nil
	}
	var v float64
	if err := json.Unmarshal(b, &v); err != nil {
		return err
	}
	*f = jfloat(v)
	return nil
}

// regressFigure is one recorded figure: the value reached, its target, and
// the ceiling a later run must stay within (the target when met).
type regressFigure struct {
	Name    string `json:"name"`
	Reached jfloat `json:"reached"`
	Target  jfloat `json:"target"`
	Met     bool   `json:"met"`
	Ceiling jfloat `json:"ceiling"`
}

// regressRow is one family × density × noise row ("all" rows are totals).
type regressRow struct {
	Family  string          `json:"family"`
	PPD     int             `json:"ppd"`
	NoiseDB float64         `json:"noise_db"`
	N       int             `json:"corners"`
	Figures []regressFigure `json:"figures"`
}

func (r regressRow) key() string { return fmt.Sprintf("%s|%d|%g", r.Family, r.PPD, r.NoiseDB) }

type regressDoc struct {
	About string       `json:"about"`
	Rows  []regressRow `json:"rows"`
}

func newFigure(name string, reached, target float64) regressFigure {
	met := reached <= target
	ceil := reached
	if met {
		ceil = target
	}
	return regressFigure{Name: name, Reached: jfloat(reached), Target: jfloat(target), Met: met, Ceiling: jfloat(ceil)}
}

// regressRows computes the battery's figures per row and in total.
func regressRows(all []*batteryCorner) []regressRow {
	type acc struct {
		row    regressRow
		maxV   float64
		misses int
	}
	var order []string
	rows := map[string]*acc{}
	get := func(family string, ppd int, sd float64) *acc {
		r := regressRow{Family: family, PPD: ppd, NoiseDB: sd}
		k := r.key()
		if rows[k] == nil {
			rows[k] = &acc{row: r}
			order = append(order, k)
		}
		return rows[k]
	}
	var covered, coverageOf int
	for _, c := range all {
		a := get(c.family, c.ppd, c.noiseDB)
		a.row.N++
		if c.noiseDB == 0 {
			e := math.Abs(c.errs[0])
			a.maxV = math.Max(a.maxV, e)
			if e > freeTarget(c.ppd) {
				a.misses++
			}
			continue
		}
		covered += c.covered
		coverageOf += len(c.errs)
		if math.IsNaN(c.limit) {
			continue
		}
		var ss float64
		for _, e := range c.errs {
			ss += e * e
		}
		ratio := math.Sqrt(ss/float64(len(c.errs))) / c.limit
		a.maxV = math.Max(a.maxV, ratio)
		if !(ratio <= 1.5) {
			a.misses++
		}
	}
	sort.Strings(order)
	var out []regressRow
	for _, k := range order {
		a := rows[k]
		r := a.row
		if r.NoiseDB == 0 {
			r.Figures = []regressFigure{newFigure("max |err|", a.maxV, freeTarget(r.PPD)), newFigure("corners beyond", float64(a.misses), 0)}
		} else {
			r.Figures = []regressFigure{newFigure("max rms/limit", a.maxV, 1.5), newFigure("corners beyond", float64(a.misses), 0)}
		}
		out = append(out, r)
	}
	if coverageOf > 0 {
		cov := float64(covered) / float64(coverageOf)
		off := math.Max(0, math.Max(0.90-cov, cov-0.98))
		out = append(out, regressRow{Family: "all", PPD: 0, NoiseDB: -1, N: coverageOf,
			Figures: []regressFigure{newFigure("k=2 coverage outside 90..98 %", off, 0)}})
	}
	return out
}

// freeTarget is the noise-free target on the relative corner error.
func freeTarget(ppd int) float64 {
	if ppd >= 10 {
		return 5e-4
	}
	return 5e-3
}

// compareRegress prints the figures against the record and returns the
// regressions (a figure above its ceiling, or a row missing from the run).
func compareRegress(got []regressRow, rec map[string]regressRow) (table string, worse []string) {
	var b strings.Builder
	fmt.Fprintf(&b, "%-12s %4s %-10s %5s  %-30s %12s %10s  %-8s %12s  %s\n", "family", "ppd", "noise", "n", "figure", "reached", "target", "target", "ceiling", "vs record")
	for _, r := range got {
		old, have := rec[r.key()]
		noise := fmtNoise(r.NoiseDB)
		if r.NoiseDB < 0 {
			noise = "noisy"
		}
		for i, f := range r.Figures {
			status := "new"
			ceil := math.NaN()
			if have && i < len(old.Figures) && old.Figures[i].Name == f.Name {
				ceil = float64(old.Figures[i].Ceiling)
				switch {
				case float64(f.Reached) > ceil*(1+regressSlack)+1e-15:
					status = "WORSE"
					worse = append(worse, fmt.Sprintf("%s %d ppd %s: %s %s, recorded ceiling %s", r.Family, r.PPD, noise, f.Name, fmtFig(f.Name, float64(f.Reached)), fmtFig(f.Name, ceil)))
				case !old.Figures[i].Met && f.Met:
					status = "now meets target"
				case !old.Figures[i].Met && float64(f.Reached) < float64(old.Figures[i].Reached)*(1-1e-6):
					status = "better"
				default:
					status = "ok"
				}
			} else if rec != nil {
				worse = append(worse, fmt.Sprintf("%s %d ppd %s: figure %q not in the record (make battery-update)", r.Family, r.PPD, noise, f.Name))
			}
			met := "met"
			if !f.Met {
				met = "NOT MET"
			}
			fmt.Fprintf(&b, "%-12s %4d %-10s %5d  %-30s %12s %10s  %-8s %12s  %s\n", r.Family, r.PPD, noise, r.N, f.Name,
				fmtFig(f.Name, float64(f.Reached)), fmtFig(f.Name, float64(f.Target)), met, fmtFig(f.Name, ceil), status)
		}
	}
	seen := map[string]bool{}
	for _, r := range got {
		seen[r.key()] = true
	}
	for k := range rec {
		if !seen[k] {
			worse = append(worse, fmt.Sprintf("recorded row %s missing from the run", k))
		}
	}
	return b.String(), worse
}

func fmtFig(name string, v float64) string {
	switch {
	case math.IsNaN(v):
		return "-"
	case math.IsInf(v, 1):
		return "inf"
	case strings.HasPrefix(name, "max |err|"), strings.HasPrefix(name, "k=2"):
		return fmt.Sprintf("%.4f %%", 100*v)
	case strings.HasPrefix(name, "corners"):
		return fmt.Sprintf("%.0f", v)
	}
	return fmt.Sprintf("%.3f", v)
}

// TestBatteryRegress runs the whole reference battery (as make battery
// does) when ROLLOFF_BATTERY_REGRESS is set (make battery-regress, which
// CI runs), prints its table with each target marked met or not met, and
// fails if any figure is worse than recorded in
// testdata/battery/reached.json. With ROLLOFF_BATTERY_REGRESS=update it
// rewrites the record from this run instead (make battery-update); do that
// only when the figures got better, and commit the file.
func TestBatteryRegress(t *testing.T) {
	mode := os.Getenv("ROLLOFF_BATTERY_REGRESS")
	if mode == "" {
		t.Skip("the battery's regression check runs with ROLLOFF_BATTERY_REGRESS=1 (make battery-regress)")
	}
	path := filepath.Join("..", "..", "testdata", "battery", "reached.json")
	all := runBattery(t, loadBattery(t), batteryOpts{noise: []float64{0, 0.01, 0.05}, seeds: 20, declared: true})
	fmt.Print(batteryTable(summariseBattery(all)))
	fmt.Print(totalBattery(all))
	got := regressRows(all)
	if mode == "update" {
		doc := regressDoc{About: "Figures reached by the analysis on the reference battery (make battery-update writes this file; " +
			"make battery-regress fails when a figure exceeds its ceiling: the target where met, else the figure reached).", Rows: got}
		data, err := json.MarshalIndent(doc, "", "  ")
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, append(data, '\n'), 0o644); err != nil {
			t.Fatal(err)
		}
		table, _ := compareRegress(got, nil)
		fmt.Print(table)
		t.Logf("wrote %s", path)
		return
	}
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (make battery-update writes it)", err)
	}
	var doc regressDoc
	if err := json.Unmarshal(data, &doc); err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	rec := map[string]regressRow{}
	for _, r := range doc.Rows {
		rec[r.key()] = r
	}
	table, worse := compareRegress(got, rec)
	fmt.Print(table)
	for _, w := range worse {
		t.Errorf("battery regression: %s", w)
	}
}

// TestRegressCompare checks the record's comparison on made-up rows: a
// met row is held to its target, an unmet one to the figure reached.
func TestRegressCompare(t *testing.T) {
	rec := map[string]regressRow{}
	for _, r := range []regressRow{
		{Family: "a", PPD: 10, Figures: []regressFigure{newFigure("max |err|", 2e-4, 5e-4)}},
		{Family: "b", PPD: 10, Figures: []regressFigure{newFigure("max |err|", 2e-3, 5e-4)}},
	} {
		rec[r.key()] = r
	}
	if f := rec["a|10|0"].Figures[0]; !f.Met || float64(f.Ceiling) != 5e-4 {
		t.Fatalf("met figure recorded as %+v: want met, ceiling the target", f)
	}
	cases := []struct {
		a, b  float64
		worse int
	}{{4e-4, 2e-3, 0}, {6e-4, 2e-3, 1}, {1e-4, 2.1e-3, 1}, {1e-4, 1e-3, 0}, {6e-4, math.Inf(1), 2}}
	for _, c := range cases {
		got := []regressRow{
			{Family: "a", PPD: 10, Figures: []regressFigure{newFigure("max |err|", c.a, 5e-4)}},
			{Family: "b", PPD: 10, Figures: []regressFigure{newFigure("max |err|", c.b, 5e-4)}},
		}
		if _, worse := compareRegress(got, rec); len(worse) != c.worse {
			t.Errorf("a %g, b %g: %d regressions %q, want %d", c.a, c.b, len(worse), worse, c.worse)
		}
	}
	if _, worse := compareRegress(nil, rec); len(worse) != 2 {
		t.Errorf("empty run: %d regressions, want 2 (both rows missing)", len(worse))
	}
	var back jfloat
	if err := json.Unmarshal([]byte(`"inf"`), &back); err != nil || !math.IsInf(float64(back), 1) {
		t.Errorf("inf round trip: %v %v", back, err)
	}
}
