package estimate

import (
	"fmt"
	"math"
	"strings"

	"google.golang.org/protobuf/proto"

	"soakfarm/mesh"
	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/solver/exact"
)

// probePlace is where a probe sits, as far as the one-term answers can use it.
type probePlace int

const (
	atCentre probePlace = iota
	onSurface
	elsewhere
)

// placeProbe tells whether p (m) is the part's centre, on its surface
// (a point a hair farther out is outside), or neither.
func placeProbe(solid mesh.Solid, p [3]float64) probePlace {
	lo, hi := solid.Bounds()
	size := math.Max(hi[0]-lo[0], math.Max(hi[1]-lo[1], hi[2]-lo[2]))
	if math.Hypot(p[0], math.Hypot(p[1], p[2])) <= 1e-9*size {
		return atCentre
	}
	const outward = 1 + 1e-9
	if !solid.Contains([3]float64{p[0] * outward, p[1] * outward, p[2] * outward}) {
		return onSurface
	}
	return elsewhere
}

// target is what a milestone asks of the hand methods.
type target struct {
	// theta is the dimensionless temperature (T − T∞)/(Ti − T∞) to reach:
	// the probe's for a probe milestone, the mean's (1 − energy fraction)
	// for an energy milestone.
	theta  float64
	energy bool
	place  probePlace
	// unreachable, when set, says why no method reaches the target.
	unreachable string
}

func (e *Estimate) target(m *soakv1.Milestone, spec *soakv1.JobSpec, solid mesh.Solid) (target, error) {
	if m.EnergyFraction != nil {
		return target{theta: 1 - m.GetEnergyFraction(), energy: true}, nil
	}
	var probe *soakv1.Probe
	for _, p := range spec.GetProbes() {
		if p.GetName() == m.GetProbe() {
			probe = p
		}
	}
	if probe == nil || len(probe.GetAtM()) != 3 {
		return target{}, fmt.Errorf("milestone %q: probe %q is not a probe of the spec with a 3-value at_m", m.GetName(), m.GetProbe())
	}
	t := target{
		theta: (m.GetReachesC() + zeroCelsius - e.FluidK) / (e.InitialK - e.FluidK),
		place: placeProbe(solid, [3]float64(probe.GetAtM())),
	}
	if !(t.theta > 0 && t.theta <= 1) {
		t.unreachable = fmt.Sprintf("%.4g °C does not lie between the initial %.4g °C and the fluid %.4g °C; no hand method reaches it",
			m.GetReachesC(), e.InitialK-zeroCelsius, e.FluidK-zeroCelsius)
	}
	return t, nil
}

// milestones answers each milestone of spec by every hand method.
// firstChange is the first exposure change, s.
func (e *Estimate) milestones(spec *soakv1.JobSpec, solid mesh.Solid, firstChange float64) ([]*soakv1.MilestoneEstimate, error) {
	var out []*soakv1.MilestoneEstimate
	for _, m := range spec.GetMilestones() {
		tg, err := e.target(m, spec, solid)
		if err != nil {
			return nil, err
		}
		me := &soakv1.MilestoneEstimate{Name: m.GetName()}
		if tg.unreachable != "" {
			for _, method := range []string{MethodLumped, MethodSphere, MethodWall} {
				a := &answer{method: method}
				a.fail(tg.unreachable)
				me.Answers = append(me.Answers, a.proto())
			}
			out = append(out, me)
			continue
		}
		sphere, err := e.oneTerm(exact.Sphere, tg)
		if err != nil {
			return nil, err
		}
		wall, err := e.oneTerm(exact.PlaneWall, tg)
		if err != nil {
			return nil, err
		}
		for _, a := range []*answer{e.lumped(tg), sphere, wall} {
			if a.time != nil && *a.time > firstChange {
				a.fail(fmt.Sprintf("the exposure changes at %g s, before this time", firstChange))
			}
			me.Answers = append(me.Answers, a.proto())
		}
		out = append(out, me)
	}
	return out, nil
}

// answer is a HandAnswer being built: a method may fail for several reasons.
type answer struct {
	method  string
	time    *float64
	fourier *float64
	reasons []string
}

func (a *answer) fail(reason string) { a.reasons = append(a.reasons, reason) }

func (a *answer) proto() *soakv1.HandAnswer {
	return &soakv1.HandAnswer{
		Method: a.method, TimeS: a.time, FourierNumber: a.fourier,
		Applies: len(a.reasons) == 0, Note: strings.Join(a.reasons, "; "),
	}
}

// lumped answers a reachable target by lumped capacitance: θ = exp(−t/τ)
// everywhere in the part.
func (e *Estimate) lumped(tg target) *answer {
	h := e.Hand
	a := &answer{method: MethodLumped}
	a.time = proto.Float64(h.GetTimeConstantS() * math.Log(1/tg.theta))
	a.fourier = proto.Float64(exact.Fourier(h.GetDiffusivityM2S(), *a.time, h.GetCharacteristicLengthM()))
	if !h.GetLumpedApplies() {
		a.fail(fmt.Sprintf("Bi = %.3g is not below %g", h.GetBiotNumber(), LumpedBiotLimit))
	}
	return a
}

// oneTerm answers by the one-term series of the equal-volume sphere or the
// equal-Lc plane wall for a reachable target: θ = C1·exp(−λ1²·Fo)·f(λ1·ξ) at a point and
// θ̄ = C1·exp(−λ1²·Fo)·w(λ1) for the mean, solved for Fo.
func (e *Estimate) oneTerm(shape exact.Shape, tg target) (*answer, error) {
	h := e.Hand
	a := &answer{method: MethodWall}
	length, bi := h.GetWallHalfThicknessM(), h.GetWallBiotNumber()
	if shape == exact.Sphere {
		a.method = MethodSphere
		length, bi = h.GetSphereRadiusM(), h.GetSphereBiotNumber()
	}
	lambda, c1, err := exact.OneTerm(shape, bi)
	if err != nil {
		return nil, fmt.Errorf("one-term %v: %w", shape, err)
	}
	var factor float64
	switch {
	case tg.energy:
		factor = meanFactor(shape, lambda)
	case tg.place == atCentre:
		factor = 1
	case tg.place == onSurface:
		factor = surfaceFactor(shape, lambda)
	default:
		a.fail("the probe is neither at the part's centre nor on its surface")
		return a, nil
	}
	fo := math.Log(c1*factor/tg.theta) / (lambda * lambda)
	if !(fo > 0) {
		a.fail("the one-term form starts beyond the target; it holds only later")
		return a, nil
	}
	a.fourier = proto.Float64(fo)
	a.time = proto.Float64(fo * length * length / h.GetDiffusivityM2S())
	if fo < OneTermFourierLimit {
		a.fail(fmt.Sprintf("Fo = %.3g is below %g, too early for one term", fo, OneTermFourierLimit))
	}
	return a, nil
}

// surfaceFactor is the one-term eigenfunction at the surface, relative to
// the centre: cos λ for the wall, sin λ/λ for the sphere (Incropera et al.,
// Fundamentals of Heat and Mass Transfer, 6th ed., eqs. 5.40b and 5.50b,
// equation numbers from memory).
func surfaceFactor(shape exact.Shape, lambda float64) float64 {
	if shape == exact.Sphere {
		return math.Sin(lambda) / lambda
	}
	return math.Cos(lambda)
}

// meanFactor is the volume mean of the one-term eigenfunction, which turns
// the centre's θ into 1 − Q/Qmax: sin λ/λ for the wall and
// 3(sin λ − λ cos λ)/λ³ for the sphere (same book, eqs. 5.46 and 5.52,
// from memory).
func meanFactor(shape exact.Shape, lambda float64) float64 {
	if shape == exact.Sphere {
		return 3 * (math.Sin(lambda) - lambda*math.Cos(lambda)) / (lambda * lambda * lambda)
	}
	return math.Sin(lambda) / lambda
}
