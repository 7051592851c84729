// Package finish is the usual end of a measured run: the analysis of its
// points (corners, uncertainty, slopes, masks) and the exports
// (response.csv, result.json and the plots) into its directory. A caller
// of the scheduler passes it as sched.Opts.Finish, so that the scheduler
// itself links neither the analysis nor the renderers.
package finish

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"path/filepath"

	"rolloff/sweep/analysis"
	"rolloff/sweep/export"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
	"rolloff/sweep/report"
	"rolloff/sweep/sched"
	"rolloff/sweep/store"
)

// Analyze returns the finish step of a run of plan p whose directory is
// dir ("": no files): the analysis at the plan's corner level and
// reference frequency, against the plan's limit mask, normalised by the
// points of a through run when through is not empty; the exports; the
// one-page report (report.pdf); and the analysis as JSON for the run's
// result event. spec is the measuring chain's specification for the
// corner budgets and the model test (see SpecOf; nil: the points' own
// figures). When the analysis fails the points are still exported,
// without figures, and the report says why. The measured points are
// already safe, so a report that cannot be written is returned as an
// error beside the result, for the scheduler to log.
func Analyze(p *plan.Plan, dir string, through []point.Point, spec *analysis.Spec) sched.FinishFunc {
	return func(ctx context.Context, pts []point.Point) ([]byte, error) {
		opts := analysis.Options{LevelDB: p.Refine.LevelDB, RefHz: p.ReferenceHz, Through: through, Spec: spec, MonteCarloCheck: analysis.DefaultMonteCarloCheck}
		var maskErr error
		if opts.Mask, maskErr = p.LimitMask(); maskErr != nil {
			// The plan was validated before the run started.
			maskErr = fmt.Errorf("mask: %w", maskErr)
		}
		res, err := analysis.Analyze(pts, opts)
		if err != nil {
			xerr := write(dir, pts, nil)
			return nil, errors.Join(err, xerr, writeReport(dir, pts, nil, err), maskErr)
		}
		if err := write(dir, pts, res); err != nil {
			return nil, err
		}
		js, err := json.Marshal(res)
		if err != nil {
			return nil, err
		}
		return js, errors.Join(writeReport(dir, pts, res, nil), maskErr)
	}
}

// writeReport writes report.pdf into dir (none when dir is "").
func writeReport(dir string, pts []point.Point, res *analysis.Result, analysisErr error) error {
	if dir == "" {
		return nil
	}
	if err := report.WriteRunDir(dir, pts, res, analysisErr, report.A4); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	return nil
}

func write(dir string, pts []point.Point, res *analysis.Result) error {
	if dir == "" {
		return nil
	}
	return export.WriteAll(runDir(dir), pts, res)
}

// runDir stores each exported file atomically in a run directory, with
// the store's temporary names, which its recovery cleans after a crash.
type runDir string

func (d runDir) WriteFileAtomic(name string, data []byte) error {
	return store.WriteFileAtomic(filepath.Join(string(d), name), data)
}
