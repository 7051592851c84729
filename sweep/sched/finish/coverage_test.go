package finish_test

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"regexp"
	"sort"
	"strconv"
	"sync"
	"testing"
	"testing/fstest"

	"github.com/rs/zerolog"

	"rolloff/configs"
	"rolloff/driver/bench"
	"rolloff/driver/profile"
	"rolloff/sweep/analysis"
	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
	"rolloff/sweep/sched"
	"rolloff/sweep/sched/finish"
	"rolloff/sweep/sched/onbench"
	"rolloff/sweep/store"
)

// coverageRun is one seeded sweep of the demo bench with its systematic
// errors on: the reported corners with their expanded uncertainty and the
// simulated DUT's analytic corners (the truth).
type coverageRun struct {
	seed                 uint64
	low, lowU, lowTrue   float64
	high, highU, highTru float64
	err                  error
	points               []point.Point
	spec                 *analysis.Spec
	plan                 *plan.Plan
	result               *analysis.Result // as result.json has it
}

// imperfectBenchWith returns the demo simulated bench
// (configs/sim-bench.toml with its profiles) with its systematic errors
// on, drawn with seed, and simLines added to its [sim] table.
func imperfectBenchWith(seed uint64, simLines string) (*profile.BenchFile, error) {
	fsys := fstest.MapFS{}
	for _, n := range configs.Names() {
		data, err := configs.ReadFile(n)
		if err != nil {
			return nil, err
		}
		fsys[n] = &fstest.MapFile{Data: data}
	}
	raw := fsys[configs.SimBench].Data
	seedRe := regexp.MustCompile(`(?m)^seed = .*$`)
	if !seedRe.Match(raw) {
		return nil, errors.New("sim-bench.toml: no seed line")
	}
	raw = seedRe.ReplaceAll(raw, []byte(fmt.Sprintf("seed = %d\nsystematic = true\n%s", seed, simLines)))
	fsys[configs.SimBench] = &fstest.MapFile{Data: raw}
	return profile.LoadBenchFS(fsys, configs.SimBench)
}

// sweepSeed measures the demo plan on the demo simulated bench drawn with
// seed (systematic errors on), time-scaled by scale, and returns its
// corners.
func sweepSeed(t testing.TB, seed uint64, scale float64, dir string) coverageRun {
	return sweepWith(t, seed, scale, dir, "", nil)
}

// sweepWith is sweepSeed with extra lines in the bench file's [sim]
// table and the demo plan edited by planEdit (when not nil).
func sweepWith(t testing.TB, seed uint64, scale float64, dir, simLines string, planEdit func([]byte) []byte) coverageRun {
	out := coverageRun{seed: seed}
	cfg, err := imperfectBenchWith(seed, simLines)
	if err != nil {
		out.err = err
		return out
	}
	cfg.TimeScale = scale
	data, err := configs.ReadFile("demo-plan.toml")
	if err != nil {
		out.err = err
		return out
	}
	if planEdit != nil {
		data = planEdit(append([]byte(nil), data...))
	}
	p, err := plan.DecodeTOML("demo-plan.toml", data)
	if err != nil {
		out.err = err
		return out
	}
	ctx := context.Background()
	b, err := bench.Open(ctx, cfg, zerolog.Nop())
	if err != nil {
		out.err = err
		return out
	}
	defer b.Close()
	if !b.Sim.Systematic().On {
		out.err = errors.New("the simulated bench has its systematic errors off")
		return out
	}
	st, err := store.Open(dir)
	if err != nil {
		out.err = err
		return out
	}
	run, err := st.Create(store.CreateOpts{PlanFile: "demo-plan.toml", PlanData: data, Plan: p, BenchFile: cfg.Raw})
	if err != nil {
		out.err = err
		return out
	}
	defer run.Close()
	opts := sched.Opts{Finish: finish.Analyze(p, run.Dir(), nil, finish.SpecOf(cfg, p))}
	if i := b.Sim.ConverterRange(); i >= 0 {
		opts.RangeKnown, opts.CurrentRange = true, i
	}
	opts.Operator = func(ctx context.Context, pr event.Prompt) (int, error) {
		return pr.RangeIndex, b.Sim.SelectRange(pr.RangeIndex)
	}
	r := sched.Start(ctx, onbench.Instruments(b, zerolog.Nop()), p, run, opts)
	if err := r.Wait(); err != nil {
		out.err = err
		return out
	}
	out.points, _ = run.Points()
	out.spec, out.plan = finish.SpecOf(cfg, p), p
	res, err := os.ReadFile(run.Dir() + "/result.json")
	if err != nil {
		out.err = err
		return out
	}
	var v analysis.Result
	if err := json.Unmarshal(res, &v); err != nil {
		out.err = err
		return out
	}
	out.lowTrue, out.highTru = b.Sim.DUTCorners(p.Refine.LevelDB)
	val := func(x *float64) float64 {
		if x == nil {
			return math.NaN()
		}
		return *x
	}
	out.low, out.lowU, out.high, out.highU = val(v.LowHz), val(v.LowUHz), val(v.HighHz), val(v.HighUHz)
	out.result = &v
	return out
}

// coverage runs n seeded sweeps on workers goroutines.
func coverage(t *testing.T, n, workers int, scale float64) []coverageRun {
	runs := make([]coverageRun, n)
	dirs := make([]string, n)
	for i := range dirs {
		dirs[i] = t.TempDir()
	}
	var wg sync.WaitGroup
	next := make(chan int)
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range next {
				runs[i] = sweepSeed(t, uint64(1000+i), scale, dirs[i])
			}
		}()
	}
	for i := 0; i < n; i++ {
		next <- i
	}
	close(next)
	wg.Wait()
	return runs
}

// TestCoverageQuick runs a handful of seeded sweeps of the imperfect demo
// bench: every corner comes with a finite, positive expanded uncertainty.
// (The coverage proof itself is TestCoverage, run by make coverage.)
func TestCoverageQuick(t *testing.T) {
	if testing.Short() {
		t.Skip("sweeps the simulated bench")
	}
	for _, r := range coverage(t, 3, 1, 1000) {
		if r.err != nil {
			t.Fatalf("seed %d: %v", r.seed, r.err)
		}
		for _, c := range [][3]float64{{r.low, r.lowU, r.lowTrue}, {r.high, r.highU, r.highTru}} {
			if !(c[0] > 0) || !(c[1] > 0) || math.IsInf(c[1], 0) || !(c[1] < c[0]) {
				t.Errorf("seed %d: corner %g ± %g Hz: want a finite positive uncertainty below the corner", r.seed, c[0], c[1])
			}
		}
		t.Logf("seed %d: low %.5g ± %.2g (true %.5g), high %.6g ± %.2g (true %.6g)", r.seed, r.low, r.lowU, r.lowTrue, r.high, r.highU, r.highTru)
	}
}

// TestCoverage is the proof that the reported k = 2 intervals cover the
// truth about 95 % of the time (JCGM 100:2008 §6.2): over
// ROLLOFF_COVERAGE_RUNS (at least 200) seeded sweeps of the demo bench
// with its systematic errors drawn per seed from the instruments'
// specifications, the fraction of runs whose analytic corner lies within
// the reported interval must be 95 % ± 3 % for each corner. Run by make
// coverage; skipped otherwise.
func TestCoverage(t *testing.T) {
	n, _ := strconv.Atoi(os.Getenv("ROLLOFF_COVERAGE_RUNS"))
	if n == 0 {
		t.Skip("set ROLLOFF_COVERAGE_RUNS (make coverage)")
	}
	if n < 200 {
		t.Fatalf("ROLLOFF_COVERAGE_RUNS=%d: want at least 200", n)
	}
	runs := coverage(t, n, 4, 2000)
	var failed int
	for _, side := range []string{"low", "high"} {
		in, total := 0, 0
		var rel, norm []float64
		for _, r := range runs {
			if r.err != nil {
				failed++
				continue
			}
			f, u, truth := r.low, r.lowU, r.lowTrue
			if side == "high" {
				f, u, truth = r.high, r.highU, r.highTru
			}
			total++
			if math.Abs(f-truth) <= u {
				in++
			}
			rel = append(rel, u/f)
			norm = append(norm, math.Abs(f-truth)/u)
			if math.Abs(f-truth) > 1.5*u {
				how := "interpolation"
				if r.result != nil && r.result.Model != nil && r.result.Model.Accepted {
					how = "model"
				}
				t.Logf("%s corner, seed %d: %.6g Hz ± %.3g Hz (%s), truth %.6g Hz: off by %.2f U", side, r.seed, f, u, how, truth, math.Abs(f-truth)/u)
			}
		}
		sort.Float64s(norm)
		if len(norm) > 0 {
			q := func(p float64) float64 { return norm[min(len(norm)-1, int(p*float64(len(norm))))] }
			t.Logf("%s corner: |error|/U quantiles 50 %% %.3f, 90 %% %.3f, 95 %% %.3f, max %.3f (an honest k = 2 interval has its 95 %% quantile near 1)",
				side, q(0.5), q(0.9), q(0.95), norm[len(norm)-1])
		}
		sort.Float64s(rel)
		frac := float64(in) / float64(total)
		med := math.NaN()
		if len(rel) > 0 {
			med = rel[len(rel)/2]
		}
		t.Logf("%s corner: %d of %d runs cover the truth (%.1f %%), median relative U %.3g %%", side, in, total, 100*frac, 100*med)
		if math.Abs(frac-0.95) > 0.03 {
			t.Errorf("%s corner: coverage %.1f %%: want 95 %% ± 3 %%", side, 100*frac)
		}
	}
	if failed > 0 {
		t.Errorf("%d sweeps failed", failed)
	}
}

// TestMonteCarloDemo runs the JCGM 101:2008 §8 validation on a sweep of
// the imperfect demo bench: the GUM framework's y ± U against the Monte
// Carlo 95 % interval, δ from two significant digits of u(y) (§8.2). The
// outcome is logged. The GUM framework's k = 2 is not expected to pass
// it where one rectangular input dominates (the 95 % quantile of a
// rectangular distribution is 0.95·a against 2·a/√3, JCGM 101:2008 §9.2),
// nor where the corner lies among densely refined points whose noise
// bends the interpolant within the uncertainty. Where it fails the run
// reports the Monte Carlo interval (§8.4); the test asserts that the
// reported interval encloses an independent Monte Carlo 95 % interval
// (other seed, 100 000 trials; 3 % of the half-width allowed for the
// draws) and is within a factor 0.5 to 1.5 of its half-width. (The
// budget's own U was half the Monte Carlo half-width in some interpolated
// sweeps: logged.)
func TestMonteCarloDemo(t *testing.T) {
	if testing.Short() {
		t.Skip("sweeps the simulated bench")
	}
	r := coverageRun{err: errors.New("no sweep")}
	for try := 0; try < 3 && r.err != nil; try++ {
		r = coverage(t, 1, 1, 1000)[0]
	}
	if r.err != nil {
		t.Fatal(r.err)
	}
	res, err := analysis.Analyze(r.points, analysis.Options{LevelDB: r.plan.Refine.LevelDB, RefHz: r.plan.ReferenceHz, Spec: r.spec, MonteCarloCheck: analysis.DefaultMonteCarloCheck})
	if err != nil {
		t.Fatal(err)
	}
	if res.MonteCarlo == nil {
		t.Fatal("Analyze with MonteCarloCheck left no Monte Carlo outcome")
	}
	checked := []*analysis.MonteCarloInterval{res.MonteCarlo.Low, res.MonteCarlo.High}
	mc, err := res.RunMonteCarlo(100000, 3)
	if err != nil {
		t.Fatal(err)
	}
	for i, side := range []struct {
		name string
		y, U *float64
		iv   *analysis.MonteCarloInterval
	}{{"low", res.LowHz, res.LowUHz, mc.Low}, {"high", res.HighHz, res.HighUHz, mc.High}} {
		if side.y == nil || side.U == nil || side.iv == nil || checked[i] == nil || checked[i].GUM == nil {
			t.Fatalf("%s corner: no corner, interval or check", side.name)
		}
		ck := checked[i].GUM
		v := analysis.Validate(*side.y, ck.UHz, analysis.CoverageFactor, *side.iv, 2)
		t.Logf("demo %s corner %.6g Hz: GUM ±%.3g Hz, Monte Carlo [%.6g, %.6g]; d_low %.3g, d_high %.3g, δ %.3g: validated %v; reported ±%.3g Hz (adopted %v)",
			side.name, *side.y, ck.UHz, side.iv.Low95Hz, side.iv.High95Hz, v.DLowHz, v.DHighHz, v.DeltaHz, v.Pass, *side.U, ck.Adopted)
		half := (side.iv.High95Hz - side.iv.Low95Hz) / 2
		t.Logf("%s: Monte Carlo half-width / budget's U = %.2f", side.name, half/ck.UHz)
		if !(half >= 0.5**side.U && half <= 1.5**side.U) {
			t.Errorf("%s: Monte Carlo half-width %g Hz, reported U %g Hz: want 0.5 to 1.5 times U", side.name, half, *side.U)
		}
		slack := 0.03 * half
		if side.iv.Low95Hz < *side.y-*side.U-slack || side.iv.High95Hz > *side.y+*side.U+slack {
			t.Errorf("%s: Monte Carlo interval [%g, %g] Hz is not inside the reported %g ± %g Hz", side.name, side.iv.Low95Hz, side.iv.High95Hz, *side.y, *side.U)
		}
	}
}
