package cli

import (
	"encoding/json"
	"fmt"

	"github.com/spf13/cobra"

	"soakfarm/internal/bench"
	"soakfarm/mesh"
)

func newBenchCmd(s streams) *cobra.Command {
	var (
		only, part, triadMiB, repeat int
		asJSON                       bool
	)
	cmd := &cobra.Command{
		Use:   "bench",
		Short: "Time the solver against a plain reference solver and this machine's memory bandwidth",
		Long: "Times one implicit step of a block of 1 mm steel-like cells (64³, 128³ and 160³) at cell Fourier\n" +
			"numbers 20 and 2000, and a whole cooling run of a ball with a through bore, each with the multigrid\n" +
			"solver and with plain Jacobi-preconditioned CG in the same run. Prints iterations and seconds per step,\n" +
			"cell·iterations per second, the solver's memory traffic against a triad (measured first and after\n" +
			"every case, each case against the higher either side of it), the V-cycles' traffic counted per pass\n" +
			"and as their fused sweeps make it, and memory per cell. Threads follow the CPUs the process may use.\n" +
			"On a shared machine, compare the ratios: both solvers run in the same process within seconds of\n" +
			"each other.",
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			if only != 0 && only < mesh.MinCellsAcross {
				return withCode(ExitUsage, fmt.Errorf("--only: a block needs at least %d cells along its edge, got %d", mesh.MinCellsAcross, only))
			}
			if part < 0 || (part > 0 && part < mesh.MinCellsAcross) {
				return withCode(ExitUsage, fmt.Errorf("--part: 0 or at least %d cells across, got %d", mesh.MinCellsAcross, part))
			}
			if triadMiB < 1 {
				return withCode(ExitUsage, fmt.Errorf("--triad-size: must be at least 1 MiB, got %d", triadMiB))
			}
			if repeat < 1 {
				return withCode(ExitUsage, fmt.Errorf("--repeat: must be at least 1, got %d", repeat))
			}
			opt := bench.Options{PartCells: part, TriadElements: triadMiB << 20 / 8, Repeat: repeat}
			if part == 0 {
				opt.PartCells = -1
			}
			if only != 0 {
				opt.Sizes = []int{only}
			}
			progress := func(r bench.Result) error {
				_, err := fmt.Fprintf(s.err, "%s at cell Fourier number %.4g: %.3f s per step, %.3f s by the reference\n",
					r.Case, r.CellFourier, r.SecondsPerStep, r.ReferenceSecondsPerStep)
				return err
			}
			results, err := bench.Run(cmd.Context(), opt, progress)
			if err != nil {
				return withCode(ExitFailure, err)
			}
			if asJSON {
				enc := json.NewEncoder(s.out)
				enc.SetIndent("", "  ")
				err = enc.Encode(results)
			} else {
				err = bench.WriteText(s.out, results)
			}
			if err != nil {
				return withCode(ExitFailure, err)
			}
			return nil
		},
	}
	f := cmd.Flags()
	f.IntVar(&only, "only", 0, "time only the block of this many cells along its edge")
	f.IntVar(&part, "part", 100, "cells across the ball with a bore timed over a whole run; 0 leaves it out")
	f.IntVar(&triadMiB, "triad-size", 128, "MiB per array of the bandwidth triad (three arrays)")
	f.IntVar(&repeat, "repeat", 2, "times each solver takes each block step and the part's whole run; the fastest counts")
	f.BoolVar(&asJSON, "json", false, "print a JSON array, one object per case")
	return cmd
}
