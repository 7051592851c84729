package analysis

// reportBudget prints the corners' budgets and, when present, the Monte
// Carlo intervals.
func (r *Result) reportBudget(p func(format string, a ...any)) {
	table := func(name string, hz, uHz *float64, rows []BudgetEntry) {
		if len(rows) == 0 || hz == nil {
			return
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
	table("low corner", r.LowHz, r.LowUHz, r.LowBudget)
	table("high corner", r.HighHz, r.HighUHz, r.HighBudget)
	if mc := r.MonteCarlo; mc != nil {
		iv := func(name string, v *MonteCarloInterval) {
			if v == nil {
				return
			}
			p("%-13s Monte Carlo 95 %% interval %s to %s (%d trials, %d lost)", name+":", FormatHz(v.Low95Hz, 5), FormatHz(v.High95Hz, 5), v.Trials, v.Lost)
		}
		iv("low corner", mc.Low)
		iv("high corner", mc.High)
	}
}
