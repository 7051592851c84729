package sched

import (
	"rolloff/sweep/analysis"
	"rolloff/sweep/export"
	"rolloff/sweep/point"
)

// export writes the run's exports (response.csv, result.json and the
// plots) into its directory, when the store has one.
func (s *sweeper) export(pts []point.Point, res *analysis.Result) error {
	d, ok := s.r.rec.(dirRecorder)
	if !ok || d.Dir() == "" {
		return nil
	}
	w, ok := d.(export.FileWriter)
	if !ok {
		return nil
	}
	return export.WriteAll(w, pts, res)
}
