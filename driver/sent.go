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

// SettlingOutput is an optional capability of a Generator that waits
// after a setting until the instrument says it is complete (or for a
// fixed delay): its output may be interrupted until then, as a
// synthesiser relocking after a frequency change does. A scheduler
// reading an averaging converter then counts the converter's input as
// absent while a setting was in progress.
type SettlingOutput interface {
	WaitsAfterSettings() bool
}
