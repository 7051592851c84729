package plan

import (
	"fmt"
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
