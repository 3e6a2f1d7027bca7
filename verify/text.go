package verify

import (
	"fmt"
	"io"

	"soakfarm/estimate"
	soakv1 "soakfarm/proto/soak/v1"
)

// WriteText writes a verification for people: the hand estimate with the
// 3-D times beside it, each cross-check, the energy balance and the verdict.
func WriteText(w io.Writer, v *soakv1.Verification) error {
	if err := estimate.WriteText(w, v.GetEstimate(), v.GetMilestones()); err != nil {
		return err
	}
	var err error
	printf := func(format string, args ...any) {
		if err == nil {
			_, err = fmt.Fprintf(w, format, args...)
		}
	}
	printf("\nCross-check against exact solutions (%.1f s):\n", v.GetWallSeconds())
	for _, cc := range v.GetCrossChecks() {
		printf("  %-10s %.3g cells per Lc (job %.3g), Bi %.3g, Fo %.3g to %.3g: temperature error %.2g%% (%s, limit %g%%), energy-fraction error %.2g (%s, limit %g), %.1f s\n",
			cc.GetShape(), cc.GetCellsPerLc(), cc.GetJobCellsPerLc(), cc.GetBiotNumber(), cc.GetFourierFrom(), cc.GetFourierTo(),
			100*cc.GetTemperatureError().GetValue(), cc.GetTemperatureError().GetStatus(), 100*cc.GetTemperatureError().GetLimit(),
			cc.GetEnergyError().GetValue(), cc.GetEnergyError().GetStatus(), cc.GetEnergyError().GetLimit(), cc.GetWallSeconds())
		for _, n := range cc.GetNotes() {
			printf("             %s\n", n)
		}
	}
	eb := v.GetEnergyBalance()
	printf("  job energy imbalance %.2g (%s, limit %g)\n", eb.GetValue(), eb.GetStatus(), eb.GetLimit())
	printf("VERDICT: %s\n", v.GetVerdict())
	for _, r := range v.GetReasons() {
		printf("  - %s\n", r)
	}
	return err
}
