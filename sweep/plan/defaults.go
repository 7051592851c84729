package plan

import "math"

// Limits and defaults of a plan.
const (
	// MaxPoints is the most points one run may measure, the plan's
	// frequencies plus the corner refinement's.
	MaxPoints = 100_000

	DefaultReferenceHz     = 1000.0
	DefaultPointsPerDecade = 10
	DefaultBandsPerOctave  = 3
	DefaultTolerance       = 0.002 // 0.2 % agreement between readings
	DefaultReadings        = 2
	DefaultTimeoutS        = 60.0 // per point; a 10 Hz point on a slow converter takes tens of seconds
	DefaultResolution      = 0.002
	DefaultRefinePoints    = 24
	// DefaultLevelMinRatio sets level.min_vrms to level.vrms divided by it
	// for the "level" strategy.
	DefaultLevelMinRatio = 100.0

	// HalfPowerDB is 10·log10(1/2), the "−3 dB" level of a corner.
	HalfPowerDB = -3.010299956639812
)

// Defaults fills what the plan leaves unset:
//
//   - frequencies.spacing: "list" when frequencies_hz is given, else "log";
//   - frequencies.points_per_decade: 10 on a log plan that gives neither it
//     nor points; frequencies.bands_per_octave: 3 on a bands plan;
//   - reference_hz: 1000;
//   - settle.tolerance 0.002, settle.readings 2, settle.timeout_s 60;
//   - ranging.strategy: "fixed";
//   - level.max_vrms = level.vrms and level.min_vrms = level.vrms/100 for
//     the "level" strategy (the level is never raised above what the plan
//     asks unless max_vrms says so);
//   - refine.level_db −3.0103 (half power), refine.resolution 0.002,
//     refine.max_points 24;
//   - drift.end "on" (the reference re-measured at the end).
//
// It leaves level.vrms alone: there is no default amplitude. Defaults is
// idempotent; the decoders call it.
func (p *Plan) Defaults() {
	f := &p.Frequencies
	if f.Spacing == "" {
		if len(f.ListHz) > 0 {
			f.Spacing = SpacingList
		} else {
			f.Spacing = SpacingLog
		}
	}
	switch f.Spacing {
	case SpacingLog:
		if f.PointsPerDecade == 0 && f.Points == 0 {
			f.PointsPerDecade = DefaultPointsPerDecade
		}
	case SpacingBands:
		if f.BandsPerOctave == 0 {
			f.BandsPerOctave = DefaultBandsPerOctave
		}
	}
	if p.ReferenceHz == 0 {
		p.ReferenceHz = DefaultReferenceHz
	}
	s := &p.Settle
	if s.Tolerance == 0 {
		s.Tolerance = DefaultTolerance
	}
	if s.Readings == 0 {
		s.Readings = DefaultReadings
	}
	if s.TimeoutS == 0 {
		s.TimeoutS = DefaultTimeoutS
	}
	if p.Ranging.Strategy == "" {
		p.Ranging.Strategy = RangeFixed
	}
	if p.Ranging.Strategy == RangeLevel && p.Level.Vrms > 0 && !math.IsInf(p.Level.Vrms, 0) {
		if p.Level.MaxVrms == 0 {
			p.Level.MaxVrms = p.Level.Vrms
		}
		if p.Level.MinVrms == 0 {
			p.Level.MinVrms = p.Level.Vrms / DefaultLevelMinRatio
		}
	}
	if p.Drift.End == "" {
		p.Drift.End = DriftOn
	}
	r := &p.Refine
	if r.LevelDB == 0 {
		r.LevelDB = HalfPowerDB
	}
	if r.ResolutionRel == 0 {
		r.ResolutionRel = DefaultResolution
	}
	if r.MaxPoints == 0 {
		r.MaxPoints = DefaultRefinePoints
	}
}
