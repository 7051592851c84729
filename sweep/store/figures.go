package store

import (
	"encoding/json"
	"math"
)

// Figures are what a run list shows of a run's result (result.json):
// the corners with their expanded uncertainties, the peaking and the
// mask verdict. Absent values are nil.
type Figures struct {
	LowHz     *float64     `json:"low_hz,omitempty"`
	HighHz    *float64     `json:"high_hz,omitempty"`
	LowUHz    *float64     `json:"low_u_hz,omitempty"`
	HighUHz   *float64     `json:"high_u_hz,omitempty"`
	PeakingDB *float64     `json:"peaking_db,omitempty"`
	Mask      *MaskFigures `json:"mask,omitempty"`
}

// MaskFigures is a result's mask verdict without its per-point detail.
type MaskFigures struct {
	Name          string   `json:"name,omitempty"`
	Pass          bool     `json:"pass"`
	WorstMarginDB *float64 `json:"worst_margin_db"`
	WorstHz       *float64 `json:"worst_hz"`
	WorstLimit    string   `json:"worst_limit,omitempty"`
}

// Verdict is "pass" or "fail" for a run checked against a mask, ""
// otherwise.
func (f *Figures) Verdict() string {
	switch {
	case f == nil || f.Mask == nil:
		return ""
	case f.Mask.Pass:
		return "pass"
	}
	return "fail"
}

// FiguresOf reads the figures of a result document; the corners may be
// at its top level or in an object one level down (see corners). A
// document that is not a JSON object has none.
func FiguresOf(data []byte) *Figures {
	var doc struct {
		LowUHz    *float64 `json:"low_u_hz"`
		HighUHz   *float64 `json:"high_u_hz"`
		PeakingDB *float64 `json:"peaking_db"`
		Mask      *struct {
			Name          string   `json:"name"`
			Pass          bool     `json:"pass"`
			WorstMarginDB *float64 `json:"worst_margin_db"`
			WorstHz       *float64 `json:"worst_hz"`
			WorstLimit    string   `json:"worst_limit"`
		} `json:"mask"`
	}
	if json.Unmarshal(data, &doc) != nil {
		return nil
	}
	f := &Figures{LowUHz: finite(doc.LowUHz), HighUHz: finite(doc.HighUHz), PeakingDB: finite(doc.PeakingDB)}
	f.LowHz, f.HighHz = corners(data)
	if m := doc.Mask; m != nil {
		f.Mask = &MaskFigures{Name: m.Name, Pass: m.Pass, WorstMarginDB: finite(m.WorstMarginDB),
			WorstHz: finite(m.WorstHz), WorstLimit: m.WorstLimit}
	}
	return f
}

func finite(v *float64) *float64 {
	if v == nil || math.IsNaN(*v) || math.IsInf(*v, 0) {
		return nil
	}
	return v
}

// recordResult fills m's figures from the run's result.json, when there
// is one.
func (r *Run) recordResult(m *Meta) {
	if data, err := readRegular(r.path(FileResult)); err == nil {
		m.Figures = FiguresOf(data)
	}
}
