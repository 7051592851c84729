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

// planMask returns the plan's limit mask, nil when it has none. The plan
// was validated before the run started, so a mask that does not build is
// only logged.
func (s *sweeper) planMask() *analysis.Mask {
	m, err := s.plan.LimitMask()
	if err != nil {
		s.r.logEvent("mask: " + err.Error())
		return nil
	}
	return m
}
