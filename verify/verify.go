// Package verify owns the check every result carries: the job's hand
// estimate beside its 3-D milestone times, a cross-check that runs the
// solver on a sphere and a plane wall with exact solutions at the job's own
// resolution and Fourier range, the job's energy balance, and a verdict
// ("checked", "check-with-care" or "not-trustworthy") with its reasons.
// The pipeline calls Run after a job's solve; the package does not depend
// on the pipeline.
package verify

import (
	"context"
	"fmt"
	"math"
	"time"

	"google.golang.org/protobuf/proto"

	"soakfarm/estimate"
	"soakfarm/mesh"
	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/solver"
)

// Verdicts, best first.
const (
	Checked        = "checked"
	CheckWithCare  = "check-with-care"
	NotTrustworthy = "not-trustworthy"
)

// Check statuses.
const (
	Pass = "pass"
	Warn = "warn"
)

// Limits of the checks. The cross-check limits match the accuracy the
// solver's own tests hold it to against exact solutions.
const (
	// TemperatureErrorLimit is the largest cross-check temperature error,
	// as a fraction of |initial − fluid|, that passes.
	TemperatureErrorLimit = 0.01
	// EnergyErrorLimit is the largest cross-check error in Q/Qmax that passes.
	EnergyErrorLimit = 0.01
	// EnergyImbalanceLimit is the largest energy imbalance of the job that
	// passes: the stored energy and the boundary heat must agree closely
	// whatever the grid, or the solve did not converge.
	EnergyImbalanceLimit = 1e-3
	// untrustworthyFactor: a check beyond this many times its limit makes
	// the result not trustworthy rather than one to check with care.
	untrustworthyFactor = 5
	// lumpedDisagreement is how far (relative) a 3-D milestone time may
	// differ from a lumped answer that applies before the verdict says so.
	lumpedDisagreement = 0.15
)

// Input is what Run needs from a job that has been solved.
type Input struct {
	Spec  *soakv1.JobSpec
	Solid mesh.Solid
	// CellSize is the job's grid cell edge, m.
	CellSize float64
	// Material is the job's material as the solver used it.
	Material solver.Material
	// Milestones are the 3-D results, matched to the spec's by name.
	Milestones []*soakv1.MilestoneResult
	// EnergyImbalance and EndTime (s) are the job's solver outcome.
	EnergyImbalance float64
	EndTime         float64
	// ExposedAreas, when set, is the true area each exposure entry covers
	// as the job's mesh found it (see estimate.New).
	ExposedAreas []float64
	// Threads bounds the cross-check solver's goroutines; 0 uses every core.
	Threads int
}

// Run verifies a solved job. It costs two small solves (a few seconds at
// most) next to the job's own.
func Run(ctx context.Context, in Input) (*soakv1.Verification, error) {
	started := time.Now()
	if in.Spec == nil || in.Solid == nil {
		return nil, fmt.Errorf("verify: input needs the spec and the solid")
	}
	if !(in.CellSize > 0) {
		return nil, fmt.Errorf("verify: cell size must be positive, got %g m", in.CellSize)
	}
	est, err := estimate.New(in.Spec, in.Solid, in.Material, in.ExposedAreas)
	if err != nil {
		return nil, fmt.Errorf("verify: estimate: %w", err)
	}
	v := &soakv1.Verification{Estimate: est.Hand, Milestones: withSolvedTimes(est.Hand.GetMilestones(), in.Milestones)}
	job := jobScale{
		cellsPerLc:  est.Hand.GetCharacteristicLengthM() / in.CellSize,
		cellsAcross: mesh.CellSizeFor(in.Solid, 1) / in.CellSize, // the smallest extent
		fourierEnd: est.Hand.GetDiffusivityM2S() * in.EndTime /
			(est.Hand.GetCharacteristicLengthM() * est.Hand.GetCharacteristicLengthM()),
		stepping: in.Spec.GetTimeStepping(),
		threads:  in.Threads,
	}
	for _, shape := range []shape{sphereShape, wallShape} {
		cc, err := crossCheck(ctx, shape, est, job)
		if err != nil {
			return nil, fmt.Errorf("verify: %s cross-check: %w", shape, err)
		}
		v.CrossChecks = append(v.CrossChecks, cc)
	}
	v.EnergyBalance = check(finiteOr(in.EnergyImbalance, math.Inf(1)), EnergyImbalanceLimit)
	v.Verdict, v.Reasons = verdict(v, job)
	v.WallSeconds = time.Since(started).Seconds()
	return v, nil
}

// withSolvedTimes copies the hand estimate's milestones with the 3-D times.
func withSolvedTimes(hand []*soakv1.MilestoneEstimate, solved []*soakv1.MilestoneResult) []*soakv1.MilestoneEstimate {
	out := make([]*soakv1.MilestoneEstimate, len(hand))
	for i, m := range hand {
		out[i] = &soakv1.MilestoneEstimate{Name: m.GetName(), Answers: m.GetAnswers()}
		for _, s := range solved {
			if s.GetName() == m.GetName() && s.GetTimeS() != nil {
				out[i].SolvedTimeS = proto.Float64(s.GetTimeS().GetValue())
			}
		}
	}
	return out
}

func check(value, limit float64) *soakv1.Check {
	c := &soakv1.Check{Value: value, Limit: limit, Status: Pass}
	if !(value <= limit) {
		c.Status = Warn
	}
	return c
}

func finiteOr(v, fallback float64) float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return fallback
	}
	return v
}
