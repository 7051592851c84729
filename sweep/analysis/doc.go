// Package analysis turns a measured frequency response ([]point.Point) into
// the figures an engineer puts in a report: reference level, lower and upper
// corners with their uncertainty (JCGM 100:2008), bandwidth, peaking,
// flatness, roll-off slopes, a fitted model of standard sections, and the
// verdict of a limit mask.
//
// Two corner estimators are always computed and compared:
//
//   - interpolation: a monotone piecewise cubic (Fritsch–Butland) through the
//     points in (log10 f, dB); crossings are found by Brent's method on the
//     interpolant, never on straight lines between points;
//   - model: the response in dB fitted by weighted nonlinear least squares
//     with a cascade of standard sections (first- and second-order low- and
//     high-pass, second-order band-pass, real zeros — with a pole, a shelf —
//     and zero pairs on the jω axis — notches and stop-band zeros — up to
//     MaxSideOrder poles per side), the structure chosen by the Bayesian
//     information criterion among candidates started from the data's
//     slopes, corners, dips and level steps.
//
// The noise is the points' Type A uncertainty or, where they declare
// none, estimated from the data. A corner's uncertainty is its budget
// (budget.go, JCGM 100:2008 §5.2): each input grouped by the readings it
// is common to (a converter range, a flatness band, the generator), so
// that an error shared by the reference and the corner cancels; the
// scatter goes through the fit's covariance or, interpolated, adds the
// spread of other interpolants' crossings (the method error).
// Result.RunMonteCarlo draws the same inputs (JCGM 101:2008).
//
// The reported corners (and the other figures taken from the curve) come
// from the model when its residual is at the noise level and shows no
// structure, and from the interpolant otherwise; see ModelTest for the
// exact rule.
package analysis
