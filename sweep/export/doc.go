// Package export writes a measured response and its analysis in report
// form — response.csv, result.json and Bode-style gain plots (PNG, SVG,
// PDF), overlays of several runs and before/after difference plots — and
// reads response CSV files back for analysis.
//
// Every file WriteAll writes is replaced atomically: written to a temporary
// file in the same directory, synced, then renamed over the old one.
package export
