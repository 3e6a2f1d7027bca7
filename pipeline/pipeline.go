// Package pipeline runs one job from spec to results: it builds the mesh,
// sets up and runs the solver, reads probes, detects milestones, and writes
// the result files. `soak run` and the farm's workers both call Run, so a
// local result and a farm result come from the same code.
package pipeline

import (
	"context"

	soakv1 "soakfarm/proto/soak/v1"
)

// Options are the caller's hooks into a run.
type Options struct {
	// Progress, when set, is called after every step with the running
	// figures (at most a few times a second is the caller's business).
	Progress func(*soakv1.JobProgress)
	// Milestone, when set, is called once when a milestone is reached.
	Milestone func(*soakv1.MilestoneReached)
	// Threads bounds the solver's goroutines; 0 uses every core.
	Threads int
	// SpecDir is the folder of the spec file, against which STL files the
	// spec names without carrying their data are read (local runs only).
	SpecDir string

	// skipChecks leaves out the verification, for the pipeline's own
	// second solve when refining.
	skipChecks bool
}

// Run computes spec and writes its result files into outDir (created if
// missing). It returns the summary also written to outDir/summary.json.
// The spec must already have passed jobspec validation.
func Run(ctx context.Context, spec *soakv1.JobSpec, outDir string, opt Options) (*soakv1.Summary, error) {
	return run(ctx, spec, outDir, opt)
}
