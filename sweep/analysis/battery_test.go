package analysis

import (
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"sort"
	"strings"
	"sync"
	"testing"
	"time"

	"rolloff/sweep/point"
)

// The reference battery in testdata/battery was computed with SciPy
// (designs from scipy.signal, exact gains from scipy.signal.freqs_zpk,
// exact corners by scipy.optimize.brentq on the exact magnitude, and the
// information limit of the true structure); see
// testdata/battery/make_battery.py.

type batteryCase struct {
	RefMode string   `json:"ref_mode"`
	RefHz   float64  `json:"ref_hz"`
	LevelDB float64  `json:"level_db"`
	LowHz   *float64 `json:"low_hz"`
	HighHz  *float64 `json:"high_hz"`
}

type batteryGrid struct {
	PPD       int       `json:"ppd"`
	Irregular bool      `json:"irregular"`
	FreqHz    []float64 `json:"freq_hz"`
	GainDB    []float64 `json:"gain_db"`
	// LimitPerDB is, per case, the information limit (standard deviation
	// of ln fc) for 1 dB of noise; null where the data do not determine it.
	LimitPerDB []struct {
		Low  *float64 `json:"low"`
		High *float64 `json:"high"`
	} `json:"limit_per_db"`
}

type batteryDesign struct {
	Name        string        `json:"name"`
	Family      string        `json:"family"`
	Description string        `json:"description"`
	Corners     []batteryCase `json:"corners"`
	Grids       []batteryGrid `json:"grids"`
}

func loadBattery(t testing.TB) []batteryDesign {
	t.Helper()
	data, err := os.ReadFile(filepath.Join("..", "..", "testdata", "battery", "battery.json"))
	if err != nil {
		t.Fatal(err)
	}
	var doc struct {
		Designs []batteryDesign `json:"designs"`
	}
	if err := json.Unmarshal(data, &doc); err != nil {
		t.Fatal(err)
	}
	return doc.Designs
}

// batteryPoints returns the grid's response as points (Vin 1 V); with
// sdDB > 0 seeded Gaussian noise of that rms is added and declared as the
// points' Type A uncertainty, as a CSV with u_gain_db declares it.
func batteryPoints(g batteryGrid, sdDB float64, seed uint64, declare bool) []point.Point {
	rng := rand.New(rand.NewPCG(seed, 0xba77e))
	pts := make([]point.Point, len(g.FreqHz))
	for i, f := range g.FreqHz {
		v := g.GainDB[i]
		if sdDB > 0 {
			v += sdDB * rng.NormFloat64()
		}
		p := point.Point{Seq: i, FreqHz: f, VinVrms: 1, VoutVrms: math.Pow(10, v/20), GainDB: v}
		if declare && sdDB > 0 {
			p.StdRel = sdDB / dbPerRel
		}
		pts[i] = p
	}
	return pts
}

// batteryCorner is one corner of one response in one noise condition.
type batteryCorner struct {
	family  string
	ppd     int
	noiseDB float64
	errs    []float64 // relative errors, one per seed (Inf: corner missed)
	covered int       // seeds whose expanded uncertainty covers the truth
	limit   float64   // information limit of ln fc at this noise, NaN if none
	where   string
}

type batteryOpts struct {
	noise    []float64
	seeds    int
	declared bool
	filter   func(d batteryDesign, g batteryGrid) bool
}

func runBattery(t testing.TB, designs []batteryDesign, bo batteryOpts) []*batteryCorner {
	type job struct {
		d  batteryDesign
		g  batteryGrid
		ci int
		c  batteryCase
		sd float64
	}
	var jobs []job
	for _, d := range designs {
		for _, g := range d.Grids {
			if bo.filter != nil && !bo.filter(d, g) {
				continue
			}
			for ci, c := range d.Corners {
				for _, sd := range bo.noise {
					jobs = append(jobs, job{d, g, ci, c, sd})
				}
			}
		}
	}
	out := make([][]*batteryCorner, len(jobs))
	var wg sync.WaitGroup
	next := make(chan int)
	for w := 0; w < runtime.GOMAXPROCS(0); w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range next {
				out[i] = batteryJob(jobs[i].d, jobs[i].g, jobs[i].ci, jobs[i].c, jobs[i].sd, bo)
			}
		}()
	}
	for i := range jobs {
		next <- i
	}
	close(next)
	wg.Wait()
	var all []*batteryCorner
	for _, o := range out {
		all = append(all, o...)
	}
	return all
}

func batteryJob(d batteryDesign, g batteryGrid, ci int, c batteryCase, sd float64, bo batteryOpts) []*batteryCorner {
	opts := Options{LevelDB: c.LevelDB, RefHz: c.RefHz}
	if c.RefMode == "max" {
		opts = Options{LevelDB: c.LevelDB, RefMode: RefMax}
	}
	seeds := 1
	if sd > 0 {
		seeds = bo.seeds
	}
	grid := "regular"
	if g.Irregular {
		grid = "irregular"
	}
	var res []*batteryCorner
	sides := []struct {
		name  string
		want  *float64
		limit *float64
	}{{"low", c.LowHz, g.LimitPerDB[ci].Low}, {"high", c.HighHz, g.LimitPerDB[ci].High}}
	for _, s := range sides {
		if s.want == nil {
			continue
		}
		lim := math.NaN()
		if s.limit != nil {
			lim = *s.limit * sd
		}
		res = append(res, &batteryCorner{family: d.Family, ppd: g.PPD, noiseDB: sd, limit: lim,
			where: fmt.Sprintf("%s %s %d ppd %s ref %s %s", d.Name, grid, g.PPD, fmtNoise(sd), c.RefMode, s.name)})
	}
	for seed := 1; seed <= seeds; seed++ {
		t0 := time.Now()
		r, err := Analyze(batteryPoints(g, sd, uint64(seed), bo.declared), opts)
		if el := time.Since(t0); el > 300*time.Millisecond && os.Getenv("ROLLOFF_BATTERY_SLOW") != "" {
			fmt.Printf("slow: %v %s %d ppd %v\n", el, d.Name, g.PPD, sd)
		}
		k := 0
		for _, s := range sides {
			if s.want == nil {
				continue
			}
			bc := res[k]
			k++
			var got, u *float64
			if err == nil {
				if s.name == "low" {
					got, u = r.LowHz, r.LowUHz
				} else {
					got, u = r.HighHz, r.HighUHz
				}
			}
			if got == nil {
				bc.errs = append(bc.errs, math.Inf(1))
				continue
			}
			bc.errs = append(bc.errs, (*got-*s.want) / *s.want)
			if u != nil && math.Abs(*got-*s.want) <= *u {
				bc.covered++
			}
		}
	}
	return res
}

func fmtNoise(sd float64) string {
	if sd == 0 {
		return "noise-free"
	}
	return fmt.Sprintf("%g dB", sd)
}

// batteryRow summarises one family × density × noise level.
type batteryRow struct {
	family         string
	ppd            int
	noiseDB        float64
	n              int
	maxErr, medErr float64 // noise-free: |relative error|
	worst          string
	ratios         []float64 // noisy: rms error / information limit
	covered, total int
}

func summariseBattery(all []*batteryCorner) []*batteryRow {
	rows := map[string]*batteryRow{}
	var keys []string
	errsOf := map[string][]float64{}
	for _, c := range all {
		key := fmt.Sprintf("%-12s %2d %5.3f", c.family, c.ppd, c.noiseDB)
		r := rows[key]
		if r == nil {
			r = &batteryRow{family: c.family, ppd: c.ppd, noiseDB: c.noiseDB}
			rows[key] = r
			keys = append(keys, key)
		}
		r.n++
		if c.noiseDB == 0 {
			e := math.Abs(c.errs[0])
			errsOf[key] = append(errsOf[key], e)
			if e > r.maxErr || r.worst == "" {
				r.maxErr, r.worst = math.Max(e, r.maxErr), c.where
			}
			continue
		}
		var ss float64
		for _, e := range c.errs {
			ss += e * e
		}
		rms := math.Sqrt(ss / float64(len(c.errs)))
		if !math.IsNaN(c.limit) {
			r.ratios = append(r.ratios, rms/c.limit)
		}
		r.covered += c.covered
		r.total += len(c.errs)
	}
	for k, e := range errsOf {
		rows[k].medErr = medianOf(e)
	}
	sort.Strings(keys)
	out := make([]*batteryRow, len(keys))
	for i, k := range keys {
		out[i] = rows[k]
	}
	return out
}

func medianOf(v []float64) float64 {
	s := append([]float64(nil), v...)
	sort.Float64s(s)
	return median(s)
}

func batteryTable(rows []*batteryRow) string {
	var b strings.Builder
	fmt.Fprintf(&b, "%-12s %4s %-10s %4s  %-26s  %s\n", "family", "ppd", "noise", "n", "noise-free |err| max / med", "noisy rms/limit med / max, k=2 coverage")
	for _, r := range rows {
		if r.noiseDB == 0 {
			fmt.Fprintf(&b, "%-12s %4d %-10s %4d  %9.4f %% / %8.4f %%  (worst: %s)\n", r.family, r.ppd, "0", r.n, 100*r.maxErr, 100*r.medErr, r.worst)
			continue
		}
		mx := math.NaN()
		if len(r.ratios) > 0 {
			mx = r.ratios[0]
			for _, v := range r.ratios {
				mx = math.Max(mx, v)
			}
		}
		fmt.Fprintf(&b, "%-12s %4d %-10s %4d  %26s  %6.2f / %7.2f, %5.1f %%\n", r.family, r.ppd, fmtNoise(r.noiseDB), r.n, "", medianOf(r.ratios), mx, 100*float64(r.covered)/float64(max(r.total, 1)))
	}
	return b.String()
}

// batteryTotals are the battery's figures against its targets.
type batteryTotals struct {
	free10, free5       int // noise-free corners at >= 10 and at 5 ppd
	free10Bad, free5Bad int // beyond 0.05 % and 0.5 %
	noisy, noisyBad     int // noisy corners with a finite limit; rms above 1.5 × limit
	covered, coverageOf int
	worst10, worst5     float64
	worst10At, worst5At string
	worstRatio          float64
	worstRatioAt        string
}

func totalBattery(all []*batteryCorner) batteryTotals {
	var t batteryTotals
	for _, c := range all {
		if c.noiseDB == 0 {
			e := math.Abs(c.errs[0])
			if c.ppd >= 10 {
				t.free10++
				if e > 5e-4 {
					t.free10Bad++
				}
				if e > t.worst10 || t.worst10At == "" {
					t.worst10, t.worst10At = math.Max(e, t.worst10), c.where
				}
			} else {
				t.free5++
				if e > 5e-3 {
					t.free5Bad++
				}
				if e > t.worst5 || t.worst5At == "" {
					t.worst5, t.worst5At = math.Max(e, t.worst5), c.where
				}
			}
			continue
		}
		t.covered += c.covered
		t.coverageOf += len(c.errs)
		if math.IsNaN(c.limit) {
			continue
		}
		var ss float64
		for _, e := range c.errs {
			ss += e * e
		}
		ratio := math.Sqrt(ss/float64(len(c.errs))) / c.limit
		t.noisy++
		if ratio > 1.5 {
			t.noisyBad++
		}
		if ratio > t.worstRatio {
			t.worstRatio, t.worstRatioAt = ratio, c.where
		}
	}
	return t
}

func (t batteryTotals) String() string {
	return fmt.Sprintf("noise-free >= 10 ppd: %d/%d within 0.05 %% (worst %.3g %%: %s)\n"+
		"noise-free 5 ppd: %d/%d within 0.5 %% (worst %.3g %%: %s)\n"+
		"noisy: %d/%d corners with rms error within 1.5 x the information limit (worst %.3g x: %s)\n"+
		"noisy: k = 2 coverage %.1f %% of %d corners (target 90..98 %%)\n",
		t.free10-t.free10Bad, t.free10, 100*t.worst10, t.worst10At,
		t.free5-t.free5Bad, t.free5, 100*t.worst5, t.worst5At,
		t.noisy-t.noisyBad, t.noisy, t.worstRatio, t.worstRatioAt,
		100*float64(t.covered)/float64(max(t.coverageOf, 1)), t.coverageOf)
}

// TestBattery runs the whole reference battery when ROLLOFF_BATTERY is
// set (make battery) and prints its table; it fails when a target is
// missed: noise-free corners within 0.05 % at >= 10 points per decade and
// 0.5 % at 5; noisy corners (0.01 and 0.05 dB, declared, 20 seeds) with an
// rms error within 1.5 times the information limit of the true structure
// and a k = 2 coverage between 90 % and 98 %.
func TestBattery(t *testing.T) {
	if os.Getenv("ROLLOFF_BATTERY") == "" {
		t.Skip("the full battery runs with ROLLOFF_BATTERY=1 (make battery)")
	}
	designs := loadBattery(t)
	noise := []float64{0, 0.01, 0.05}
	if os.Getenv("ROLLOFF_BATTERY") == "noise-free" {
		noise = noise[:1] // a quick look while developing
	}
	all := runBattery(t, designs, batteryOpts{noise: noise, seeds: 20, declared: true})
	fmt.Print(batteryTable(summariseBattery(all)))
	for _, c := range all {
		if c.noiseDB == 0 && (c.ppd >= 10 && math.Abs(c.errs[0]) > 5e-4 || c.ppd < 10 && math.Abs(c.errs[0]) > 5e-3) {
			fmt.Printf("noise-free miss: %s: %.3g %%\n", c.where, 100*c.errs[0])
		}
	}
	tot := totalBattery(all)
	fmt.Print(tot)
	if tot.free10Bad > 0 || tot.free5Bad > 0 || tot.noisyBad > 0 {
		t.Errorf("battery targets missed:\n%s", tot)
	}
	if cov := float64(tot.covered) / float64(tot.coverageOf); cov < 0.90 || cov > 0.98 {
		t.Errorf("k = 2 coverage %.1f %%: want 90..98 %%", 100*cov)
	}
}

// batteryOpen are the designs whose noise-free corners on the regular
// 10-points-per-decade grid still miss the 0.05 % target, with the error
// reached (relative); the fast subset fails if they get worse, and says
// when one meets the target (then remove it here). make battery checks
// every design against the target itself.
var batteryOpen = map[string]float64{
	"cheby2_lp6":        0.01,
	"cheby2_lp8":        0.02,
	"ellip_lp7":         0.07,
	"bandstop_ellip":    0.10,
	"anti_alias_ellip9": 0.02,
}

// TestBatteryFast is the quick part of the reference battery run by
// go test: every design on its regular 10-points-per-decade grid,
// noise-free (each corner within 0.05 % of SciPy's, but for
// batteryOpen) and with 0.05 dB of declared noise, 10 seeds (the median
// over the corners of rms error / information limit at most 1.5, and the
// k = 2 coverage at least 88 %; make battery checks every corner).
func TestBatteryFast(t *testing.T) {
	designs := loadBattery(t)
	regular10 := func(d batteryDesign, g batteryGrid) bool { return g.PPD == 10 && !g.Irregular }
	free := runBattery(t, designs, batteryOpts{noise: []float64{0}, filter: regular10})
	for _, c := range free {
		e := math.Abs(c.errs[0])
		name := strings.Fields(c.where)[0]
		if ceil, open := batteryOpen[name]; open {
			if e > ceil {
				t.Errorf("%s: error %.3g %%, worse than the %.3g %% reached", c.where, 100*e, 100*ceil)
			} else if e <= 5e-4 {
				t.Logf("%s: error %.3g %% now meets the target", c.where, 100*e)
			}
			continue
		}
		if e > 5e-4 {
			t.Errorf("%s: error %.3g %%: want within 0.05 %%", c.where, 100*e)
		}
	}
	noisy := runBattery(t, designs, batteryOpts{noise: []float64{0.05}, seeds: 10, declared: true, filter: regular10})
	var ratios []float64
	covered, total := 0, 0
	for _, c := range noisy {
		covered += c.covered
		total += len(c.errs)
		if math.IsNaN(c.limit) {
			continue
		}
		var ss float64
		for _, e := range c.errs {
			ss += e * e
		}
		ratios = append(ratios, math.Sqrt(ss/float64(len(c.errs)))/c.limit)
	}
	med := medianOf(ratios)
	cov := float64(covered) / float64(total)
	t.Logf("0.05 dB, 10 ppd: median rms error / information limit %.2f over %d corners; k = 2 coverage %.1f %% of %d", med, len(ratios), 100*cov, total)
	if med > 1.5 {
		t.Errorf("median rms error / information limit %.2f: want at most 1.5", med)
	}
	if cov < 0.88 {
		t.Errorf("k = 2 coverage %.1f %%: want at least 88 %%", 100*cov)
	}
}
