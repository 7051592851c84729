package plan

import (
	"strings"

	"fmt"
	"rolloff/sweep/analysis"
	"strconv"
	"unicode"
	"unicode/utf8"
)

// Bounds of the fields that identify the unit measured.
const (
	MaxUnitBytes  = 64   // unit (serial number) and batch
	MaxNotesBytes = 2000 // notes
)

// unit checks the fields naming the unit measured: unit and batch are
// short printable identifiers (a serial number as a barcode scanner types
// it), operator a name, notes free text that may hold line breaks.
func (v *validator) unit() {
	p := v.p
	v.text("unit", p.Unit, MaxUnitBytes)
	v.text("batch", p.Batch, MaxUnitBytes)
	v.text("operator", p.Operator, 200)
	if p.Mask.Given() {
		if _, err := p.LimitMask(); err != nil {
			v.add("mask", "", strings.TrimPrefix(err.Error(), analysis.ErrMask.Error()+": "))
		}
	}
	switch n := p.Notes; {
	case len(n) > MaxNotesBytes:
		v.add("notes", strconv.Quote(n[:40])+"…", fmt.Sprintf("at most %d bytes", MaxNotesBytes))
	case !utf8.ValidString(n):
		v.add("notes", strconv.Quote(n), "must be valid UTF-8")
	default:
		for _, r := range n {
			if r != '\n' && r != '\t' && !unicode.IsPrint(r) {
				v.add("notes", strconv.Quote(n), "must not hold control characters other than line breaks and tabs")
				return
			}
		}
	}
}

// Mask is a limit mask written in the plan, with the keys of a mask file
// (see analysis.Mask): name, relative, upper and lower, each line a list
// of [frequency_hz, gain_db] vertices.
type Mask struct {
	Name     string      `toml:"name" json:"name"`
	Relative bool        `toml:"relative" json:"relative"`
	Upper    [][]float64 `toml:"upper" json:"upper"`
	Lower    [][]float64 `toml:"lower" json:"lower"`
}

// Given reports whether any key of the mask is set.
func (m Mask) Given() bool {
	return m.Name != "" || m.Relative || len(m.Upper) > 0 || len(m.Lower) > 0
}

// LimitMask returns the plan's mask, nil when it has none; the error
// names the plan file and the mask's key.
func (p *Plan) LimitMask() (*analysis.Mask, error) {
	if !p.Mask.Given() {
		return nil, nil
	}
	file := "plan"
	if p.src != nil && p.src.file != "" {
		file = p.src.file
	}
	return analysis.NewMask(file+": mask", p.Mask.Name, p.Mask.Relative, p.Mask.Upper, p.Mask.Lower)
}
