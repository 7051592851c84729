package analysis

// reportBudget prints the corners' budgets and, when present, the Monte
// Carlo intervals.
func (r *Result) reportBudget(p func(format string, a ...any)) {
	table := func(name string, hz, uHz *float64, rows []BudgetEntry, mc *MonteCarloInterval) {
		if len(rows) == 0 || hz == nil {
			return
		}
		if mc != nil && mc.GUM != nil {
			u := mc.GUM.UHz
			uHz = &u
		}
		p("%s budget (k = 1 contributions):", name)
		p("  %-30s %-12s %12s %-9s %14s %14s", "component", "distribution", "u", "unit", "sensitivity", "contribution")
		for _, e := range rows {
			p("  %-30s %-12s %12.4g %-9s %14.4g %14s", e.Name, e.Distribution, e.U, e.Unit, e.Sensitivity, FormatHz(e.ContributionHz, 3))
		}
		if uHz != nil {
			p("  %-30s %s (k = %g)", "expanded", FormatHz(*uHz, 3), r.CoverageFactor)
		}
	}
	var lowMC, highMC *MonteCarloInterval
	if r.MonteCarlo != nil {
		lowMC, highMC = r.MonteCarlo.Low, r.MonteCarlo.High
	}
	table("low corner", r.LowHz, r.LowUHz, r.LowBudget, lowMC)
	table("high corner", r.HighHz, r.HighUHz, r.HighBudget, highMC)
	iv := func(name string, v *MonteCarloInterval, uHz *float64) {
		if v == nil {
			return
		}
		p("%-13s Monte Carlo 95 %% interval %s to %s (%d trials, %d lost)", name+":", FormatHz(v.Low95Hz, 5), FormatHz(v.High95Hz, 5), v.Trials, v.Lost)
		if ck := v.GUM; ck != nil && uHz != nil {
			switch {
			case ck.Validation.Pass:
				p("%-13s the budget's interval is validated (JCGM 101:2008 §8, δ %s)", "", FormatHz(ck.Validation.DeltaHz, 2))
			case ck.Adopted:
				p("%-13s the budget's interval is not validated (JCGM 101:2008 §8: ends off by %s and %s, δ %s): U is the Monte Carlo interval's, %s",
					"", FormatHz(ck.Validation.DLowHz, 2), FormatHz(ck.Validation.DHighHz, 2), FormatHz(ck.Validation.DeltaHz, 2), FormatHz(*uHz, 3))
			default:
				p("%-13s the budget's interval is not validated (JCGM 101:2008 §8: ends off by %s and %s, δ %s); U kept",
					"", FormatHz(ck.Validation.DLowHz, 2), FormatHz(ck.Validation.DHighHz, 2), FormatHz(ck.Validation.DeltaHz, 2))
			}
		}
	}
	iv("low corner", lowMC, r.LowUHz)
	iv("high corner", highMC, r.HighUHz)
}
