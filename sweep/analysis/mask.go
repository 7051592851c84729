package analysis

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"

	"github.com/pelletier/go-toml/v2"
)

// Mask is a limit mask: an upper and/or a lower limit line in dB against
// frequency, each piecewise linear in log frequency between its vertices.
// A point is checked against a line only within the line's frequency span.
//
// The mask file format (TOML, or the same keys in JSON) is:
//
//	# limits for the line-driver prototype
//	name = "line driver acceptance"   # optional, shown in reports
//	relative = true                   # limits relative to the reference level
//	                                  # (false or absent: absolute gain in dB)
//	upper = [[10, 0.5], [100000, 0.5]]                  # [frequency_hz, gain_db] vertices
//	lower = [[20, -0.5], [20000, -0.5], [40000, -3.5]]
//
// Vertex frequencies are positive and non-decreasing; two vertices at the
// same frequency make a vertical step, where the stricter limit applies.
// Each line needs at least two vertices; at least one line is required.
// Unknown keys are errors.
type Mask struct {
	Name     string       `json:"name,omitempty"`
	File     string       `json:"file,omitempty"`
	Relative bool         `json:"relative"`
	Upper    [][2]float64 `json:"upper,omitempty"`
	Lower    [][2]float64 `json:"lower,omitempty"`
}

// ErrMask is wrapped by every mask file error.
var ErrMask = errors.New("analysis: bad mask")

// maskFile is the decoded form; vertices are decoded loosely so that a
// wrong-length vertex gets a clear error.
type maskFile struct {
	Name     string      `toml:"name" json:"name"`
	Relative bool        `toml:"relative" json:"relative"`
	Upper    [][]float64 `toml:"upper" json:"upper"`
	Lower    [][]float64 `toml:"lower" json:"lower"`
}

// LoadMask reads a mask file; the format is chosen by the extension
// (.json for JSON, anything else TOML).
func LoadMask(path string) (*Mask, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("%w: %w", ErrMask, err)
	}
	if strings.EqualFold(filepath.Ext(path), ".json") {
		return DecodeMaskJSON(path, data)
	}
	return DecodeMaskTOML(path, data)
}

// DecodeMaskTOML decodes a TOML mask; name is the file name for errors.
func DecodeMaskTOML(name string, data []byte) (*Mask, error) {
	var f maskFile
	dec := toml.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&f); err != nil {
		var sm *toml.StrictMissingError
		if errors.As(err, &sm) && len(sm.Errors) > 0 {
			e := sm.Errors[0]
			row, _ := e.Position()
			return nil, fmt.Errorf("%w: %s:%d: unknown key %q: allowed keys are name, relative, upper, lower", ErrMask, name, row, strings.Join(e.Key(), "."))
		}
		var de *toml.DecodeError
		if errors.As(err, &de) {
			row, col := de.Position()
			key := strings.Join(de.Key(), ".")
			if key != "" {
				return nil, fmt.Errorf("%w: %s:%d:%d: key %q: %v", ErrMask, name, row, col, key, de)
			}
			return nil, fmt.Errorf("%w: %s:%d:%d: %v", ErrMask, name, row, col, de)
		}
		return nil, fmt.Errorf("%w: %s: %v", ErrMask, name, err)
	}
	return f.validate(name)
}

// DecodeMaskJSON decodes a JSON mask; name is the file name for errors.
func DecodeMaskJSON(name string, data []byte) (*Mask, error) {
	var f maskFile
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&f); err != nil {
		var se *json.SyntaxError
		var te *json.UnmarshalTypeError
		switch {
		case errors.As(err, &se):
			return nil, fmt.Errorf("%w: %s:%d: %v", ErrMask, name, lineOf(data, se.Offset), err)
		case errors.As(err, &te):
			return nil, fmt.Errorf("%w: %s:%d: key %q: %v", ErrMask, name, lineOf(data, te.Offset), te.Field, err)
		}
		return nil, fmt.Errorf("%w: %s: %v (allowed keys are name, relative, upper, lower)", ErrMask, name, err)
	}
	if _, err := dec.Token(); err != io.EOF {
		return nil, fmt.Errorf("%w: %s: trailing data after the mask object", ErrMask, name)
	}
	return f.validate(name)
}

func lineOf(data []byte, off int64) int {
	if off > int64(len(data)) {
		off = int64(len(data))
	}
	return 1 + bytes.Count(data[:off], []byte("\n"))
}

func (f *maskFile) validate(name string) (*Mask, error) {
	m := &Mask{Name: f.Name, File: name, Relative: f.Relative}
	if len(f.Upper) == 0 && len(f.Lower) == 0 {
		return nil, fmt.Errorf("%w: %s: neither \"upper\" nor \"lower\" given: want at least one limit line", ErrMask, name)
	}
	conv := func(key string, vs [][]float64) ([][2]float64, error) {
		if len(vs) == 0 {
			return nil, nil
		}
		if len(vs) < 2 {
			return nil, fmt.Errorf("%w: %s: key %q: %d vertex: want at least 2 [frequency_hz, gain_db] pairs", ErrMask, name, key, len(vs))
		}
		out := make([][2]float64, len(vs))
		for i, v := range vs {
			if len(v) != 2 {
				return nil, fmt.Errorf("%w: %s: key %s[%d]: %d numbers: want a [frequency_hz, gain_db] pair", ErrMask, name, key, i, len(v))
			}
			if !(v[0] > 0) || math.IsInf(v[0], 0) {
				return nil, fmt.Errorf("%w: %s: key %s[%d]: frequency %v Hz: want positive and finite", ErrMask, name, key, i, v[0])
			}
			if math.IsNaN(v[1]) || math.IsInf(v[1], 0) || math.Abs(v[1]) > 1000 {
				return nil, fmt.Errorf("%w: %s: key %s[%d]: gain %v dB: want finite, within ±1000 dB", ErrMask, name, key, i, v[1])
			}
			if i > 0 && v[0] < vs[i-1][0] {
				return nil, fmt.Errorf("%w: %s: key %s[%d]: frequency %v Hz below the previous vertex's %v Hz: want non-decreasing frequencies", ErrMask, name, key, i, v[0], vs[i-1][0])
			}
			out[i] = [2]float64{v[0], v[1]}
		}
		if out[0][0] == out[len(out)-1][0] {
			return nil, fmt.Errorf("%w: %s: key %q: all vertices at %v Hz: want a frequency span", ErrMask, name, key, out[0][0])
		}
		return out, nil
	}
	var err error
	if m.Upper, err = conv("upper", f.Upper); err != nil {
		return nil, err
	}
	if m.Lower, err = conv("lower", f.Lower); err != nil {
		return nil, err
	}
	return m, nil
}

// limitAt evaluates a limit line at freqHz: ok is false outside its span.
// Where segments meet at a step, the stricter value is taken (the
// smallest for an upper line, the largest for a lower one).
func limitAt(line [][2]float64, freqHz float64, upper bool) (v float64, ok bool) {
	if len(line) < 2 || freqHz < line[0][0] || freqHz > line[len(line)-1][0] {
		return 0, false
	}
	x := math.Log10(freqHz)
	for i := 1; i < len(line); i++ {
		a, b := line[i-1], line[i]
		if freqHz < a[0] || freqHz > b[0] {
			continue
		}
		var y float64
		if a[0] == b[0] {
			if upper {
				y = math.Min(a[1], b[1])
			} else {
				y = math.Max(a[1], b[1])
			}
		} else {
			t := (x - math.Log10(a[0])) / (math.Log10(b[0]) - math.Log10(a[0]))
			y = a[1] + t*(b[1]-a[1])
		}
		if !ok || (upper && y < v) || (!upper && y > v) {
			v = y
		}
		ok = true
	}
	return v, ok
}

// UpperAt and LowerAt evaluate the mask's limit lines at freqHz (ok false
// outside a line's span or when the line is absent).
func (m *Mask) UpperAt(freqHz float64) (float64, bool) { return limitAt(m.Upper, freqHz, true) }

// LowerAt is UpperAt for the lower line.
func (m *Mask) LowerAt(freqHz float64) (float64, bool) { return limitAt(m.Lower, freqHz, false) }

// MaskPoint is one point's check against a mask.
type MaskPoint struct {
	FreqHz float64 `json:"hz"`
	// GainDB is the gain compared: relative to the reference level for a
	// relative mask, absolute otherwise.
	GainDB   float64  `json:"gain_db"`
	UpperDB  *float64 `json:"upper_db"`
	LowerDB  *float64 `json:"lower_db"`
	MarginDB float64  `json:"margin_db"` // distance inside the nearer limit; negative = violation
	Pass     bool     `json:"pass"`
}

// MaskVerdict is the result of checking a response against a mask.
type MaskVerdict struct {
	Name     string `json:"name,omitempty"`
	File     string `json:"file,omitempty"`
	Relative bool   `json:"relative"`
	Pass     bool   `json:"pass"`
	Checked  int    `json:"checked"` // included points within a limit line's span
	Failed   int    `json:"failed"`
	// WorstMarginDB is the smallest margin (negative: the largest
	// violation), at WorstHz against the WorstLimit ("upper"/"lower") line.
	WorstMarginDB *float64    `json:"worst_margin_db"`
	WorstHz       *float64    `json:"worst_hz"`
	WorstLimit    string      `json:"worst_limit,omitempty"`
	Points        []MaskPoint `json:"per_point"`
}

// Check checks included samples against the mask; refDB is subtracted
// from the gains for a relative mask. A mask that covers no point fails.
func (m *Mask) Check(samples []Sample, refDB float64) *MaskVerdict {
	v := &MaskVerdict{Name: m.Name, File: m.File, Relative: m.Relative, Pass: true}
	worst := math.Inf(1)
	for _, s := range samples {
		if s.Excluded {
			continue
		}
		g := s.GainDB
		if m.Relative {
			g -= refDB
		}
		mp := MaskPoint{FreqHz: s.FreqHz, GainDB: g, MarginDB: math.Inf(1), Pass: true}
		var which string
		if u, ok := m.UpperAt(s.FreqHz); ok {
			mp.UpperDB = ptr(u)
			mp.MarginDB, which = u-g, "upper"
		}
		if l, ok := m.LowerAt(s.FreqHz); ok {
			mp.LowerDB = ptr(l)
			if g-l < mp.MarginDB {
				mp.MarginDB, which = g-l, "lower"
			}
		}
		if mp.UpperDB == nil && mp.LowerDB == nil {
			continue
		}
		mp.Pass = mp.MarginDB >= 0
		v.Checked++
		if !mp.Pass {
			v.Failed++
			v.Pass = false
		}
		if mp.MarginDB < worst {
			worst = mp.MarginDB
			v.WorstMarginDB, v.WorstHz, v.WorstLimit = ptr(mp.MarginDB), ptr(s.FreqHz), which
		}
		v.Points = append(v.Points, mp)
	}
	if v.Checked == 0 {
		v.Pass = false
	}
	return v
}

func ptr(v float64) *float64 { return &v }
