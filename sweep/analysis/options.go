package analysis

import (
	"errors"
	"fmt"
	"math"

	"rolloff/sweep/point"
)

// HalfPowerDB is 10·log10(1/2) ≈ −3.0103 dB, the default corner level.
var HalfPowerDB = 10 * math.Log10(0.5)

// Defaults for Options fields left zero.
const (
	DefaultRefHz        = 1000.0
	DefaultNoiseFloorDB = 0.01
	DefaultMaxFitPoints = 400
	DefaultModelFactor  = 2.0
)

// RefMode selects how the reference level is taken.
type RefMode string

// Reference level modes.
const (
	// RefFrequency takes the gain at Options.RefHz (interpolated).
	RefFrequency RefMode = "frequency"
	// RefMax takes the passband maximum.
	RefMax RefMode = "max"
	// RefBand takes the mean gain over Options.BandLoHz..BandHiHz, averaged
	// in log frequency.
	RefBand RefMode = "band"
)

// ErrOptions is wrapped by every error about bad Options.
var ErrOptions = errors.New("analysis: bad option")

// ErrResponse is wrapped by errors about a response that cannot be
// analysed (too few usable points, reference outside the sweep…).
var ErrResponse = errors.New("analysis: unusable response")

// Options controls Analyze. The zero value asks for the half-power corners
// relative to the gain at 1 kHz.
type Options struct {
	// LevelDB is the corner level relative to the reference, in dB; it must
	// be negative. Zero means HalfPowerDB.
	LevelDB float64
	// RefMode is how the reference level is taken; "" means RefFrequency.
	RefMode RefMode
	// RefHz is the reference frequency for RefFrequency; zero means
	// DefaultRefHz. It must lie within the sweep.
	RefHz float64
	// BandLoHz and BandHiHz bound the band averaged by RefBand.
	BandLoHz, BandHiHz float64
	// Through is a reference run measured with the DUT bypassed. When
	// given, its gain (interpolated in log frequency) is subtracted from
	// each point's, so that generator and converter flatness drop out.
	Through []point.Point
	// Mask, when non-nil, is checked against the response.
	Mask *Mask

	// NoiseFloorDB is the resolution of the gains, in dB: a model residual
	// below it counts as adequate whatever its structure (see ModelTest).
	// It is not a noise level: the noise is the points' Type A uncertainty
	// or, where the data declare none, estimated from the data. Zero means
	// DefaultNoiseFloorDB.
	NoiseFloorDB float64
	// ModelFactor is how far above the noise level the model's residual may
	// be for the model to be trusted; zero means DefaultModelFactor.
	ModelFactor float64
	// MaxFitPoints caps the points the model fit sees; longer responses are
	// averaged into this many bins equally spaced in log frequency. Zero
	// means DefaultMaxFitPoints.
	MaxFitPoints int
	// NoModel skips the model fit; figures then come from interpolation.
	NoModel bool
	// Spec is the measuring chain's specification by component, for the
	// corners' budgets (see Spec); nil uses the points' own figures.
	Spec *Spec
	// MonteCarloCheck, when above zero, is the number of Monte Carlo
	// trials with which each corner's GUM-framework interval is validated
	// (JCGM 101:2008 §8); where the validation fails, the corner's
	// expanded uncertainty becomes the half-width enclosing the Monte
	// Carlo 95 % interval (see Result.MonteCarlo). The draws are seeded, so that the
	// same points give the same figures. Zero skips the check;
	// DefaultMonteCarloCheck is what a finished run uses.
	MonteCarloCheck int
}

// DefaultMonteCarloCheck is the number of Monte Carlo trials a finished
// run's corners are validated with: at 20 000 trials the 2.5 % and 97.5 %
// quantiles are each drawn from about 500 trials beyond them.
const DefaultMonteCarloCheck = 20000

func (o Options) withDefaults() (Options, error) {
	if o.LevelDB == 0 {
		o.LevelDB = HalfPowerDB
	}
	if !(o.LevelDB < 0) || o.LevelDB < -200 || math.IsInf(o.LevelDB, 0) {
		return o, fmt.Errorf("%w: level %v dB: want a negative number of dB (e.g. -3.0103, -1, -6) above -200", ErrOptions, o.LevelDB)
	}
	if o.RefMode == "" {
		o.RefMode = RefFrequency
	}
	switch o.RefMode {
	case RefFrequency:
		if o.RefHz == 0 {
			o.RefHz = DefaultRefHz
		}
		if !(o.RefHz > 0) || math.IsInf(o.RefHz, 0) {
			return o, fmt.Errorf("%w: reference frequency %v Hz: want a positive finite frequency", ErrOptions, o.RefHz)
		}
	case RefMax:
	case RefBand:
		if !(o.BandLoHz > 0) || !(o.BandHiHz > o.BandLoHz) || math.IsInf(o.BandHiHz, 0) {
			return o, fmt.Errorf("%w: reference band %v..%v Hz: want 0 < low < high, finite", ErrOptions, o.BandLoHz, o.BandHiHz)
		}
	default:
		return o, fmt.Errorf("%w: reference mode %q: want %q, %q or %q", ErrOptions, o.RefMode, RefFrequency, RefMax, RefBand)
	}
	if o.NoiseFloorDB == 0 {
		o.NoiseFloorDB = DefaultNoiseFloorDB
	}
	if !(o.NoiseFloorDB > 0) || o.NoiseFloorDB > 10 {
		return o, fmt.Errorf("%w: noise floor %v dB: want 0 < floor <= 10", ErrOptions, o.NoiseFloorDB)
	}
	if o.ModelFactor == 0 {
		o.ModelFactor = DefaultModelFactor
	}
	if !(o.ModelFactor >= 1) || o.ModelFactor > 100 {
		return o, fmt.Errorf("%w: model factor %v: want 1 <= factor <= 100", ErrOptions, o.ModelFactor)
	}
	if o.MaxFitPoints == 0 {
		o.MaxFitPoints = DefaultMaxFitPoints
	}
	if o.MonteCarloCheck < 0 || o.MonteCarloCheck > MaxMonteCarloTrials {
		return o, fmt.Errorf("%w: Monte Carlo check %d trials: want 0 (off) to %d", ErrOptions, o.MonteCarloCheck, MaxMonteCarloTrials)
	}
	if o.MaxFitPoints < 16 {
		return o, fmt.Errorf("%w: max fit points %d: want at least 16", ErrOptions, o.MaxFitPoints)
	}
	return o, nil
}
