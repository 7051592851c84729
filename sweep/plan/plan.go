// Package plan describes what a sweep measures: the frequencies, the
// generator level, the settle policy, the range strategy, the reference
// frequency and the refinement near the corners. Plans are read from TOML
// files or JSON request bodies with the same field names.
package plan

// Frequency spacings.
const (
	SpacingLog    = "log"    // logarithmic: points_per_decade or points
	SpacingLinear = "linear" // linear: points, or step_hz
	SpacingBands  = "bands"  // fractional-octave mid-band frequencies (IEC 61260-1, base 10)
	SpacingList   = "list"   // explicit list in frequencies_hz
)

// Range strategies.
const (
	RangeFixed    = "fixed"    // keep the range; flag under- and over-range points
	RangeOperator = "operator" // wait for the operator to select the range
	RangeRemote   = "remote"   // switch the converter's range through its switch instrument
	RangeLevel    = "level"    // move the generator amplitude to stay in the in-spec window
)

// Plan is one sweep's plan, as written in a plan file. Durations are
// physical seconds; the bench's time scale applies on the simulated bench.
type Plan struct {
	Name        string      `toml:"name" json:"name"`
	Frequencies Frequencies `toml:"frequencies" json:"frequencies"`
	Level       Level       `toml:"level" json:"level"`
	Settle      Settle      `toml:"settle" json:"settle"`
	Ranging     Ranging     `toml:"ranging" json:"ranging"`
	// ReferenceHz is the frequency the gain is referred to (default 1000).
	ReferenceHz float64   `toml:"reference_hz" json:"reference_hz"`
	Refine      Refine    `toml:"refine" json:"refine"`
	Normalize   Normalize `toml:"normalize" json:"normalize"`
	Drift       Drift     `toml:"drift" json:"drift"`
	// Unit, Batch, Operator and Notes identify what is measured, for the
	// report and the batch summary (see unit.go).
	Unit     string `toml:"unit" json:"unit"`
	Batch    string `toml:"batch" json:"batch"`
	Operator string `toml:"operator" json:"operator"`
	Notes    string `toml:"notes" json:"notes"`
	// Mask, when given, is the limit mask the response is checked
	// against when the run finishes (see unit.go).
	Mask Mask `toml:"mask" json:"mask"`

	// src remembers the file name and the line of every key of the
	// document the plan was decoded from, so that Validate can name them.
	// It is nil for a plan built in Go.
	src *source
}

// Frequencies says which frequencies to measure.
type Frequencies struct {
	Spacing         string  `toml:"spacing" json:"spacing"`
	StartHz         float64 `toml:"start_hz" json:"start_hz"`
	StopHz          float64 `toml:"stop_hz" json:"stop_hz"`
	PointsPerDecade int     `toml:"points_per_decade" json:"points_per_decade"`
	Points          int     `toml:"points" json:"points"`
	StepHz          float64 `toml:"step_hz" json:"step_hz"`
	// BandsPerOctave is b in a 1/b-octave band plan: 1, 2, 3, 6, 12, 24.
	BandsPerOctave int       `toml:"bands_per_octave" json:"bands_per_octave"`
	ListHz         []float64 `toml:"frequencies_hz" json:"frequencies_hz"`
	// Descending measures from stop to start.
	Descending bool `toml:"descending" json:"descending"`
}

// Level is the generator amplitude and its strategy.
type Level struct {
	Vrms float64 `toml:"vrms" json:"vrms"`
	// MinVrms and MaxVrms bound the "level" range strategy; MaxVrms is
	// further capped by the bench's amplitude limit.
	MinVrms float64 `toml:"min_vrms" json:"min_vrms"`
	MaxVrms float64 `toml:"max_vrms" json:"max_vrms"`
}

// Settle is the settle policy per point.
type Settle struct {
	// MinDwellS is the least time to wait after a change, on top of the
	// converter-model dwell.
	MinDwellS float64 `toml:"min_dwell_s" json:"min_dwell_s"`
	// Tolerance is the relative agreement required between consecutive
	// readings (e.g. 0.001 for 0.1 %).
	Tolerance float64 `toml:"tolerance" json:"tolerance"`
	// Readings is how many consecutive readings must agree.
	Readings int `toml:"readings" json:"readings"`
	// TimeoutS is the most time spent on one point before it is recorded
	// and flagged unsettled.
	TimeoutS float64 `toml:"timeout_s" json:"timeout_s"`
	// Predict, unless false, lets a point end before the converter has
	// settled, on the settled value its approach predicts (a first-order
	// approach fitted to the readings, with its uncertainty inside the
	// tolerance and one more reading agreeing with it); where the
	// approach is not one exponential the point waits as without it and
	// its record says why. Nil means off until the prediction is proven
	// on the held-out benches.
	Predict *bool `toml:"predict" json:"predict,omitempty"`
}

// Predicting reports whether the settle policy predicts settled values
// (see Settle.Predict).
func (s Settle) Predicting() bool { return s.Predict != nil && *s.Predict }

// Ranging is the converter range strategy.
type Ranging struct {
	Strategy string `toml:"strategy" json:"strategy"`
	// Start is the range to begin on, by name ("100 mV") or empty for the
	// bench's current range.
	Start string `toml:"start" json:"start"`
}

// Drift re-measures the reference frequency to check the bench for
// drift: once at the end of the run when End is "on" (what Defaults
// sets, so a plan file has it unless it says "off"), and after every
// EveryPoints points of the plan when EveryPoints is above zero. The
// re-measurements are stored with the points (flagged drift-check) and
// compared with the sweep's gain there. A Plan built in Go without
// Defaults has End "" and checks only every EveryPoints points.
type Drift struct {
	End         string `toml:"end" json:"end"`                   // "on" (the default) or "off"
	EveryPoints int    `toml:"every_points" json:"every_points"` // 0: only at the end
}

// Drift check settings.
const (
	DriftOn  = "on"
	DriftOff = "off"
)

// DriftChecks returns how many drift checks a plan of n points makes.
func (d Drift) DriftChecks(n int) int {
	k := 0
	if d.EveryPoints > 0 && n > 0 {
		k = (n - 1) / d.EveryPoints
	}
	if d.End == DriftOn {
		k++
	}
	return k
}

// Refine adds points near the corners, bisected in log f, until the
// crossing of the level is pinned to ResolutionRel.
type Refine struct {
	Enabled       bool    `toml:"enabled" json:"enabled"`
	LevelDB       float64 `toml:"level_db" json:"level_db"`     // default -3.0103
	ResolutionRel float64 `toml:"resolution" json:"resolution"` // e.g. 0.002 for 0.2 %
	MaxPoints     int     `toml:"max_points" json:"max_points"`
}

// Normalize names a reference ("through") run measured with the DUT
// bypassed, by which the response is divided.
type Normalize struct {
	ThroughRun string `toml:"through_run" json:"through_run"`
}
