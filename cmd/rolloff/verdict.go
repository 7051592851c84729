package main

import (
	"fmt"
	"io"

	"rolloff/sweep/analysis"
)

// printMaskVerdict prints the result's mask verdict, when the plan gave a
// mask: "mask: FAIL "name": 3 of 40 points outside; worst margin −0.212
// dB at 25.3 Hz (lower limit)".
func printMaskVerdict(w io.Writer, res map[string]any) {
	m, ok := res["mask"].(map[string]any)
	if !ok {
		return
	}
	word := "FAIL"
	if pass, _ := m["pass"].(bool); pass {
		word = "PASS"
	}
	name, _ := m["name"].(string)
	if name == "" {
		name, _ = m["file"].(string)
	}
	failed, _ := m["failed"].(float64)
	checked, _ := m["checked"].(float64)
	line := fmt.Sprintf("mask: %s %q: %d of %d points outside", word, name, int(failed), int(checked))
	if wm, ok := m["worst_margin_db"].(float64); ok {
		hz, _ := m["worst_hz"].(float64)
		lim, _ := m["worst_limit"].(string)
		line += fmt.Sprintf("; worst margin %+.3f dB at %s (%s limit)", wm, analysis.FormatHz(hz, 4), lim)
	}
	fmt.Fprintln(w, line)
}
