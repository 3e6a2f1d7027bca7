package verify

import (
	"fmt"
	"math"
	"slices"
	"strings"

	"soakfarm/estimate"
	soakv1 "soakfarm/proto/soak/v1"
)

// coarseCellsAcross is the fewest cells across the part's smallest extent
// below which a failing cross-check is blamed on the grid by name.
const coarseCellsAcross = 10

// finding is one reason for the verdict.
type finding struct {
	verdict string
	reason  string
}

var verdictRank = map[string]int{Checked: 0, CheckWithCare: 1, NotTrustworthy: 2}

// verdict weighs the checks of v and returns the verdict and its reasons,
// most serious first.
func verdict(v *soakv1.Verification, job jobScale) (string, []string) {
	var found []finding
	for _, cc := range v.GetCrossChecks() {
		found = append(found, crossCheckFindings(cc, job)...)
	}
	if eb := v.GetEnergyBalance(); eb.GetStatus() != Pass {
		severity := CheckWithCare
		if !(eb.GetValue() <= 10*eb.GetLimit()) {
			severity = NotTrustworthy
		}
		found = append(found, finding{severity, fmt.Sprintf(
			"energy does not balance: the job's stored energy and boundary heat differ by %.2g of the change (limit %g); the solve did not converge well, try a smaller max_change_k",
			eb.GetValue(), eb.GetLimit())})
	}
	found = append(found, lumpedFindings(v)...)
	if len(found) == 0 {
		var parts []string
		for _, cc := range v.GetCrossChecks() {
			parts = append(parts, fmt.Sprintf("%s %.2g%% and %.2g", cc.GetShape(),
				100*cc.GetTemperatureError().GetValue(), cc.GetEnergyError().GetValue()))
		}
		return Checked, []string{fmt.Sprintf(
			"cross-checks against exact solutions at the job's resolution are within limits (temperature error and energy-fraction error: %s); the energy balances (imbalance %.2g)",
			strings.Join(parts, "; "), v.GetEnergyBalance().GetValue())}
	}
	slices.SortStableFunc(found, func(a, b finding) int { return verdictRank[b.verdict] - verdictRank[a.verdict] })
	reasons := make([]string, len(found))
	for i, f := range found {
		reasons[i] = f.reason
	}
	return found[0].verdict, reasons
}

// crossCheckFindings reports the cross-check's failed checks, naming the
// likely cause.
func crossCheckFindings(cc *soakv1.CrossCheck, job jobScale) []finding {
	coarser := cc.GetCellsPerLc() < cc.GetJobCellsPerLc()*(1-1e-9)
	cause, remedy := "resolution too coarse (grid or time steps)", "; try more cells or a smaller max_change_k"
	switch {
	case coarser:
		cause, remedy = "cross-check inconclusive", "; it ran coarser than the job to stay cheap, so the job's own error is likely smaller"
	case job.cellsAcross < coarseCellsAcross:
		cause = fmt.Sprintf("grid too coarse (%.3g cells across the part's smallest extent, %.2g per Lc)", job.cellsAcross, job.cellsPerLc)
		remedy = "; use more cells across"
	}
	var out []finding
	for _, c := range []struct {
		what  string
		check *soakv1.Check
		unit  string
	}{
		{"temperature", cc.GetTemperatureError(), "of the initial-to-fluid difference"},
		{"energy fraction", cc.GetEnergyError(), "in Q/Qmax"},
	} {
		if c.check.GetStatus() == Pass {
			continue
		}
		severity := CheckWithCare
		if !coarser && !(c.check.GetValue() <= untrustworthyFactor*c.check.GetLimit()) {
			severity = NotTrustworthy
		}
		out = append(out, finding{severity, fmt.Sprintf("%s: the %s cross-check's %s error is %.2g %s (limit %g)%s",
			cause, cc.GetShape(), c.what, c.check.GetValue(), c.unit, c.check.GetLimit(), remedy)})
	}
	return out
}

// lumpedFindings flags 3-D milestone times far from a lumped answer that
// should hold: at Bi < 0.1 the part is near-uniform and lumped capacitance
// is close.
func lumpedFindings(v *soakv1.Verification) []finding {
	var out []finding
	for _, m := range v.GetMilestones() {
		if m.SolvedTimeS == nil {
			continue
		}
		for _, a := range m.GetAnswers() {
			if a.GetMethod() != estimate.MethodLumped || !a.GetApplies() || a.TimeS == nil {
				continue
			}
			if diff := math.Abs(m.GetSolvedTimeS()-a.GetTimeS()) / a.GetTimeS(); diff > lumpedDisagreement {
				out = append(out, finding{CheckWithCare, fmt.Sprintf(
					"milestone %s: the 3-D time %.4g s differs by %.0f%% from lumped capacitance (%.4g s), which should hold at Bi = %.2g; check the spec's exposure and probes",
					m.GetName(), m.GetSolvedTimeS(), 100*diff, a.GetTimeS(), v.GetEstimate().GetBiotNumber())})
			}
		}
	}
	return out
}
