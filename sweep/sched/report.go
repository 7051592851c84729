package sched

import (
	"rolloff/sweep/analysis"
	"rolloff/sweep/point"
	"rolloff/sweep/report"
)

// writeReport writes the run's report.pdf beside its exports, when the
// store has a directory. The measured points are already safe, so a
// report that cannot be written is logged, not fatal.
func (s *sweeper) writeReport(pts []point.Point, res *analysis.Result, analysisErr error) {
	d, ok := s.r.rec.(dirRecorder)
	if !ok || d.Dir() == "" {
		return
	}
	if err := report.WriteRunDir(d.Dir(), pts, res, analysisErr, report.A4); err != nil {
		s.r.logEvent("report: " + err.Error())
	}
}
