package analysis

// Result is the outcome of Analyze. Its JSON form is result.json; absent
// values (a corner outside the sweep, a slope with no points beyond the
// corner) are JSON null.
type Result struct {
	// ReferenceGainDB is the reference level, dB; ReferenceUDB its
	// standard uncertainty (k = 1).
	ReferenceGainDB float64 `json:"reference_gain_db"`
	ReferenceUDB    float64 `json:"reference_u_db"`
	ReferenceMode   RefMode `json:"reference_mode"`
	// ReferenceHz is the reference frequency (RefFrequency), the frequency
	// of the maximum (RefMax) or the band's geometric centre (RefBand).
	ReferenceHz     float64    `json:"reference_hz"`
	ReferenceBandHz []float64  `json:"reference_band_hz,omitempty"`
	LevelDB         float64    `json:"level_db"`
	ThresholdDB     float64    `json:"threshold_db"` // reference + level: the gain at a corner
	SweepHz         [2]float64 `json:"sweep_hz"`     // lowest and highest included frequency

	// LowHz and HighHz are the corners bounding the passband around the
	// reference, null when the response does not cross the level on that
	// side within the sweep; LowBeyondHz/HighBeyondHz then give the bound
	// (the corner, if any, is below/above it).
	LowHz   *float64 `json:"low_hz"`
	HighHz  *float64 `json:"high_hz"`
	LowUHz  *float64 `json:"low_u_hz"`  // expanded uncertainty of LowHz, k = CoverageFactor
	HighUHz *float64 `json:"high_u_hz"` // expanded uncertainty of HighHz
	// LowBudget and HighBudget are the corners' uncertainty budgets
	// (JCGM 100:2008 §7.2.5): LowUHz and HighUHz are CoverageFactor times
	// the root-sum-square of their contributions.
	// Spec is the specification the budgets used (null: the points'
	// own figures).
	Spec         *Spec         `json:"spec,omitempty"`
	LowBudget    []BudgetEntry `json:"low_budget,omitempty"`
	HighBudget   []BudgetEntry `json:"high_budget,omitempty"`
	LowBeyondHz  *float64      `json:"low_beyond_hz"`
	HighBeyondHz *float64      `json:"high_beyond_hz"`
	// HighUnderRangeFromHz, when the high corner is not found, is the
	// lowest frequency above the sweep's included points left out as
	// under range: the sweep went on, but the range could not read the
	// response there (LowUnderRangeHz: the highest such below them).
	HighUnderRangeFromHz *float64 `json:"high_under_range_from_hz,omitempty"`
	LowUnderRangeHz      *float64 `json:"low_under_range_hz,omitempty"`
	// DCCoupled is set when there is no lower corner and the response is
	// flat down to the lowest frequency swept: the accepted model has no
	// high-pass section or, without an accepted model, the slope over the
	// first half decade is within ±1 dB/decade.
	DCCoupled      bool    `json:"dc_coupled"`
	CoverageFactor float64 `json:"coverage_factor"`
	// CornerSource says which estimator the corners and curve figures come
	// from: "model" or "interpolation".
	CornerSource string `json:"corner_source"`

	BandwidthHz *float64 `json:"bandwidth_hz"` // high − low (high alone when DC-coupled)
	CentreHz    *float64 `json:"centre_hz"`    // √(low·high)
	// FlatnessDB is max − min of the response between the corners (or the
	// sweep's ends where a corner is absent), over FlatnessSpanHz.
	FlatnessDB     *float64  `json:"flatness_db"`
	FlatnessSpanHz []float64 `json:"flatness_span_hz"`
	// PeakingDB is the largest excursion above the reference anywhere in
	// the sweep (0 or more for a reference on the curve), at PeakingHz.
	PeakingDB float64 `json:"peaking_db"`
	PeakingHz float64 `json:"peaking_hz"`

	SlopeLow             *Slope   `json:"slope_low"`
	SlopeHigh            *Slope   `json:"slope_high"`
	SlopeDBPerDecadeLow  *float64 `json:"slope_db_per_decade_low"`
	SlopeDBPerDecadeHigh *float64 `json:"slope_db_per_decade_high"`

	// Crossings lists every crossing of the level, lowest first.
	Crossings []Crossing `json:"crossings"`
	// Estimators holds both estimators' corners; Agreement compares them.
	Estimators Estimators `json:"estimators"`
	Agreement  Agreement  `json:"agreement"`
	// Model is the fitted cascade (null when no fit was made).
	Model *ModelResult `json:"model"`

	Points   int             `json:"points"`   // points given
	Included int             `json:"included"` // points used
	Excluded []ExcludedPoint `json:"excluded"` // points left out, and why
	Through  bool            `json:"through"`  // normalised by a through run
	Mask     *MaskVerdict    `json:"mask,omitempty"`
	// MonteCarlo holds the Monte Carlo intervals when they were asked for
	// (Result.RunMonteCarlo).
	MonteCarlo *MonteCarlo `json:"monte_carlo,omitempty"`
	// Drift is the drift check (null when the run re-measured no
	// reference).
	Drift *Drift `json:"drift"`

	// Samples is the response as analysed (all points, sorted by
	// frequency, excluded ones marked); not part of result.json.
	Samples []Sample `json:"-"`

	chosen curve
	budget *budgetInputs
	interp *Interpolant
	mask   *Mask
}

// Slope is a roll-off slope measured beyond a corner.
type Slope struct {
	DBPerDecade float64 `json:"db_per_decade"`
	DBPerOctave float64 `json:"db_per_octave"`
	// Order is the implied filter order, |slope|/20 dB per decade per pole,
	// rounded.
	Order int `json:"order"`
	// SpanHz is the frequency span of the points fitted, Points their
	// count; Method says how the span was chosen.
	SpanHz [2]float64 `json:"span_hz"`
	Points int        `json:"points"`
	Method string     `json:"method"`
}

// Estimate is one estimator's view of the corners.
type Estimate struct {
	ReferenceGainDB float64    `json:"reference_gain_db"`
	LowHz           *float64   `json:"low_hz"`
	HighHz          *float64   `json:"high_hz"`
	LowUHz          *float64   `json:"low_u_hz"`
	HighUHz         *float64   `json:"high_u_hz"`
	Crossings       []Crossing `json:"crossings"`
}

// Estimators holds the interpolation and model estimates (Model null when
// no model was fitted).
type Estimators struct {
	Interpolation Estimate  `json:"interpolation"`
	Model         *Estimate `json:"model"`
}

// Agreement compares the two estimators: relative differences
// (model − interpolation)/interpolation, and whether each difference lies
// within the reported expanded uncertainty.
type Agreement struct {
	LowRel     *float64 `json:"low_rel"`
	HighRel    *float64 `json:"high_rel"`
	WithinU    bool     `json:"within_uncertainty"`
	Comparable bool     `json:"comparable"` // both estimators found the same corners
	Note       string   `json:"note"`
}

// ModelResult is the fitted model and the test of its residual.
type ModelResult struct {
	Model
	Description string `json:"description"`
	// ResidualRMSDB is the rms residual over the fitted points, dB;
	// NoiseDB the rms of the standard deviations assumed for them.
	ResidualRMSDB float64 `json:"residual_rms_db"`
	NoiseDB       float64 `json:"noise_db"`
	// ReducedChi is √(χ²/n) with the assumed standard deviations; Lag1 the
	// lag-1 autocorrelation of the normalised residuals in frequency
	// order (structure left in the residual shows as Lag1 near 1).
	ReducedChi float64 `json:"reduced_chi"`
	// NoiseDeclared says whether the points carried their own Type A
	// uncertainty; otherwise NoiseDB is estimated from the data by the
	// difference-based estimator (NoiseDiffDB). NoiseFitDB is the residual
	// of the fitted model with its degrees of freedom, √(Σr²/(n−k)): the
	// cross-check, and the noise the corner uncertainty uses when the data
	// declare none.
	NoiseDeclared bool    `json:"noise_declared"`
	NoiseDiffDB   float64 `json:"noise_diff_db"`
	NoiseFitDB    float64 `json:"noise_fit_db"`
	// Sections lists the model section by section, in words.
	Sections  []string `json:"sections_described"`
	Lag1      float64  `json:"lag1"`
	BIC       float64  `json:"bic"`
	FitPoints int      `json:"fit_points"`
	// Accepted says whether the model's residual is at the noise level, so
	// that its corners are reported; Reason explains the decision.
	Accepted   bool        `json:"accepted"`
	Reason     string      `json:"reason"`
	Candidates []Candidate `json:"candidates"`
}

// Candidate is one cascade tried by the fit.
type Candidate struct {
	Structure     string  `json:"structure"`
	BIC           float64 `json:"bic"`
	ResidualRMSDB float64 `json:"residual_rms_db"`
}

// ExcludedPoint is a point the analysis left out.
type ExcludedPoint struct {
	Seq     int      `json:"seq"`
	FreqHz  float64  `json:"freq_hz"`
	Reasons []string `json:"reasons"`
}

// GainAt returns the analysed response (the curve the figures come from:
// the model when accepted, the interpolant otherwise) at freqHz, dB; ok is
// false outside the sweep.
func (r *Result) GainAt(freqHz float64) (gainDB float64, ok bool) {
	if r.chosen == nil || !(freqHz >= r.SweepHz[0]*(1-1e-12) && freqHz <= r.SweepHz[1]*(1+1e-12)) {
		return 0, false
	}
	return r.chosen.atLog(clamp(log10(freqHz), log10(r.SweepHz[0]), log10(r.SweepHz[1]))), true
}

// Interpolated returns the interpolant through the included points.
func (r *Result) Interpolated() *Interpolant { return r.interp }

// Fitted returns the fitted model, or nil.
func (r *Result) Fitted() *Model {
	if r.Model == nil {
		return nil
	}
	return &r.Model.Model
}

// MaskUsed returns the mask the response was checked against, or nil.
func (r *Result) MaskUsed() *Mask { return r.mask }
