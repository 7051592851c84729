// Package export renders a measured response and its analysis in report
// form — response.csv, result.json and Bode-style gain plots (PNG, SVG,
// PDF), overlays of several runs and before/after difference plots — and
// reads response CSV files back for analysis.
//
// Every renderer writes to an io.Writer; export itself creates no file.
// WriteAll hands each rendered result file to a FileWriter, which for a
// run is its *store.Run: the store writes each atomically, and its file
// names (store.ResultFiles) and its reader of points.jsonl
// (store.ReadPoints, used by LoadRun) are the only ones.
package export
