package export

import (
	"bufio"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"sort"
	"strconv"
	"strings"
	"time"

	"rolloff/sweep/analysis"
	"rolloff/sweep/point"
)

// csvColumns are response.csv's columns, units in the names.
var csvColumns = []string{
	"frequency_hz", "vin_vrms", "vout_vrms", "gain_db", "u_gain_db", "uexp_gain_db",
	"range", "range_index", "range_fs_vrms", "fraction_fs", "dc_v", "readings",
	"std_rel", "conv_acc_rel", "dc_acc_v", "settle_s", "seq", "index", "flags", "time",
}

// throughColumns are added when the analysis normalised by a through run.
var throughColumns = []string{"norm_gain_db", "u_norm_gain_db"}

func fmtFloat(v float64) string {
	if v == 0 && !math.Signbit(v) {
		return "0"
	}
	return strconv.FormatFloat(v, 'g', -1, 64)
}

// WriteCSV writes response.csv: a header, then one row per point sorted by
// frequency (ties in measurement order). gain_db is 20·log10(vout/vin) (the
// stored gain when there are no voltages), u_gain_db its combined standard
// uncertainty and uexp_gain_db the expanded one (k = 2), both dB; flags are
// joined with "|". Numbers are written round-trip exact. When res was
// normalised by a through run, norm_gain_db and u_norm_gain_db follow.
func WriteCSV(w io.Writer, pts []point.Point, res *analysis.Result) error {
	bw := bufio.NewWriterSize(w, 1<<16)
	cw := csv.NewWriter(bw)
	through := res != nil && res.Through
	header := csvColumns
	if through {
		header = append(append([]string{}, csvColumns...), throughColumns...)
	}
	if err := cw.Write(header); err != nil {
		return err
	}
	order := make([]int, len(pts))
	for i := range order {
		order[i] = i
	}
	sort.SliceStable(order, func(a, b int) bool {
		pa, pb := pts[order[a]], pts[order[b]]
		if pa.FreqHz != pb.FreqHz {
			return pa.FreqHz < pb.FreqHz
		}
		return pa.Seq < pb.Seq
	})
	var norm map[int]analysis.Sample
	if through {
		norm = make(map[int]analysis.Sample, len(res.Samples))
		for _, s := range res.Samples {
			norm[s.Pos] = s
		}
	}
	rec := make([]string, len(header))
	for _, i := range order {
		p := pts[i]
		b := analysis.PointBudget(p)
		g, ok := analysis.GainOf(p)
		gs := ""
		if ok {
			gs = fmtFloat(g)
		}
		rec = rec[:0]
		rec = append(rec, fmtFloat(p.FreqHz), fmtFloat(p.VinVrms), fmtFloat(p.VoutVrms), gs,
			fmtFloat(b.CombinedDB), fmtFloat(b.ExpandedDB),
			p.Range, strconv.Itoa(p.RangeIndex), fmtFloat(p.RangeFSVrms), fmtFloat(p.FractionFS), fmtFloat(p.DCVolts),
			strconv.Itoa(p.Readings), fmtFloat(p.StdRel), fmtFloat(p.ConvAccRel), fmtFloat(p.DCAccV), fmtFloat(p.SettleS),
			strconv.Itoa(p.Seq), strconv.Itoa(p.Index), strings.Join(p.Flags, "|"), timeStr(p.Time))
		if through {
			s, ok := norm[i]
			if ok && !s.Excluded {
				rec = append(rec, fmtFloat(s.GainDB), fmtFloat(s.UDB))
			} else {
				rec = append(rec, "", "")
			}
		}
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return err
	}
	return bw.Flush()
}

func timeStr(t time.Time) string {
	if t.IsZero() {
		return ""
	}
	return t.UTC().Format(time.RFC3339Nano)
}

// ReadOptions controls ReadCSV.
type ReadOptions struct {
	// VinVrms is the input level for files with vout_vrms but no vin_vrms
	// column (or an empty cell), volts RMS.
	VinVrms float64
	// MaxRows caps the data rows; zero means DefaultMaxRows.
	MaxRows int
}

// DefaultMaxRows is the largest response ReadCSV accepts by default.
const DefaultMaxRows = 1_000_000

// ErrCSV is wrapped by every ReadCSV error.
var ErrCSV = errors.New("export: bad response CSV")

// ReadCSV reads a response from CSV: a header row naming the columns, then
// one row per point. It needs a frequency_hz column and either gain_db or
// vout_vrms (with vin_vrms, or ReadOptions.VinVrms); every other column of
// response.csv is read when present, unknown columns are ignored. Lines
// starting with '#' are comments. Errors name the file, the line and the
// column. name is the file name used in errors.
func ReadCSV(r io.Reader, name string, opts ReadOptions) ([]point.Point, error) {
	if opts.MaxRows <= 0 {
		opts.MaxRows = DefaultMaxRows
	}
	if opts.VinVrms != 0 && !(opts.VinVrms > 0 && !math.IsInf(opts.VinVrms, 0)) {
		return nil, fmt.Errorf("%w: %s: input level %v V: want positive and finite", ErrCSV, name, opts.VinVrms)
	}
	cr := csv.NewReader(r)
	cr.Comment = '#'
	cr.TrimLeadingSpace = true
	cr.ReuseRecord = true
	header, err := cr.Read()
	if err == io.EOF {
		return nil, fmt.Errorf("%w: %s: empty file: want a header row with frequency_hz and gain_db or vout_vrms", ErrCSV, name)
	}
	if err != nil {
		return nil, csvErr(name, err)
	}
	col := map[string]int{}
	names := make([]string, len(header))
	for i, h := range header {
		h = strings.ToLower(strings.TrimSpace(strings.TrimPrefix(h, "\ufeff")))
		names[i] = h
		if h == "" {
			continue
		}
		if _, dup := col[h]; dup {
			line, _ := cr.FieldPos(i)
			return nil, fmt.Errorf("%w: %s:%d: column %q appears twice", ErrCSV, name, line, h)
		}
		col[h] = i
	}
	if _, ok := col["frequency_hz"]; !ok {
		return nil, fmt.Errorf("%w: %s:1: no frequency_hz column (columns: %s)", ErrCSV, name, strings.Join(names, ", "))
	}
	_, hasGain := col["gain_db"]
	_, hasVout := col["vout_vrms"]
	_, hasVin := col["vin_vrms"]
	if !hasGain && !hasVout {
		return nil, fmt.Errorf("%w: %s:1: no gain_db or vout_vrms column: want one of them", ErrCSV, name)
	}
	if !hasGain && !hasVin && opts.VinVrms == 0 {
		return nil, fmt.Errorf("%w: %s:1: vout_vrms without vin_vrms: give the input level (--vin)", ErrCSV, name)
	}
	cr.FieldsPerRecord = len(header)
	var pts []point.Point
	for row := 0; ; row++ {
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, csvErr(name, err)
		}
		if row >= opts.MaxRows {
			line, _ := cr.FieldPos(0)
			return nil, fmt.Errorf("%w: %s:%d: more than %d rows", ErrCSV, name, line, opts.MaxRows)
		}
		p, err := parseRow(cr, rec, col, name, opts)
		if err != nil {
			return nil, err
		}
		if _, ok := col["seq"]; !ok {
			p.Seq = row
		}
		if _, ok := col["index"]; !ok {
			p.Index = row
		}
		pts = append(pts, p)
	}
	if len(pts) == 0 {
		return nil, fmt.Errorf("%w: %s: header but no data rows", ErrCSV, name)
	}
	return pts, nil
}

// hasBudget says whether a CSV file carries the parts of an uncertainty
// budget (std_rel, conv_acc_rel, dc_acc_v), from which the analysis
// computes u_gain_db itself.
func hasBudget(col map[string]int) bool {
	for _, k := range []string{"std_rel", "conv_acc_rel", "dc_acc_v"} {
		if _, ok := col[k]; ok {
			return true
		}
	}
	return false
}

func csvErr(name string, err error) error {
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		return fmt.Errorf("%w: %s:%d:%d: %v", ErrCSV, name, pe.Line, pe.Column, pe.Err)
	}
	return fmt.Errorf("%w: %s: %w", ErrCSV, name, err)
}

type rowParser struct {
	cr   *csv.Reader
	rec  []string
	col  map[string]int
	name string
	err  error
}

func (rp *rowParser) fail(key, v, want string) {
	if rp.err != nil {
		return
	}
	line, _ := rp.cr.FieldPos(rp.col[key])
	if len(v) > 40 {
		v = v[:40] + "…"
	}
	rp.err = fmt.Errorf("%w: %s:%d: column %q: value %q: want %s", ErrCSV, rp.name, line, key, v, want)
}

// cell returns the trimmed cell of column key; ok is false when the column
// is absent or the cell empty.
func (rp *rowParser) cell(key string) (string, bool) {
	i, ok := rp.col[key]
	if !ok {
		return "", false
	}
	v := strings.TrimSpace(rp.rec[i])
	return v, v != ""
}

// num parses a finite number ≥ lo (> lo when strict).
func (rp *rowParser) num(key string, lo float64, strict bool, want string) (float64, bool) {
	v, ok := rp.cell(key)
	if !ok {
		return 0, false
	}
	f, err := strconv.ParseFloat(v, 64)
	if err != nil || math.IsNaN(f) || math.IsInf(f, 0) || f < lo || (strict && f == lo) {
		rp.fail(key, v, want)
		return 0, false
	}
	return f, true
}

func (rp *rowParser) integer(key string) int {
	v, ok := rp.cell(key)
	if !ok {
		return 0
	}
	n, err := strconv.Atoi(v)
	if err != nil || n < 0 {
		rp.fail(key, v, "a non-negative integer")
	}
	return n
}

func parseRow(cr *csv.Reader, rec []string, col map[string]int, name string, opts ReadOptions) (point.Point, error) {
	rp := &rowParser{cr: cr, rec: rec, col: col, name: name}
	var p point.Point
	const nonneg = "a finite number >= 0"
	f, ok := rp.num("frequency_hz", 0, true, "a positive finite frequency in Hz")
	if !ok && rp.err == nil {
		rp.fail("frequency_hz", "", "a positive finite frequency in Hz")
	}
	p.FreqHz = f
	vout, hasVout := rp.num("vout_vrms", 0, false, "a finite voltage >= 0")
	// vin_vrms 0 means "not known" (a file with gains only).
	vin, hasVin := rp.num("vin_vrms", 0, false, "a finite voltage >= 0")
	hasVin = hasVin && vin > 0
	if !hasVin && rp.err == nil && hasVout && opts.VinVrms > 0 {
		vin, hasVin = opts.VinVrms, true
	}
	g, hasGain := rp.num("gain_db", math.Inf(-1), false, "a finite gain in dB")
	if rp.err == nil {
		switch {
		case hasVout && hasVin:
			p.VinVrms, p.VoutVrms = vin, vout
			if vout > 0 {
				p.GainDB = 20 * math.Log10(vout/vin)
			} else if hasGain {
				p.GainDB = g
			}
		case hasGain:
			p.GainDB = g
			p.VinVrms, p.VoutVrms = vin, vout
		case hasVout:
			rp.fail("vin_vrms", "", "an input level (the column, or --vin) for vout_vrms")
		default:
			key := "gain_db"
			if _, ok := col[key]; !ok {
				key = "vout_vrms"
			}
			rp.fail(key, "", "a gain_db or vout_vrms value")
		}
	}
	if v, ok := rp.cell("range"); ok {
		p.Range = v
	}
	p.RangeIndex = rp.integer("range_index")
	p.RangeFSVrms, _ = rp.num("range_fs_vrms", 0, false, nonneg)
	p.FractionFS, _ = rp.num("fraction_fs", 0, false, nonneg)
	p.DCVolts, _ = rp.num("dc_v", math.Inf(-1), false, "a finite voltage")
	p.Readings = rp.integer("readings")
	p.StdRel, _ = rp.num("std_rel", 0, false, nonneg)
	if !hasBudget(col) {
		// Without a budget of its own, the file's u_gain_db (dB) or
		// u_vout_vrms (V) is the point's standard uncertainty.
		if u, ok := rp.num("u_gain_db", 0, false, nonneg); ok {
			p.StdRel = u / (20 / math.Ln10)
		} else if u, ok := rp.num("u_vout_vrms", 0, false, nonneg); ok && p.VoutVrms > 0 {
			p.StdRel = u / p.VoutVrms
		}
	}
	p.ConvAccRel, _ = rp.num("conv_acc_rel", 0, false, nonneg)
	p.DCAccV, _ = rp.num("dc_acc_v", 0, false, nonneg)
	p.SettleS, _ = rp.num("settle_s", 0, false, nonneg)
	p.Seq = rp.integer("seq")
	p.Index = rp.integer("index")
	if v, ok := rp.cell("flags"); ok {
		for _, fl := range strings.Split(v, "|") {
			if fl = strings.TrimSpace(fl); fl != "" {
				p.Flags = append(p.Flags, fl)
			}
		}
	}
	if v, ok := rp.cell("time"); ok {
		t, err := time.Parse(time.RFC3339Nano, v)
		if err != nil {
			rp.fail("time", v, "an RFC 3339 time")
		}
		p.Time = t
	}
	return p, rp.err
}
