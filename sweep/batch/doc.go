// Package batch compares the runs of several units of one design: it
// loads and analyses each run as its report does, checks every unit
// against one limit mask, and writes batch.csv (one row per unit: the
// verdict, the corners with their expanded uncertainties, the peaking,
// the worst margin and the difference to a reference unit) and
// batch-summary.pdf (the yield, each figure across the units as a strip
// plot with its limits, an overlay of every unit with the mask, and the
// statistics with the process capability index Cpk).
//
// The limits a figure is held to are derived from the mask (see Limits);
// Cpk follows the NIST/SEMATECH e-Handbook of Statistical Methods, §6.1.6.
package batch
