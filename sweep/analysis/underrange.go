package analysis

import "rolloff/sweep/point"

// noteUnderRange sets LowUnderRangeHz and HighUnderRangeFromHz of a result
// whose corner on that side was not found: where the points past the last
// one included were left out as under range (a fixed range too sensitive
// for the falling response), the corner was not measurable on that
// range, which the report tells apart from a corner beyond the sweep.
func (r *Result) noteUnderRange() {
	for _, e := range r.Excluded {
		under := false
		for _, why := range e.Reasons {
			under = under || why == point.FlagUnderRange
		}
		if !under {
			continue
		}
		if r.HighHz == nil && e.FreqHz > r.SweepHz[1] && (r.HighUnderRangeFromHz == nil || e.FreqHz < *r.HighUnderRangeFromHz) {
			r.HighUnderRangeFromHz = ptr(e.FreqHz)
		}
		if r.LowHz == nil && !r.DCCoupled && e.FreqHz < r.SweepHz[0] && (r.LowUnderRangeHz == nil || e.FreqHz > *r.LowUnderRangeHz) {
			r.LowUnderRangeHz = ptr(e.FreqHz)
		}
	}
}
