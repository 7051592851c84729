// Package report writes a run's one-page PDF report, report.pdf: the unit
// and the bench it was measured on, the plan in one line, a Bode plot of
// the gain with its uncertainty band, corners, reference and corner-level
// lines, mask and flagged points, the figures with their expanded
// uncertainties, the fitted model in words, the mask verdict, the
// uncertainty budget in brief, the notes and the safety statement.
//
// Text is set as text in embedded fonts (selectable and searchable) and the
// plot is drawn as vector graphics in shades of grey, so that the page
// prints the same on a monochrome printer. Doc and Chart, the page and
// plot primitives, are shared with the batch summary.
package report
