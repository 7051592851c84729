package analysis

import (
	"fmt"
	"os"
	"strconv"
	"testing"
)

func TestZZOne(t *testing.T) {
	name := os.Getenv("ZZ")
	if name == "" {
		t.Skip()
	}
	gi, _ := strconv.Atoi(os.Getenv("ZZG"))
	sd, _ := strconv.ParseFloat(os.Getenv("ZZSD"), 64)
	for _, d := range loadBattery(t) {
		if d.Name != name {
			continue
		}
		g := d.Grids[gi]
		c := d.Corners[0]
		r, err := Analyze(batteryPoints(g, sd, 1, true), Options{RefHz: c.RefHz})
		if err != nil {
			t.Fatal(err)
		}
		fmt.Println(len(g.FreqHz), "want", deref(c.LowHz), deref(c.HighHz), "got", deref(r.LowHz), deref(r.HighHz), "u", deref(r.LowUHz), deref(r.HighUHz), r.CornerSource)
		fmt.Println(r.Model.Description, r.Model.Reason)
		for _, cd := range r.Model.Candidates {
			fmt.Println("  ", cd.Structure, cd.BIC, cd.ResidualRMSDB)
		}
	}
}

func TestZZRipple(t *testing.T) {
	pts := loadScipyTable(t, "cheby1_lp4")
	r, _ := Analyze(pts, Options{RefMode: RefMax, LevelDB: -0.5})
	fmt.Println(r.CornerSource, r.Model.Reason, r.Model.NoiseFitDB, r.Model.NoiseDiffDB, r.Estimators.Model.Crossings, r.Estimators.Interpolation.Crossings)
}

func TestZZDips(t *testing.T) {
	for _, d := range loadBattery(t) {
		if d.Name != os.Getenv("ZZ") {
			continue
		}
		g := d.Grids[4]
		samples, _ := BuildSamples(batteryPoints(g, 0, 1, true), nil)
		a := &analysis{inc: samples}
		for _, s := range samples {
			a.xs, a.ys = append(a.xs, log10(s.FreqHz)), append(a.ys, s.GainDB)
		}
		floor, _, _ := a.noiseOf()
		fd := newFitData(samples, floor, 400)
		fmt.Println("floor", floor)
		dx := dips(fd.xs, fd.y, fd.s, 4)
		fmt.Println("dips", dx)
		h := fitHints{lowHz: 0, highHz: *d.Corners[0].HighHz}
		st := append(sideStructure(5, false), ZeroPairJ, ZeroPairJ)
		e := newEvaluator(fd, st)
		for _, s0 := range polesWithZeros(fd, sideStructure(5, false), []float64{dx[0] * 2.302585, dx[1] * 2.302585}, patternStarts(5, h.highHz, false)) {
			fmt.Println(e.chi2(s0), s0)
			x, f := e.lm(s0)
			fmt.Println(x)
			m, ok := e.model(x, fd)
			fmt.Println(len(s0), e.np, f, ok, m.Describe())
		}
		for _, f := range stopBands(fd, dx, h, func(f fitted) float64 { return bicOf(fd, f) }) {
			fmt.Println(f.st, f.bic, f.model.Describe())
		}
	}
}
