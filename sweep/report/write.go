package report

import (
	"fmt"
	"io"
	"math"
	"sort"
	"strings"

	"rolloff/sweep/analysis"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
)

// Safety is the safety statement every report ends with.
const Safety = "Safety: this measurement put a signal into a circuit that may be connected to mains or to high voltages. " +
	"Before touching the circuit, switch the generator output off at the instrument and check it yourself. " +
	"Know where every ground goes; check the voltage, power and category ratings of every instrument, probe and lead; " +
	"keep the bench's amplitude limit at what the DUT input may safely take. " +
	"This report does not make a set-up safe: follow local electrical codes and leave work on mains-connected equipment to people trained for it."

// Write writes the report of in as a PDF on paper: one page where it
// fits, more when the content (a long bench, long notes) needs them.
func Write(w io.Writer, in *Input, paper Paper) error {
	title := "Frequency response report"
	d := NewDoc(paper, title+" "+in.RunID, in.Measured, func(d *Doc, page int) { footer(d, in, page) })
	header(d, in)
	d.Y += 2
	d.Columns(8, func(x, w float64) { unitBlock(d, in, x, w) }, func(x, w float64) { benchBlock(d, in, x, w) })
	d.Y += 1.5
	d.Heading(d.Left, d.Right-d.Left, "Plan")
	d.Font(false, bodyPt, inkText)
	d.Para(d.Left, d.Right-d.Left, PlanLine(in.Plan), 2)
	d.Y += 1.5
	plotBlock(d, in)
	d.Y += 1
	d.Columns(8, func(x, w float64) { figuresBlock(d, in, x, w) }, func(x, w float64) { verdictBlock(d, in, x, w) })
	if strings.TrimSpace(in.Notes) != "" {
		d.Y += 1.5
		d.Heading(d.Left, d.Right-d.Left, "Notes")
		d.Font(false, bodyPt, inkText)
		d.Para(d.Left, d.Right-d.Left, in.Notes, 12)
	}
	return d.Output(w)
}

// header writes the title, the design and the verdict box.
func header(d *Doc, in *Input) {
	boxW, boxH := 46.0, 17.0
	x := d.Left
	w := d.Right - d.Left - boxW - 4
	d.Font(true, 15, inkText)
	d.Text(x, d.Y+5.5, "Frequency response report")
	y := d.Y + 7.5
	d.Font(true, 10.5, inkText)
	lh := d.LineH()
	design := in.Design
	if design == "" {
		design = "(no design name)"
	}
	for _, l := range d.Wrap(design, w, 2) {
		d.Text(x, y+lh*0.8, l)
		y += lh
	}
	d.Font(false, bodyPt, inkMuted)
	unit := "unit " + orDash(in.Unit)
	if in.Batch != "" {
		unit += " · batch " + in.Batch
	}
	for _, l := range d.Wrap(unit, w, 2) {
		d.Text(x, y+d.LineH()*0.8, l)
		y += d.LineH()
	}

	// The verdict box: black with white text on a failure, outlined on a
	// pass, grey when no mask was checked.
	bx, by := d.Right-boxW, d.Y
	p := d.pdf
	word, sub := "NO MASK", "no limit mask checked"
	fill := false
	var v *analysis.MaskVerdict
	if in.Result != nil {
		v = in.Result.Mask
	}
	switch {
	case in.Result == nil:
		word, sub = "NO FIGURES", "the response could not be analysed"
	case v != nil && v.Pass:
		word = "PASS"
	case v != nil:
		word, fill = "FAIL", true
	}
	if v != nil {
		sub = fmt.Sprintf("%d of %d points outside", v.Failed, v.Checked)
		if v.WorstMarginDB != nil {
			sub = fmt.Sprintf("worst margin %s dB at %s", signedDB(*v.WorstMarginDB, 2), analysis.FormatHz(*v.WorstHz, 4))
		}
	}
	p.SetLineWidth(0.6)
	p.SetDashPattern(nil, 0)
	p.SetDrawColor(0, 0, 0)
	if fill {
		p.SetFillColor(0, 0, 0)
		p.Rect(bx, by, boxW, boxH, "FD")
	} else {
		grey := inkText
		if v == nil {
			grey = inkRule
		}
		p.SetDrawColor(grey, grey, grey)
		p.Rect(bx, by, boxW, boxH, "D")
	}
	ink := inkText
	switch {
	case fill:
		ink = 255
	case v == nil:
		ink = inkMuted
	}
	size := 20.0
	if len(word) > 4 {
		size = 13
	}
	d.Font(true, size, ink)
	d.Text(bx+(boxW-d.Width(word))/2, by+10, word)
	d.Font(false, smallPt, ink)
	for i, l := range d.Wrap(sub, boxW-3, 1) {
		d.Text(bx+(boxW-d.Width(l))/2, by+14.2+float64(i)*d.LineH(), l)
	}
	d.Y = math.Max(y, by+boxH) + 1
	d.Rule(d.Left, d.Right-d.Left, 0.5, inkText)
	d.Y += 0.5
}

func unitBlock(d *Doc, in *Input, x, w float64) {
	d.Heading(x, w, "Unit")
	when := "—"
	if !in.Measured.IsZero() {
		when = in.Measured.UTC().Format("2006-01-02 15:04:05 UTC")
	}
	d.Fields(x, w, 22, []Row{
		{"design", orDash(in.Design)},
		{"serial number", orDash(in.Unit)},
		{"batch", orDash(in.Batch)},
		{"operator", orDash(in.Operator)},
		{"measured", when},
		{"run", orDash(in.RunID)},
		{"software", orDash(in.Software)},
	}, 2)
}

func benchBlock(d *Doc, in *Input, x, w float64) {
	d.Heading(x, w, "Bench")
	var rows []Row
	if in.Bench != "" {
		rows = append(rows, Row{"bench", in.Bench})
	}
	for _, it := range in.Instruments {
		id := it.Identity
		var s string
		if id.Manufacturer != "" || id.Model != "" {
			s = strings.TrimSpace(id.Manufacturer + " " + id.Model)
			s += ", serial " + orDash(id.Serial)
			if id.Firmware != "" {
				s += ", firmware " + id.Firmware
			}
		} else {
			s = "no identity (not a SCPI instrument)"
		}
		if it.Profile != "" {
			s += "; profile " + it.Profile
		}
		rows = append(rows, Row{it.Role, s})
	}
	if len(in.Instruments) == 0 {
		rows = append(rows, Row{"instruments", "not recorded"})
	}
	rows = append(rows, Row{"ranges used", RangesUsed(in.Points)})
	d.Fields(x, w, 19, rows, 3)
}

// RangesUsed lists the converter ranges the points were read on, in the
// order first used, with their point counts.
func RangesUsed(pts []point.Point) string {
	type rc struct {
		name string
		n    int
	}
	var order []*rc
	by := map[string]*rc{}
	for _, p := range pts {
		name := p.Range
		if name == "" {
			name = fmt.Sprintf("range %d", p.RangeIndex)
		}
		r := by[name]
		if r == nil {
			r = &rc{name: name}
			by[name] = r
			order = append(order, r)
		}
		r.n++
	}
	if len(order) == 0 {
		return "—"
	}
	parts := make([]string, len(order))
	for i, r := range order {
		unit := "points"
		if r.n == 1 {
			unit = "point"
		}
		parts[i] = fmt.Sprintf("%s (%d %s)", r.name, r.n, unit)
	}
	return strings.Join(parts, ", ")
}

// PlanLine sums a plan up in one line.
func PlanLine(p *plan.Plan) string {
	if p == nil {
		return "plan not available"
	}
	f := p.Frequencies
	var parts []string
	lo, hi, n := f.StartHz, f.StopHz, 0
	if fs, err := p.Freqs(); err == nil && len(fs) > 0 {
		n = len(fs)
		lo, hi = math.Inf(1), math.Inf(-1)
		for _, q := range fs {
			lo, hi = math.Min(lo, q.Hz), math.Max(hi, q.Hz)
		}
	}
	switch f.Spacing {
	case plan.SpacingLog:
		if f.PointsPerDecade > 0 {
			parts = append(parts, fmt.Sprintf("log, %d points a decade", f.PointsPerDecade))
		} else {
			parts = append(parts, "log")
		}
	case plan.SpacingBands:
		parts = append(parts, fmt.Sprintf("1/%d-octave bands", f.BandsPerOctave))
	default:
		parts = append(parts, f.Spacing)
	}
	span := fmt.Sprintf("%s to %s", analysis.FormatHz(lo, 4), analysis.FormatHz(hi, 4))
	if n > 0 {
		span += fmt.Sprintf(" (%d points", n)
		if f.Descending {
			span += ", descending"
		}
		span += ")"
	}
	parts = append(parts, span, fmt.Sprintf("%s Vrms", trimG(p.Level.Vrms)))
	parts = append(parts, "ranging "+p.Ranging.Strategy)
	if p.Settle.Tolerance > 0 {
		parts = append(parts, fmt.Sprintf("settle %s %% × %d readings", trimG(100*p.Settle.Tolerance), p.Settle.Readings))
	}
	parts = append(parts, "reference "+analysis.FormatHz(p.ReferenceHz, 4))
	if p.Refine.Enabled {
		parts = append(parts, fmt.Sprintf("corners refined at %s dB to %s %%", DB(p.Refine.LevelDB, 2), trimG(100*p.Refine.ResolutionRel)))
	}
	if p.Normalize.ThroughRun != "" {
		parts = append(parts, "normalised by through run "+p.Normalize.ThroughRun)
	}
	return strings.Join(parts, "; ")
}

func trimG(v float64) string {
	return strings.TrimRight(strings.TrimRight(fmt.Sprintf("%.4f", v), "0"), ".")
}

func orDash(s string) string {
	if strings.TrimSpace(s) == "" {
		return "—"
	}
	return s
}

// signedDB formats a level difference with its sign: "+0.12", "−1.30".
func signedDB(v float64, dec int) string {
	s := DB(v, dec)
	if !strings.HasPrefix(s, "−") {
		s = "+" + s
	}
	return s
}

func figuresBlock(d *Doc, in *Input, x, w float64) {
	d.Heading(x, w, "Figures")
	r := in.Result
	if r == nil {
		d.Font(false, bodyPt, inkText)
		why := in.AnalysisErr
		if why == "" {
			why = "no analysis"
		}
		d.Para(x, w, fmt.Sprintf("No figures: %s. %d points measured.", why, len(in.Points)), 4)
		return
	}
	k := fmt.Sprintf(" (k = %g)", r.CoverageFactor)
	corner := func(hz, u, beyond *float64, low bool) string {
		switch {
		case hz != nil && u != nil && *u > 0:
			return analysis.FormatWithU(*hz, *u) + k
		case hz != nil:
			return analysis.FormatHz(*hz, 4) + " (uncertainty unknown)"
		case low && r.DCCoupled:
			return "none: DC-coupled (flat down to " + analysis.FormatHz(*beyond, 4) + ")"
		case low:
			return "below the sweep (no crossing above " + analysis.FormatHz(*beyond, 4) + ")"
		default:
			return "above the sweep (no crossing below " + analysis.FormatHz(*beyond, 4) + ")"
		}
	}
	ref := fmt.Sprintf("%s dB ± %.3f dB%s at %s", DB(r.ReferenceGainDB, 3), r.CoverageFactor*r.ReferenceUDB, k, analysis.FormatHz(r.ReferenceHz, 4))
	switch r.ReferenceMode {
	case analysis.RefMax:
		ref += " (passband maximum)"
	case analysis.RefBand:
		ref = fmt.Sprintf("%s dB (mean over %s to %s)", DB(r.ReferenceGainDB, 3), analysis.FormatHz(r.ReferenceBandHz[0], 4), analysis.FormatHz(r.ReferenceBandHz[1], 4))
	}
	if r.Through {
		ref += ", normalised by a through run"
	}
	rows := []Row{
		{"reference", ref},
		{"corner level", fmt.Sprintf("%s dB (gain %s dB)", DB(r.LevelDB, 4), DB(r.ThresholdDB, 3))},
		{"low corner", corner(r.LowHz, r.LowUHz, r.LowBeyondHz, true)},
		{"high corner", corner(r.HighHz, r.HighUHz, r.HighBeyondHz, false)},
	}
	if r.BandwidthHz != nil {
		bw := analysis.FormatHz(*r.BandwidthHz, 4)
		if r.CentreHz != nil {
			bw += ", geometric centre " + analysis.FormatHz(*r.CentreHz, 4)
		} else {
			bw += " (from DC)"
		}
		rows = append(rows, Row{"bandwidth", bw})
	}
	rows = append(rows, Row{"peaking", fmt.Sprintf("%s dB at %s", signedDB(r.PeakingDB, 3), analysis.FormatHz(r.PeakingHz, 4))})
	if r.FlatnessDB != nil {
		rows = append(rows, Row{"flatness", fmt.Sprintf("%.3f dB peak to peak, %s to %s", *r.FlatnessDB, analysis.FormatHz(r.FlatnessSpanHz[0], 4), analysis.FormatHz(r.FlatnessSpanHz[1], 4))})
	}
	slope := func(name string, s *analysis.Slope) {
		if s != nil {
			rows = append(rows, Row{name, fmt.Sprintf("%s dB/decade (about order %d)", signedDB(s.DBPerDecade, 1), s.Order)})
		}
	}
	slope("roll-off low", r.SlopeLow)
	slope("roll-off high", r.SlopeHigh)
	pts := fmt.Sprintf("%d measured, %d used", r.Points, r.Included)
	if n := len(r.Excluded); n > 0 {
		pts += fmt.Sprintf(", %d flagged and left out (%s)", n, flagSummary(r.Excluded))
	}
	rows = append(rows, Row{"points", pts}, Row{"corners from", r.CornerSource})
	d.Fields(x, w, 21, rows, 3)
}

// flagSummary counts the reasons points were left out: "3 under-range,
// 1 clipped".
func flagSummary(ex []analysis.ExcludedPoint) string {
	n := map[string]int{}
	for _, e := range ex {
		for _, r := range e.Reasons {
			n[r]++
		}
	}
	keys := make([]string, 0, len(n))
	for k := range n {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	parts := make([]string, len(keys))
	for i, k := range keys {
		parts[i] = fmt.Sprintf("%d %s", n[k], k)
	}
	return strings.Join(parts, ", ")
}

func verdictBlock(d *Doc, in *Input, x, w float64) {
	r := in.Result
	d.Heading(x, w, "Model")
	d.Font(false, bodyPt, inkText)
	switch {
	case r == nil:
		d.Para(x, w, "no model: the response could not be analysed", 2)
	case r.Model == nil:
		d.Para(x, w, "no model was fitted", 2)
	default:
		m := r.Model
		use := "not used for the figures"
		if m.Accepted {
			use = "used for the corners"
		}
		d.Para(x, w, fmt.Sprintf("Behaves like %s, gain %s dB; %s: %s.", m.Description, DB(m.GainDB, 2), use, m.Reason), 5)
	}
	d.Y += 1.5
	d.Heading(x, w, "Mask")
	d.Font(false, bodyPt, inkText)
	switch {
	case r == nil || r.Mask == nil:
		d.Para(x, w, "No limit mask was checked: give one in the plan's [mask] table or with rolloff report --mask FILE.", 2)
	default:
		v := r.Mask
		name := v.Name
		if name == "" {
			name = v.File
		}
		word := "PASS"
		if !v.Pass {
			word = "FAIL"
		}
		s := fmt.Sprintf("%s against %q: %d points checked, %d outside.", word, name, v.Checked, v.Failed)
		if v.WorstMarginDB != nil {
			s += fmt.Sprintf(" Worst margin %s dB at %s (%s limit).", signedDB(*v.WorstMarginDB, 3), analysis.FormatHz(*v.WorstHz, 4), v.WorstLimit)
		}
		if v.Checked == 0 {
			s += " The mask covers no measured point, which fails."
		}
		d.Para(x, w, s, 4)
	}
	d.Y += 1.5
	d.Heading(x, w, "Uncertainty")
	d.Font(false, bodyPt, inkText)
	d.Para(x, w, BudgetLine(in.Points, r), 9)
	if r != nil && r.Drift != nil {
		if line := r.Drift.Line(); line != "" {
			d.Font(r.Drift.Flagged, bodyPt, inkText)
			d.Para(x, w, "Drift check: "+line+".", 3)
		}
	}
}

// BudgetLine sums up the points' uncertainty budgets (JCGM 100:2008):
// the median and largest expanded uncertainty of a point's gain and the
// median of each contribution.
func BudgetLine(pts []point.Point, r *analysis.Result) string {
	var exp, conv, dcv, typeA []float64
	var worstHz float64
	worst := -1.0
	for _, p := range pts {
		if p.Excluded() {
			continue
		}
		b := analysis.PointBudget(p)
		exp = append(exp, b.ExpandedDB)
		conv = append(conv, b.ConverterRel)
		dcv = append(dcv, b.VoltmeterRel)
		typeA = append(typeA, b.TypeARel)
		if b.ExpandedDB > worst {
			worst, worstHz = b.ExpandedDB, p.FreqHz
		}
	}
	if len(exp) == 0 {
		return "No point has an uncertainty budget."
	}
	k := analysis.CoverageFactor
	s := fmt.Sprintf("Gain of a point (k = %g): median ± %.3f dB, largest ± %.3f dB at %s. ", k, median(exp), worst, analysis.FormatHz(worstHz, 4))
	s += fmt.Sprintf("Standard contributions, median: converter specification %.3f %%, voltmeter specification %.3f %%, reading scatter %.3f %% (JCGM 100:2008). ",
		100*median(conv), 100*median(dcv), 100*median(typeA))
	s += "The generator amplitude is not included (a through run calibrates it out)."
	if r != nil && r.Through {
		s += " This run was normalised by one."
	}
	if r != nil {
		s += cornerBudgetLine("Low corner", r.LowHz, r.LowUHz, r.LowBudget, mcSide(r, 0))
		s += cornerBudgetLine("High corner", r.HighHz, r.HighUHz, r.HighBudget, mcSide(r, 1))
	}
	return s
}

func mcSide(r *analysis.Result, side int) *analysis.MonteCarloInterval {
	if r.MonteCarlo == nil {
		return nil
	}
	if side == 0 {
		return r.MonteCarlo.Low
	}
	return r.MonteCarlo.High
}

// cornerBudgetLine sums up one corner's budget: its largest contribution
// and the Monte Carlo check (JCGM 101:2008 §8).
func cornerBudgetLine(name string, hz, uHz *float64, rows []analysis.BudgetEntry, mc *analysis.MonteCarloInterval) string {
	if hz == nil || uHz == nil || len(rows) == 0 {
		return ""
	}
	sorted := append([]analysis.BudgetEntry(nil), rows...)
	sort.SliceStable(sorted, func(i, j int) bool { return sorted[i].ContributionHz > sorted[j].ContributionHz })
	s := fmt.Sprintf(" %s: mostly %s (%s)", name, sorted[0].Name, analysis.FormatHz(sorted[0].ContributionHz, 2))
	if mc != nil && mc.GUM != nil {
		switch {
		case mc.GUM.Validation.Pass:
			s += ", validated by Monte Carlo"
		case mc.GUM.Adopted:
			s += fmt.Sprintf(", U from the Monte Carlo interval (budget's %s)", analysis.FormatHz(mc.GUM.UHz, 2))
		}
	}
	return s + "."
}

func median(v []float64) float64 {
	s := append([]float64(nil), v...)
	sort.Float64s(s)
	n := len(s)
	if n%2 == 1 {
		return s[n/2]
	}
	return (s[n/2-1] + s[n/2]) / 2
}

// footer writes the safety statement and the page line below d.Bottom.
func footer(d *Doc, in *Input, page int) {
	y := d.Bottom + 3
	d.Y = y
	d.Rule(d.Left, d.Right-d.Left, 0.25, inkRule)
	d.Font(false, smallPt, inkMuted)
	lh := d.LineH()
	y += 0.6
	for _, l := range d.Wrap(Safety, d.Right-d.Left, 4) {
		d.Text(d.Left, y+lh*0.8, l)
		y += lh
	}
	d.Font(false, smallPt, inkMuted)
	line := fmt.Sprintf("%s · run %s · %s", in.Software, orDash(in.RunID), orDash(in.Unit))
	d.Text(d.Left, d.H-marginMM+1, d.Wrap(line, d.Right-d.Left-25, 1)[0])
	d.TextRight(d.Right, d.H-marginMM+1, fmt.Sprintf("page %d", page))
	d.Y = marginMM
}
