package batch

import (
	"encoding/csv"
	"fmt"
	"io"
	"strconv"
)

// CSVHeader is the first row of batch.csv. Frequencies are in Hz, levels
// in dB; *_u_hz are expanded uncertainties with coverage factor k; *_diff
// columns are the unit less the reference unit; an empty cell is a value
// the unit does not have.
var CSVHeader = []string{"run", "unit", "batch", "verdict", "error", "k",
	"low_hz", "low_u_hz", "high_hz", "high_u_hz", "peaking_db", "peaking_hz", "reference_gain_db",
	"worst_margin_db", "worst_hz", "worst_limit", "low_diff_hz", "high_diff_hz", "max_diff_db", "max_diff_hz"}

// WriteCSV writes batch.csv: the header and one row per unit, in the
// order the runs were given.
func WriteCSV(w io.Writer, b *Batch) error {
	cw := csv.NewWriter(w)
	if err := cw.Write(CSVHeader); err != nil {
		return err
	}
	num := func(p *float64) string {
		if p == nil {
			return ""
		}
		return strconv.FormatFloat(*p, 'g', 10, 64)
	}
	for _, u := range b.Units {
		r := u.In.Result
		row := []string{u.In.RunID, u.In.Unit, u.In.Batch, u.Verdict, u.In.AnalysisErr}
		if r == nil {
			row = append(row, make([]string, len(CSVHeader)-len(row))...)
		} else {
			var wm, wh *float64
			var wl string
			if v := r.Mask; v != nil {
				wm, wh, wl = v.WorstMarginDB, v.WorstHz, v.WorstLimit
			}
			row = append(row, strconv.FormatFloat(r.CoverageFactor, 'g', -1, 64),
				num(r.LowHz), num(r.LowUHz), num(r.HighHz), num(r.HighUHz),
				num(&r.PeakingDB), num(&r.PeakingHz), num(&r.ReferenceGainDB),
				num(wm), num(wh), wl, num(u.LowDiffHz), num(u.HighDiffHz), num(u.MaxDiffDB), num(u.MaxDiffHz))
		}
		if err := cw.Write(row); err != nil {
			return err
		}
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return fmt.Errorf("batch: %s: %w", FileCSV, err)
	}
	return nil
}
