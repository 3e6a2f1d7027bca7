package pipeline

import (
	"context"
	"fmt"
	"math"
	"os"
	"time"

	"google.golang.org/protobuf/proto"

	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/solver"
)

// Richardson extrapolation between the job's grid and one at half the cell
// size. The spatial scheme is second order, so with refinement ratio 2 the
// grid-independent value is f + (f − c)/(2² − 1). The spatial error band is
// the grid convergence index with the safety factor 3 recommended for two
// grids (P. J. Roache, Verification and Validation in Computational
// Science and Engineering, 1998, from memory): Fs·|f − c|/(2² − 1).
//
// Grid refinement alone leaves the time-step error, which the step control
// holds near a fixed fraction on both grids. A third solve on the job's
// grid with the other time scheme measures it: the first-order backward
// Euler and the second-order BDF2 differ by about backward Euler's own
// time error. A backward-Euler job's extrapolation is corrected by that
// difference; either way the difference is added to the band, which
// over-covers a BDF2 job.
const (
	refineRatio  = 2.0
	refineOrder  = 2.0
	refineSafety = 3.0
)

// refine solves spec again at half its cell size and extrapolates the
// milestone times and final probe values of both solves.
func refine(ctx context.Context, spec *soakv1.JobSpec, cellSize float64, coarse *soakv1.Summary, opt Options) (*soakv1.Refinement, error) {
	started := time.Now()
	fine := proto.Clone(spec).(*soakv1.JobSpec)
	fine.CellsAcross = nil
	fine.CellSizeM = proto.Float64(cellSize / refineRatio)
	fine.Refine = false
	fine.SnapshotsS = nil
	dir, err := os.MkdirTemp("", "soak-refine-")
	if err != nil {
		return nil, fmt.Errorf("refine: %w", err)
	}
	defer os.RemoveAll(dir)
	fineSum, err := run(ctx, fine, dir, Options{Threads: opt.Threads, SpecDir: opt.SpecDir, skipChecks: true})
	if err != nil {
		return nil, fmt.Errorf("refine at cell size %g m: %w", cellSize/refineRatio, err)
	}
	other := proto.Clone(spec).(*soakv1.JobSpec)
	other.Refine = false
	other.SnapshotsS = nil
	if other.TimeStepping == nil {
		other.TimeStepping = &soakv1.TimeStepping{}
	}
	jobScheme := other.TimeStepping.GetScheme()
	if jobScheme == solver.BDF2 {
		other.TimeStepping.Scheme = solver.BackwardEuler
	} else {
		other.TimeStepping.Scheme = solver.BDF2
	}
	otherSum, err := run(ctx, other, dir, Options{Threads: opt.Threads, SpecDir: opt.SpecDir, skipChecks: true})
	if err != nil {
		return nil, fmt.Errorf("refine with scheme %s: %w", other.TimeStepping.Scheme, err)
	}
	// timeShift estimates the job's time-step error: BDF2 − backward Euler
	// for a backward-Euler job, 0 (band only) for a BDF2 job.
	timeError := func(job, alt float64) (shift, band float64) {
		if jobScheme == solver.BDF2 {
			return 0, math.Abs(job - alt)
		}
		return alt - job, math.Abs(alt - job)
	}
	r := &soakv1.Refinement{
		CellSizeM: cellSize, FineCellSizeM: cellSize / refineRatio,
		Order: refineOrder, SafetyFactor: refineSafety,
		Notes: []string{
			"the spatial part of the band assumes the scheme's second-order convergence in space",
			"the time-step part of the band is the difference between backward Euler and BDF2 on the job's grid",
		},
	}
	for i, m := range coarse.GetMilestones() {
		fm := fineSum.GetMilestones()[i]
		v := &soakv1.RefinedValue{Name: m.GetName()}
		om := otherSum.GetMilestones()[i]
		if m.GetTimeS() != nil && fm.GetTimeS() != nil && om.GetTimeS() != nil {
			shift, band := timeError(m.GetTimeS().GetValue(), om.GetTimeS().GetValue())
			extrapolate(v, m.GetTimeS().GetValue(), fm.GetTimeS().GetValue(), shift, band)
		}
		r.Milestones = append(r.Milestones, v)
	}
	for i, p := range coarse.GetFinalProbes() {
		v := &soakv1.RefinedValue{Name: p.GetName()}
		shift, band := timeError(p.GetTempC(), otherSum.GetFinalProbes()[i].GetTempC())
		extrapolate(v, p.GetTempC(), fineSum.GetFinalProbes()[i].GetTempC(), shift, band)
		r.Probes = append(r.Probes, v)
	}
	if coarse.GetEndTimeS() != fineSum.GetEndTimeS() || coarse.GetEndTimeS() != otherSum.GetEndTimeS() {
		r.Notes = append(r.Notes, fmt.Sprintf("the two solves stopped at different times (%g s and %g s): final probe values are not comparable", coarse.GetEndTimeS(), fineSum.GetEndTimeS()))
	}
	r.WallSeconds = time.Since(started).Seconds()
	return r, nil
}

// extrapolate fills v from the coarse and fine values and the time-step
// correction and band.
func extrapolate(v *soakv1.RefinedValue, coarse, fine, timeShift, timeBand float64) {
	k := math.Pow(refineRatio, refineOrder) - 1
	v.Coarse, v.Fine = coarse, fine
	v.Extrapolated = fine + (fine-coarse)/k + timeShift
	v.ErrorBand = refineSafety*math.Abs(fine-coarse)/k + timeBand
	v.Available = true
}
