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
//     high-pass), the structure chosen by the Bayesian information criterion.
//
// The reported corners (and the other figures taken from the curve) come
// from the model when its residual is at the noise level and shows no
// structure, and from the interpolant otherwise; see ModelTest for the
// exact rule.
package analysis
