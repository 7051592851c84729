package report

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"runtime/debug"
	"sort"
	"time"

	toml "github.com/pelletier/go-toml/v2"

	"rolloff/driver"
	"rolloff/sweep/analysis"
	"rolloff/sweep/export"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
	"rolloff/sweep/store"
)

// FileReport is the report's file name in a run directory.
const FileReport = store.FileReport

// Input is everything a report shows.
type Input struct {
	RunID string
	// Design is what was measured (the plan's name); Unit its serial
	// number, Batch its batch, Operator who measured it.
	Design, Unit, Batch, Operator string
	// Notes is free text from the plan.
	Notes string
	// Measured is when the run was created.
	Measured time.Time
	// Software is the version of the program writing the report.
	Software string
	// Bench is the bench file's name field; Instruments the instruments
	// by role.
	Bench       string
	Instruments []Instrument
	// Plan is the run's plan (nil: the plan line says so).
	Plan *plan.Plan
	// Points are the measured points; Result their analysis (nil when
	// it failed, with AnalysisErr saying why).
	Points      []point.Point
	Result      *analysis.Result
	AnalysisErr string
	// Mask is the mask the result was checked against, for the plot (nil:
	// the one the analysis recorded, if any).
	Mask *analysis.Mask
}

// maskDrawn returns the mask to draw: in.Mask, else the analysis' own.
func (in *Input) maskDrawn() *analysis.Mask {
	if in.Mask != nil || in.Result == nil {
		return in.Mask
	}
	return in.Result.MaskUsed()
}

// Instrument is one role of the bench: its *IDN? identity (zero when it
// has none, e.g. an analog converter) and the profile file it was driven
// by.
type Instrument struct {
	Role     string
	Identity driver.Identity
	Profile  string
}

// Version returns the running program's module version ("(devel)" for a
// build from a work tree), with the VCS revision when the build recorded
// one.
func Version() string {
	v := "(devel)"
	bi, ok := debug.ReadBuildInfo()
	if !ok {
		return "rolloff " + v
	}
	if bi.Main.Version != "" {
		v = bi.Main.Version
	}
	for _, s := range bi.Settings {
		if s.Key == "vcs.revision" && len(s.Value) >= 12 {
			v += " " + s.Value[:12]
		}
	}
	return "rolloff " + v
}

// roleOrder is the order roles are listed in.
var roleOrder = map[string]int{"generator": 0, "voltmeter": 1, "dmm": 2, "converter": 3, "switch": 4}

// FromRun fills the parts of an Input that come from a run directory:
// meta.json (id, name, time, identities), the plan, bench.toml (profile
// names). Points and Result are left for the caller.
func FromRun(dir string) (*Input, error) {
	data, err := os.ReadFile(filepath.Join(dir, store.FileMeta))
	if err != nil {
		return nil, fmt.Errorf("report: %s: not a run directory: %w", dir, err)
	}
	var m store.Meta
	if err := json.Unmarshal(data, &m); err != nil {
		return nil, fmt.Errorf("report: %s: %w", filepath.Join(dir, store.FileMeta), err)
	}
	in := &Input{RunID: m.ID, Design: m.Name, Measured: m.Created, Software: Version(),
		Unit: m.Plan.Unit, Batch: m.Plan.Batch}
	pf := m.PlanFile
	if pf != store.FilePlanJSON {
		pf = store.FilePlanTOML
	}
	if p, err := plan.Load(filepath.Join(dir, pf)); err == nil {
		in.Plan = p
		if p.Name != "" {
			in.Design = p.Name
		}
		in.Unit, in.Batch, in.Operator, in.Notes = p.Unit, p.Batch, p.Operator, p.Notes
	}
	profiles := map[string]string{}
	if b, err := os.ReadFile(filepath.Join(dir, store.FileBench)); err == nil {
		var bench map[string]any
		if toml.Unmarshal(b, &bench) == nil {
			if s, ok := bench["name"].(string); ok {
				in.Bench = s
			}
			for k, v := range bench {
				if t, ok := v.(map[string]any); ok {
					if s, ok := t["profile"].(string); ok {
						profiles[k] = s
					}
				}
			}
		}
	} else if !errors.Is(err, fs.ErrNotExist) {
		return nil, fmt.Errorf("report: %w", err)
	}
	roles := map[string]bool{}
	for r := range m.Identities {
		roles[r] = true
	}
	for r := range profiles {
		roles[r] = true
	}
	for r := range roles {
		in.Instruments = append(in.Instruments, Instrument{Role: r, Identity: m.Identities[r], Profile: profiles[r]})
	}
	sort.Slice(in.Instruments, func(i, j int) bool {
		a, b := in.Instruments[i].Role, in.Instruments[j].Role
		oa, ka := roleOrder[a]
		ob, kb := roleOrder[b]
		if ka != kb {
			return ka
		}
		if oa != ob {
			return oa < ob
		}
		return a < b
	})
	return in, nil
}

// Options are the choices of Load beyond the run directory.
type Options struct {
	// Mask, when not nil, is checked against the response; nil checks
	// the plan's mask, if it has one.
	Mask *analysis.Mask
}

// Load reads a run directory and analyses its points as the run did
// (the plan's corner level and reference, normalised by the plan's
// through run when it sits beside this one in the store), with opts.Mask
// checked when given.
func Load(dir string, opts Options) (*Input, error) {
	in, err := FromRun(dir)
	if err != nil {
		return nil, err
	}
	pts, err := export.LoadRun(dir, export.ReadOptions{})
	if err != nil {
		return nil, fmt.Errorf("report: %w", err)
	}
	in.Points = pts
	in.Mask = maskFor(in, opts)
	ao := analysis.Options{Mask: in.Mask, Spec: export.RecordedSpec(dir), MonteCarloCheck: analysis.DefaultMonteCarloCheck}
	if p := in.Plan; p != nil {
		ao.LevelDB, ao.RefHz = p.Refine.LevelDB, p.ReferenceHz
	}
	if ao.Through, err = throughOf(dir, in.Plan); err != nil {
		return nil, err
	}
	res, err := analysis.Analyze(pts, ao)
	if err != nil {
		in.AnalysisErr = err.Error()
	} else {
		in.Result = res
	}
	return in, nil
}

// maskFor returns the mask to check: opts.Mask, else the plan's.
func maskFor(in *Input, opts Options) *analysis.Mask {
	if opts.Mask != nil || in.Plan == nil {
		return opts.Mask
	}
	m, _ := in.Plan.LimitMask()
	return m
}

// throughOf reads the points of the plan's through run, which sits beside
// the run in its store; nil when the plan names none.
func throughOf(dir string, p *plan.Plan) ([]point.Point, error) {
	if p == nil || p.Normalize.ThroughRun == "" {
		return nil, nil
	}
	id := p.Normalize.ThroughRun
	if store.ValidID(id) != nil {
		return nil, fmt.Errorf("report: %s: through run %q: not a run id", dir, id)
	}
	thr, err := export.LoadRun(filepath.Join(filepath.Dir(filepath.Clean(dir)), id), export.ReadOptions{})
	if err != nil {
		return nil, fmt.Errorf("report: %s: through run %q: %w", dir, id, err)
	}
	return thr, nil
}

// LoadRecorded is Load using the figures the run recorded in its
// result.json, when it has one for all its points, instead of analysing
// again: the samples are rebuilt from the points (normalised by the
// through run as the analysis does) and the mask is checked on them as
// Analyze checks it. The Result's interpolated curve is not available
// (GainAt reports false; the fitted model is); a run without a usable
// result.json is analysed by Load.
func LoadRecorded(dir string, opts Options) (*Input, error) {
	data, err := os.ReadFile(filepath.Join(dir, store.FileResult))
	if err != nil {
		return Load(dir, opts)
	}
	var res analysis.Result
	if json.Unmarshal(data, &res) != nil {
		return Load(dir, opts)
	}
	in, err := FromRun(dir)
	if err != nil {
		return nil, err
	}
	pts, err := export.LoadRun(dir, export.ReadOptions{})
	if err != nil {
		return nil, fmt.Errorf("report: %w", err)
	}
	if res.Points != len(pts) {
		return Load(dir, opts)
	}
	thr, err := throughOf(dir, in.Plan)
	if err != nil {
		return nil, err
	}
	samples, err := analysis.BuildSamples(pts, thr)
	if err != nil {
		return Load(dir, opts)
	}
	res.Samples = samples
	res.Mask = nil
	if in.Mask = maskFor(in, opts); in.Mask != nil {
		res.Mask = in.Mask.Check(samples, res.ReferenceGainDB)
	}
	in.Points, in.Result = pts, &res
	return in, nil
}

// WriteRunDir writes report.pdf into a run directory from its points and
// analysis (res nil when the analysis failed, analysisErr saying why),
// reading the rest from the directory. The file is replaced atomically.
func WriteRunDir(dir string, pts []point.Point, res *analysis.Result, analysisErr error, paper Paper) error {
	in, err := FromRun(dir)
	if err != nil {
		return err
	}
	in.Points, in.Result = pts, res
	if analysisErr != nil {
		in.AnalysisErr = analysisErr.Error()
	}
	var b bytes.Buffer
	if err := Write(&b, in, paper); err != nil {
		return err
	}
	return store.WriteFileAtomic(filepath.Join(dir, FileReport), b.Bytes())
}
