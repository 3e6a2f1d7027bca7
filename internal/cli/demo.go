package cli

import (
	"context"
	"fmt"
	"log/slog"
	"os"
	"path/filepath"
	"strings"
	"time"

	"github.com/spf13/cobra"

	"soakfarm/examples/demo"
	"soakfarm/farmclient"
	"soakfarm/internal/localfarm"
	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/report"
)

func newDemoCmd(s streams) *cobra.Command {
	var (
		outDir  string
		workers int
	)
	cmd := &cobra.Command{
		Use:   "demo",
		Short: "Run a small batch of demo jobs on a farm inside this process",
		Long: "Starts a farm in this process (scheduler, queue and workers; its data in a temporary folder),\n" +
			"submits a few invented heat-treatment cases, shows their progress, and writes each job's result\n" +
			"files into --out/<case>/. The cases are demo data: our own scenarios with rounded properties.",
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			if workers < 1 {
				return withCode(ExitUsage, fmt.Errorf("--workers: must be at least 1, got %d", workers))
			}
			return runDemo(cmd.Context(), s, outDir, workers)
		},
	}
	f := cmd.Flags()
	f.StringVarP(&outDir, "out", "o", "soak-demo", "folder for the jobs' result folders")
	f.IntVar(&workers, "workers", 2, "workers of the in-process farm")
	return cmd
}

func runDemo(ctx context.Context, s streams, outDir string, workers int) error {
	cases, err := demo.Cases()
	if err != nil {
		return withCode(ExitFailure, err)
	}
	dataDir, err := os.MkdirTemp("", "soak-demo-farm-")
	if err != nil {
		return withCode(ExitFailure, err)
	}
	defer os.RemoveAll(dataDir)

	logger := slog.New(slog.NewTextHandler(s.err, &slog.HandlerOptions{Level: slog.LevelWarn}))
	farm, err := localfarm.Start(ctx, localfarm.Config{DataDir: dataDir, Workers: workers, WorkerConcurrency: 1, Logger: logger})
	if err != nil {
		return withCode(ExitFailure, fmt.Errorf("starting the demo farm: %w", err))
	}
	defer func() {
		// Stop cleanly even after Ctrl-C cancelled ctx.
		stopCtx, cancel := context.WithTimeout(context.WithoutCancel(ctx), 20*time.Second)
		defer cancel()
		if err := farm.Close(stopCtx); err != nil {
			logger.Warn("stopping the demo farm", "err", err)
		}
	}()
	fmt.Fprintf(s.err, "demo farm at %s with %d workers; %d jobs of demo data (invented parts, rounded properties)\n",
		farm.GRPCAddr(), workers, len(cases))

	c, err := farmclient.Dial(ctx, farm.GRPCAddr())
	if err != nil {
		return withCode(ExitFailure, err)
	}
	defer c.Close()

	jobs := make([]*soakv1.Job, len(cases))
	for i, dc := range cases {
		job, _, err := c.Submit(ctx, dc.Spec, "")
		if err != nil {
			return withCode(ExitFailure, err)
		}
		jobs[i] = job
	}
	outcomes, err := followJobs(ctx, c, s.err, jobs)
	if err != nil {
		return err
	}
	for i, o := range outcomes {
		if o.state != soakv1.JobState_JOB_STATE_FINISHED {
			continue
		}
		dir := filepath.Join(outDir, cases[i].Slug)
		if _, err := fetchJob(ctx, c, o.id, dir); err != nil {
			return err
		}
		fmt.Fprintf(s.out, "%-26s %s [%s]  -> %s\n", cases[i].Slug, milestoneLine(o.summary), o.summary.GetVerification().GetVerdict(), dir)
	}
	fmt.Fprintf(s.out, "Each folder holds probes.csv, summary.json (with its verification), history.png and crosscheck.png.\nCAUTION: %s\n", report.Caution)
	return outcomeError(outcomes)
}

// milestoneLine lists a summary's milestone times on one line.
func milestoneLine(sum *soakv1.Summary) string {
	parts := make([]string, 0, len(sum.GetMilestones()))
	for _, m := range sum.GetMilestones() {
		if m.TimeS == nil {
			parts = append(parts, m.GetName()+" not reached")
		} else {
			parts = append(parts, fmt.Sprintf("%s %.0f s", m.GetName(), m.GetTimeS().GetValue()))
		}
	}
	if len(parts) == 0 {
		return fmt.Sprintf("ended at %.0f s", sum.GetEndTimeS())
	}
	return strings.Join(parts, ", ")
}
