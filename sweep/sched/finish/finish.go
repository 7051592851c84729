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
	"path/filepath"

	"rolloff/sweep/analysis"
	"rolloff/sweep/export"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
	"rolloff/sweep/sched"
	"rolloff/sweep/store"
)

// Analyze returns the finish step of a run of plan p whose directory is
// dir ("": no exports): the analysis at the plan's corner level and
// reference frequency, normalised by the points of a through run when
// through is not empty, the exports, and the analysis as JSON for the
// run's result event. When the analysis fails the points are still
// exported, without figures, and the error is returned.
func Analyze(p *plan.Plan, dir string, through []point.Point) sched.FinishFunc {
	return func(ctx context.Context, pts []point.Point) ([]byte, error) {
		res, err := analysis.Analyze(pts, analysis.Options{LevelDB: p.Refine.LevelDB, RefHz: p.ReferenceHz, Through: through})
		if err != nil {
			if xerr := write(dir, pts, nil); xerr != nil {
				return nil, errors.Join(err, xerr)
			}
			return nil, err
		}
		if err := write(dir, pts, res); err != nil {
			return nil, err
		}
		return json.Marshal(res)
	}
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
