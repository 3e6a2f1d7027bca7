package cli

import (
	"fmt"
	"path/filepath"

	"github.com/spf13/cobra"

	"soakfarm/estimate"
	"soakfarm/jobspec"
	"soakfarm/pipeline"
)

func newEstimateCmd(s streams) *cobra.Command {
	return &cobra.Command{
		Use:   "estimate SPEC",
		Short: "Hand estimates for a job in an instant, without a 3-D solve",
		Long: "Reads a job spec (YAML or JSON) and prints what hand methods give for it: Lc = V/As with the exposed\n" +
			"area, the Biot number, whether lumped capacitance holds, the time constant, and each milestone's time by\n" +
			"lumped capacitance and by the one-term series for the sphere of equal volume and the plane wall of equal\n" +
			"Lc. It says where a method does not apply and what it assumed.",
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			spec, err := loadSpec(args[0], jobspec.DefaultLimits())
			if err != nil {
				return err
			}
			solid, mat, err := pipeline.Part(spec, filepath.Dir(args[0]))
			if err != nil {
				return withCode(ExitUsage, fmt.Errorf("%s: %w", args[0], err))
			}
			e, err := estimate.New(spec, solid, mat, nil)
			if err != nil {
				return withCode(ExitUsage, fmt.Errorf("%s: %w", args[0], err))
			}
			fmt.Fprintf(s.out, "%s\n", spec.GetName())
			if err := estimate.WriteText(s.out, e.Hand, e.Hand.GetMilestones()); err != nil {
				return withCode(ExitFailure, err)
			}
			return nil
		},
	}
}
