package driver

// SentSettings is an optional capability of a Generator whose instrument
// receives its settings rounded (a profile's significant digits): the
// values the instrument last received, which are the values to record.
// SentAmplitudeVrms is the Vrms at the DUT the sent amplitude gives.
// Both are 0 before the first setting.
type SentSettings interface {
	SentFrequencyHz() float64
	SentAmplitudeVrms() float64
}
