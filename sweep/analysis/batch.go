package analysis

import "rolloff/sweep/point"

// Run is one named response of a batch.
type Run struct {
	Name   string
	Points []point.Point
}

// BatchEntry is one run's outcome: its result, or the error that stopped
// its analysis.
type BatchEntry struct {
	Name   string  `json:"input"`
	Result *Result `json:"result"`
	Err    string  `json:"error,omitempty"`
}

// Batch is the outcome of AnalyzeBatch.
type Batch struct {
	Entries []BatchEntry `json:"runs"`
	// Failed counts runs that could not be analysed or failed the mask;
	// Pass is true when there are none.
	Failed int  `json:"failed"`
	Pass   bool `json:"pass"`
}

// AnalyzeBatch analyses several runs with the same options — typically to
// check a production batch against one mask. A run that cannot be analysed
// is reported, not fatal.
func AnalyzeBatch(runs []Run, opts Options) *Batch {
	b := &Batch{Pass: true}
	for _, r := range runs {
		e := BatchEntry{Name: r.Name}
		res, err := Analyze(r.Points, opts)
		if err != nil {
			e.Err = err.Error()
			b.Failed++
		} else {
			e.Result = res
			if res.Mask != nil && !res.Mask.Pass {
				b.Failed++
			}
		}
		b.Entries = append(b.Entries, e)
	}
	b.Pass = b.Failed == 0
	return b
}
