package cli

import (
	"errors"
	"fmt"
	"io"
	"path/filepath"
	"strconv"
	"strings"
	"time"

	"github.com/schollz/progressbar/v3"
	"github.com/spf13/cobra"

	"soakfarm/jobspec"
	"soakfarm/pipeline"
	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/report"
	"soakfarm/verify"
)

func newRunCmd(s streams) *cobra.Command {
	var (
		outDir    string
		maxMemory string
		threads   int
		quiet     bool
	)
	cmd := &cobra.Command{
		Use:   "run SPEC",
		Short: "Compute one job on this machine and write its result files",
		Long: "Reads a job spec (YAML or JSON), computes the part's transient temperature field, and writes\n" +
			"probes.csv, summary.json, history.png and any requested .vti snapshots into --out.",
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			lim := jobspec.DefaultLimits()
			if maxMemory != "" {
				b, err := parseBytes(maxMemory)
				if err != nil {
					return withCode(ExitUsage, fmt.Errorf("--max-memory: %w", err))
				}
				lim.MaxMemoryBytes = b
			}
			spec, err := loadSpec(args[0], lim)
			if err != nil {
				return err
			}
			if outDir == "" {
				outDir = "soak-out"
			}
			var bar *progressbar.ProgressBar
			opt := pipeline.Options{Threads: threads, SpecDir: filepath.Dir(args[0])}
			if !quiet {
				bar = newSimBar(s.err, spec.GetName(), spec.GetEndS())
				opt.Progress = func(p *soakv1.JobProgress) { updateSimBar(bar, p) }
				opt.Milestone = func(m *soakv1.MilestoneReached) {
					bar.Clear()
					fmt.Fprintf(s.err, "milestone %s reached at %.1f s\n", m.GetName(), m.GetTimeS())
				}
			}
			sum, err := pipeline.Run(cmd.Context(), spec, outDir, opt)
			if bar != nil {
				bar.Finish()
				fmt.Fprintln(s.err)
			}
			if err != nil {
				if errors.Is(err, cmd.Context().Err()) && cmd.Context().Err() != nil {
					return withCode(ExitCancelled, err)
				}
				return withCode(ExitFailure, err)
			}
			printSummary(s.out, sum, outDir)
			return nil
		},
	}
	f := cmd.Flags()
	f.StringVarP(&outDir, "out", "o", "", "folder for the result files (default ./soak-out)")
	f.StringVar(&maxMemory, "max-memory", "", "largest grid memory estimate to accept, e.g. 8GiB (default 4GiB)")
	f.IntVar(&threads, "threads", 0, "solver threads (default: every core this process may use)")
	f.BoolVarP(&quiet, "quiet", "q", false, "no progress bar")
	return cmd
}

// loadSpec reads and validates a spec file; problems become a usage error
// listing each one.
func loadSpec(path string, lim jobspec.Limits) (*soakv1.JobSpec, error) {
	spec, err := jobspec.Load(path)
	if err != nil {
		return nil, withCode(ExitUsage, err)
	}
	// STL files travel inside the spec, so a farm worker sees the same part
	// and validation knows the part's size.
	if err := jobspec.InlineFiles(spec, filepath.Dir(path)); err != nil {
		return nil, withCode(ExitUsage, fmt.Errorf("%s: %w", path, err))
	}
	if err := jobspec.Validate(spec, lim); err != nil {
		return nil, withCode(ExitUsage, fmt.Errorf("%s: the spec has problems:\n%w", path, err))
	}
	return spec, nil
}

// newSimBar makes a progress bar over simulated time.
func newSimBar(w io.Writer, name string, endS float64) *progressbar.ProgressBar {
	return progressbar.NewOptions64(int64(endS*1000),
		progressbar.OptionSetWriter(w),
		progressbar.OptionSetDescription(name),
		progressbar.OptionSetWidth(30),
		progressbar.OptionThrottle(200*time.Millisecond),
		progressbar.OptionShowElapsedTimeOnFinish(),
		progressbar.OptionClearOnFinish(),
	)
}

// updateSimBar moves a bar to a progress report: simulated time, the first
// probe and the energy fraction.
func updateSimBar(bar *progressbar.ProgressBar, p *soakv1.JobProgress) {
	desc := fmt.Sprintf("t=%.0f/%.0f s", p.GetSimTimeS(), p.GetEndS())
	if len(p.GetProbes()) > 0 {
		desc += fmt.Sprintf(" %s=%.1f°C", p.GetProbes()[0].GetName(), p.GetProbes()[0].GetTempC())
	}
	// max(0, ·) keeps "-0%" off the screen at the first step.
	desc += fmt.Sprintf(" energy %.0f%%", max(0, 100*p.GetEnergyFraction()))
	bar.Describe(desc)
	_ = bar.Set64(int64(p.GetSimTimeS() * 1000))
}

// printSummary is the final screen of a run or a fetched job.
func printSummary(w io.Writer, s *soakv1.Summary, dir string) {
	fmt.Fprintf(w, "%s: %s at %.6g s after %d steps (%d solver iterations, %.1f s wall)\n",
		s.GetName(), s.GetStopReason(), s.GetEndTimeS(), s.GetSteps(), s.GetSolverIterations(), s.GetWallSeconds())
	fmt.Fprintf(w, "  Biot number %.3g (Lc %.4g m), time constant %.4g s, energy imbalance %.2g\n",
		s.GetBiotNumber(), s.GetCharacteristicLengthM(), s.GetTimeConstantS(), s.GetEnergyImbalance())
	for _, m := range s.GetMilestones() {
		if m.TimeS == nil {
			fmt.Fprintf(w, "  milestone %-20s not reached\n", m.GetName())
		} else {
			fmt.Fprintf(w, "  milestone %-20s %10.1f s\n", m.GetName(), m.GetTimeS().GetValue())
		}
	}
	for _, p := range s.GetFinalProbes() {
		fmt.Fprintf(w, "  probe     %-20s %10.2f °C (%s)\n", p.GetName(), p.GetTempC(), p.GetPlacement())
	}
	fmt.Fprintf(w, "  part now %.2f to %.2f °C, energy fraction %.3f\n", s.GetFinalMinC(), s.GetFinalMaxC(), s.GetFinalEnergyFraction())
	if dir != "" {
		fmt.Fprintf(w, "  files in %s: %s\n", dir, strings.Join(s.GetArtifacts(), ", "))
		fmt.Fprintf(w, "  plot: %s\n", filepath.Join(dir, report.HistoryFile))
	}
	if r := s.GetRefinement(); r != nil {
		fmt.Fprintf(w, "  refinement to %.4g m cells (Richardson, order %g, safety factor %g, %.1f s):\n", r.GetFineCellSizeM(), r.GetOrder(), r.GetSafetyFactor(), r.GetWallSeconds())
		for _, v := range r.GetMilestones() {
			if v.GetAvailable() {
				fmt.Fprintf(w, "    milestone %-20s %10.1f ± %.1f s (job %.1f s, fine %.1f s)\n", v.GetName(), v.GetExtrapolated(), v.GetErrorBand(), v.GetCoarse(), v.GetFine())
			} else {
				fmt.Fprintf(w, "    milestone %-20s not reached on every grid\n", v.GetName())
			}
		}
		for _, v := range r.GetProbes() {
			fmt.Fprintf(w, "    probe     %-20s %10.2f ± %.2f °C (job %.2f, fine %.2f)\n", v.GetName(), v.GetExtrapolated(), v.GetErrorBand(), v.GetCoarse(), v.GetFine())
		}
		for _, n := range r.GetNotes() {
			fmt.Fprintf(w, "    note: %s\n", n)
		}
	}
	if v := s.GetVerification(); v.GetEstimate() != nil {
		fmt.Fprintln(w)
		if err := verify.WriteText(w, v); err != nil {
			fmt.Fprintf(w, "  (verification not shown: %v)\n", err)
		}
	} else if v != nil {
		fmt.Fprintf(w, "  verification: %s (%s)\n", v.GetVerdict(), strings.Join(v.GetReasons(), "; "))
	}
	fmt.Fprintf(w, "CAUTION: %s\n", s.GetCaution())
}

// parseBytes reads a size such as 512MiB, 4GiB, 2GB or a plain byte count.
func parseBytes(v string) (int64, error) {
	units := []struct {
		suffix string
		mult   int64
	}{{"TiB", 1 << 40}, {"GiB", 1 << 30}, {"MiB", 1 << 20}, {"KiB", 1 << 10}, {"TB", 1e12}, {"GB", 1e9}, {"MB", 1e6}, {"KB", 1e3}, {"B", 1}}
	s := strings.TrimSpace(v)
	mult := int64(1)
	for _, u := range units {
		if strings.HasSuffix(s, u.suffix) {
			s, mult = strings.TrimSpace(strings.TrimSuffix(s, u.suffix)), u.mult
			break
		}
	}
	x, err := strconv.ParseFloat(s, 64)
	if err != nil || x <= 0 {
		return 0, fmt.Errorf("want a positive size such as 8GiB, got %q", v)
	}
	return int64(x * float64(mult)), nil
}
