package batch

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"runtime"
	"sort"
	"sync"

	"rolloff/sweep/analysis"
	"rolloff/sweep/report"
	"rolloff/sweep/store"
)

// File names Write writes.
const (
	FileCSV     = "batch.csv"
	FileSummary = "batch-summary.pdf"
)

// ErrNoRuns is returned by Load for an empty list of runs.
var ErrNoRuns = errors.New("batch: no runs")

// Options are the choices of Load.
type Options struct {
	// Mask is checked against every unit; nil checks each against its
	// plan's mask, if any (a unit without one that could be analysed
	// counts as passing the yield).
	Mask *analysis.Mask
	// Reference is the run directory of a reference unit, "" for none:
	// each unit's corners and gain are compared with it.
	Reference string
	// Workers bounds the runs analysed at once; 0 means GOMAXPROCS.
	Workers int
}

// Verdicts of a unit.
const (
	Pass   = "pass"
	Fail   = "fail"
	NoMask = "no mask"
	Error  = "error" // the run could not be analysed
)

// Unit is one run of the batch.
type Unit struct {
	Dir string
	In  *report.Input
	// Verdict is Pass, Fail, NoMask or Error.
	Verdict string
	// LowDiffHz and HighDiffHz are the unit's corners less the
	// reference unit's; MaxDiffDB the largest difference of its gain
	// relative to its reference level from the reference unit's, over
	// the frequencies both cover (nil without a reference or a value).
	LowDiffHz, HighDiffHz, MaxDiffDB *float64
	// MaxDiffHz is where MaxDiffDB is.
	MaxDiffHz *float64
}

// Name returns the unit's serial number, or its run id when it has none.
func (u *Unit) Name() string {
	if u.In.Unit != "" {
		return u.In.Unit
	}
	return u.In.RunID
}

// Batch is a set of analysed units.
type Batch struct {
	Units     []*Unit
	Reference *Unit // nil without one
	Mask      *analysis.Mask
	// Passed counts units that pass (or, without a mask, could be
	// analysed); Yield is Passed/len(Units).
	Passed int
	Yield  float64
	// Figures are the statistics of each figure across the units.
	Figures []Figure
}

// Load reads the runs in dirs with their recorded figures (result.json;
// a run without one is analysed) and checks each against opts.Mask; the
// reference run is analysed, for its curve. A run directory that cannot
// be read is an error; a run that cannot be analysed is a unit with the
// Error verdict.
func Load(dirs []string, opts Options) (*Batch, error) {
	if len(dirs) == 0 {
		return nil, ErrNoRuns
	}
	b := &Batch{Units: make([]*Unit, len(dirs)), Mask: opts.Mask}
	workers := opts.Workers
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	errs := make([]error, len(dirs))
	var wg sync.WaitGroup
	next := make(chan int)
	for range min(workers, len(dirs)) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range next {
				b.Units[i], errs[i] = loadUnit(dirs[i], opts.Mask, report.LoadRecorded)
			}
		}()
	}
	for i := range dirs {
		next <- i
	}
	close(next)
	wg.Wait()
	if err := errors.Join(errs...); err != nil {
		return nil, err
	}
	if b.Mask == nil {
		b.Mask = commonPlanMask(b.Units)
	}
	if opts.Reference != "" {
		ref, err := loadUnit(opts.Reference, opts.Mask, report.Load)
		if err != nil {
			return nil, fmt.Errorf("batch: reference: %w", err)
		}
		if ref.In.Result == nil {
			return nil, fmt.Errorf("batch: reference %s: %s", opts.Reference, ref.In.AnalysisErr)
		}
		b.Reference = ref
		for _, u := range b.Units {
			compare(u, ref)
		}
	}
	for _, u := range b.Units {
		if u.Verdict == Pass || u.Verdict == NoMask {
			b.Passed++
		}
	}
	b.Yield = float64(b.Passed) / float64(len(b.Units))
	b.Figures = figures(b)
	return b, nil
}

func loadUnit(dir string, mask *analysis.Mask, load func(string, report.Options) (*report.Input, error)) (*Unit, error) {
	in, err := load(dir, report.Options{Mask: mask})
	if err != nil {
		return nil, err
	}
	u := &Unit{Dir: dir, In: in}
	switch r := in.Result; {
	case r == nil:
		u.Verdict = Error
	case r.Mask == nil:
		u.Verdict = NoMask
	case r.Mask.Pass:
		u.Verdict = Pass
	default:
		u.Verdict = Fail
	}
	return u, nil
}

// compare fills u's differences to the reference unit: the corners, and
// the largest difference of the gains, each relative to its own
// reference level, at u's used points within the reference's sweep.
func compare(u, ref *Unit) {
	r, rr := u.In.Result, ref.In.Result
	if r == nil {
		return
	}
	if r.LowHz != nil && rr.LowHz != nil {
		u.LowDiffHz = ptr(*r.LowHz - *rr.LowHz)
	}
	if r.HighHz != nil && rr.HighHz != nil {
		u.HighDiffHz = ptr(*r.HighHz - *rr.HighHz)
	}
	worst, at := -1.0, 0.0
	for _, s := range r.Samples {
		if s.Excluded {
			continue
		}
		g, ok := rr.GainAt(s.FreqHz)
		if !ok {
			continue
		}
		d := (s.GainDB - r.ReferenceGainDB) - (g - rr.ReferenceGainDB)
		if math.Abs(d) > math.Abs(worst) || worst == -1 {
			worst, at = d, s.FreqHz
		}
	}
	if worst != -1 {
		u.MaxDiffDB, u.MaxDiffHz = ptr(worst), ptr(at)
	}
}

func ptr(v float64) *float64 { return &v }

// sortedUnits returns the units ordered by serial number, then run id.
func (b *Batch) sortedUnits() []*Unit {
	us := append([]*Unit(nil), b.Units...)
	sort.SliceStable(us, func(i, j int) bool {
		if us[i].Name() != us[j].Name() {
			return us[i].Name() < us[j].Name()
		}
		return us[i].In.RunID < us[j].In.RunID
	})
	return us
}

// Write writes batch.csv and batch-summary.pdf into dir, creating it,
// each file replaced atomically.
func Write(dir string, b *Batch, paper report.Paper, software string) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return fmt.Errorf("batch: %w", err)
	}
	var csvBuf, pdfBuf bytes.Buffer
	if err := WriteCSV(&csvBuf, b); err != nil {
		return err
	}
	if err := WriteSummary(&pdfBuf, b, paper, software); err != nil {
		return err
	}
	if err := store.WriteFileAtomic(filepath.Join(dir, FileCSV), csvBuf.Bytes()); err != nil {
		return err
	}
	return store.WriteFileAtomic(filepath.Join(dir, FileSummary), pdfBuf.Bytes())
}

// commonPlanMask returns the mask every unit's plan gives, when they all
// give the same one (the units were then checked against it); else nil.
func commonPlanMask(units []*Unit) *analysis.Mask {
	var first *analysis.Mask
	for _, u := range units {
		if u.In.Plan == nil {
			return nil
		}
		m, err := u.In.Plan.LimitMask()
		if err != nil || m == nil {
			return nil
		}
		m.File = ""
		if first == nil {
			first = m
		} else if !reflect.DeepEqual(first, m) {
			return nil
		}
	}
	return first
}
