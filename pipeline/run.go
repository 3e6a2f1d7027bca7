package pipeline

import (
	"context"
	"fmt"
	"math"
	"os"
	"sort"
	"time"

	"google.golang.org/protobuf/types/known/wrapperspb"

	"soakfarm/mesh"
	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/report"
	"soakfarm/solver"
	"soakfarm/verify"
)

// Stop reasons written to the summary.
const (
	StopEndTime    = "end-time"
	StopMilestones = "milestones-reached"
)

// VerdictNotChecked is the verdict of a result whose verification could
// not run (the reason says why).
const VerdictNotChecked = "not-checked"

// milestoneWatch follows one milestone from step to step.
type milestoneWatch struct {
	spec    *soakv1.Milestone
	probe   int // index into the probes, -1 for an energy milestone
	target  float64
	reached bool
	time    float64
}

// Model is a job's spec turned into what the solver takes, with what the
// pipeline needs to read the results.
type Model struct {
	Spec    *soakv1.JobSpec
	Solid   mesh.Solid
	Grid    *mesh.Grid
	Problem *solver.Problem
	probes  []*probeReader
	// equilibrium temperature (K) and whether any face exchanges heat.
	teq    float64
	hasEq  bool
	qMax   float64 // energy exchanged on reaching equilibrium, J (signed)
	volume float64 // model volume, m³
	// regionNames[r-1] names region r's material ("material" for the
	// top-level one).
	regionNames []string
}

// Build meshes the part and prepares the solver problem for spec. STL
// files the spec names without carrying their data are read from
// opt.SpecDir; opt.Threads bounds the solver's goroutines.
func Build(ctx context.Context, spec *soakv1.JobSpec, opt Options) (*Model, error) {
	ps, err := setupPart(spec, opt.SpecDir)
	if err != nil {
		return nil, fmt.Errorf("part: %w", err)
	}
	solid := ps.solid
	h := spec.GetCellSizeM()
	if spec.CellsAcross != nil {
		h = mesh.CellSizeFor(solid, int(spec.GetCellsAcross()))
	}
	sel, err := mesh.SelectorsFromSpec(spec.GetExposure())
	if err != nil {
		return nil, err
	}
	g, err := mesh.Voxelise(ctx, solid, h, sel)
	if err != nil {
		return nil, fmt.Errorf("mesh: %w", err)
	}
	if asm, ok := solid.(*mesh.Assembly); ok {
		area := 0.0
		for _, grp := range g.Groups {
			area += grp.TrueArea
		}
		solid = assembledPart{Assembly: asm, area: area}
	}
	m := &Model{Spec: spec, Solid: solid, Grid: g, regionNames: ps.names}
	initial := kelvin(spec.GetInitialC())
	ex := exposures(spec, g)
	st := spec.GetTimeStepping()
	m.Problem = &solver.Problem{
		Grid:      g,
		Materials: ps.materials,
		Contacts:  ps.contacts,
		Exposures: ex,
		Initial:   initial,
		End:       spec.GetEndS(),
		Landings:  append([]float64(nil), spec.GetSnapshotsS()...),
		Stepping: solver.Stepping{
			Scheme:    st.GetScheme(),
			MaxChange: st.GetMaxChangeK(),
			FirstStep: st.GetFirstStepS(),
			MaxStep:   st.GetMaxStepS(),
		},
		Threads: opt.Threads,
	}
	faces := newFaceIndex(g)
	for i, p := range spec.GetProbes() {
		at := p.GetAtM()
		r, err := newProbeReader(g, faces, p.GetName(), [3]float64{at[0], at[1], at[2]})
		if err != nil {
			return nil, fmt.Errorf("probes[%d].at_m: %w", i, err)
		}
		m.probes = append(m.probes, r)
	}
	m.volume = float64(g.PartCells()) * h * h * h
	m.teq, m.hasEq = equilibrium(g, ex, initial)
	for r, v := range partVolumes(g, len(ps.materials)) {
		mat := ps.materials[r]
		m.qMax += v * mat.Density * mat.SpecificHeat.Integral(initial, m.teq)
	}
	return m, nil
}

func run(ctx context.Context, spec *soakv1.JobSpec, outDir string, opt Options) (*soakv1.Summary, error) {
	started := time.Now()
	if err := os.MkdirAll(outDir, 0o755); err != nil {
		return nil, fmt.Errorf("output folder: %w", err)
	}
	m, err := Build(ctx, spec, opt)
	if err != nil {
		return nil, err
	}
	g, prob := m.Grid, m.Problem

	names := make([]string, len(m.probes))
	for i, p := range m.probes {
		names[i] = p.name
	}
	watches, err := m.milestones()
	if err != nil {
		return nil, err
	}
	csv, err := report.NewProbeWriter(outDirFile(outDir, report.ProbesFile), names)
	if err != nil {
		return nil, err
	}
	defer csv.Close()

	snapshots := append([]float64(nil), spec.GetSnapshotsS()...)
	sort.Float64s(snapshots)
	var artifacts []string
	var rows []report.Row
	var prev report.Row
	var ioErr error
	stopReason := StopEndTime
	tempC := make([]float64, g.CellCount())

	observe := func(s *solver.State) bool {
		row := m.row(s)
		rows = append(rows, row)
		if err := csv.Write(row); err != nil && ioErr == nil {
			ioErr = err
		}
		for len(snapshots) > 0 && math.Abs(snapshots[0]-s.Time) <= 1e-9*math.Max(1, prob.End) {
			for c, t := range s.T {
				tempC[c] = celsius(t)
			}
			name, err := report.WriteSnapshot(outDir, report.Snapshot{
				Time: snapshots[0], N: g.N, Origin: g.Origin, CellSize: g.CellSize, TempC: tempC, Part: g.Region,
			})
			if err != nil && ioErr == nil {
				ioErr = err
			}
			artifacts = append(artifacts, name)
			snapshots = snapshots[1:]
		}
		allReached := len(watches) > 0
		for _, w := range watches {
			if !w.reached && s.Step > 0 {
				w.check(prev, row)
				if w.reached && opt.Milestone != nil {
					opt.Milestone(&soakv1.MilestoneReached{Name: w.spec.GetName(), TimeS: w.time})
				}
			} else if !w.reached && s.Step == 0 {
				w.checkStart(row)
			}
			allReached = allReached && w.reached
		}
		prev = row
		if opt.Progress != nil {
			p := &soakv1.JobProgress{
				SimTimeS: s.Time, EndS: prob.End, WallSeconds: time.Since(started).Seconds(),
				Step: uint32(s.Step), EnergyFraction: row.EnergyFraction,
			}
			for i, v := range row.Probes {
				p.Probes = append(p.Probes, &soakv1.ProbeReading{Name: names[i], TempC: v, Placement: m.probes[i].placement})
			}
			opt.Progress(p)
		}
		if ioErr != nil {
			return true
		}
		if spec.GetStopAtMilestones() && allReached {
			stopReason = StopMilestones
			return true
		}
		return false
	}
	out, err := solver.Solve(ctx, prob, observe)
	if err != nil {
		return nil, fmt.Errorf("solve: %w", err)
	}
	if ioErr != nil {
		return nil, ioErr
	}
	if err := csv.Close(); err != nil {
		return nil, err
	}
	artifacts = append([]string{report.ProbesFile, report.SummaryFile, report.HistoryFile}, artifacts...)
	if err := report.WriteHistoryPlot(outDir, spec.GetName(), names, rows); err != nil {
		return nil, err
	}
	sum := m.summary(rows[len(rows)-1], watches, out, stopReason)
	m.AddGeometry(sum)
	if opt.skipChecks {
		sum.Artifacts = artifacts
		return sum, nil
	}
	v, err := verify.Run(ctx, verify.Input{
		Spec: spec, Solid: m.Solid, CellSize: g.CellSize, Material: prob.Materials[0],
		Milestones: sum.GetMilestones(), EnergyImbalance: out.EnergyImbalance, EndTime: out.EndTime,
		ExposedAreas: m.exposedAreas(),
		Threads:      opt.Threads,
	})
	switch {
	case ctx.Err() != nil:
		return nil, fmt.Errorf("verify: %w", ctx.Err())
	case err != nil:
		// The result stands; say plainly that it went unchecked.
		v = &soakv1.Verification{Verdict: VerdictNotChecked, Reasons: []string{err.Error()}}
	default:
		if err := verify.WritePlot(outDir, v); err != nil {
			return nil, err
		}
		artifacts = append(artifacts, verify.PlotFile)
	}
	sum.Verification = v
	if h := v.GetEstimate(); h != nil {
		sum.BiotNumber, sum.CharacteristicLengthM, sum.TimeConstantS = h.GetBiotNumber(), h.GetCharacteristicLengthM(), h.GetTimeConstantS()
	}
	if spec.GetRefine() {
		r, err := refine(ctx, spec, g.CellSize, sum, opt)
		if err != nil {
			return nil, err
		}
		sum.Refinement = r
	}
	sum.Artifacts = artifacts
	sum.WallSeconds = time.Since(started).Seconds()
	if err := report.WriteSummary(outDir, sum); err != nil {
		return nil, err
	}
	return sum, nil
}

func outDirFile(dir, name string) string { return dir + string(os.PathSeparator) + name }

// row reads the probes and the part's statistics from a solver state.
func (m *Model) row(s *solver.State) report.Row {
	g, prob := m.Grid, m.Problem
	surface := func(f int) float64 {
		if s.Step == 0 {
			// The initial field is uniform: the surface has not yet
			// exchanged heat, whatever the balance of the first step says.
			return s.T[g.Faces[f].Cell]
		}
		return solver.SurfaceTemperature(prob, f, s.T[g.Faces[f].Cell], s.Time)
	}
	r := report.Row{Time: s.Time, Probes: make([]float64, len(m.probes)), Min: math.Inf(1), Max: math.Inf(-1)}
	for i, p := range m.probes {
		r.Probes[i] = celsius(p.read(s.T, surface))
	}
	sum, n := 0.0, 0
	for c, reg := range g.Region {
		if reg == 0 {
			continue
		}
		t := s.T[c]
		sum += t
		n++
		r.Min = math.Min(r.Min, t)
		r.Max = math.Max(r.Max, t)
	}
	r.Min, r.Max, r.Mean = celsius(r.Min), celsius(r.Max), celsius(sum/float64(n))
	if m.hasEq && m.qMax != 0 {
		r.EnergyFraction = s.StoredEnergy / m.qMax
	}
	return r
}

// milestones prepares the milestone watches.
func (m *Model) milestones() ([]*milestoneWatch, error) {
	var ws []*milestoneWatch
	for i, ms := range m.Spec.GetMilestones() {
		w := &milestoneWatch{spec: ms, probe: -1}
		if ms.ReachesC != nil {
			w.target = ms.GetReachesC()
			for p, pr := range m.probes {
				if pr.name == ms.GetProbe() {
					w.probe = p
				}
			}
			if w.probe < 0 {
				return nil, fmt.Errorf("milestones[%d].probe: no probe named %q", i, ms.GetProbe())
			}
		} else {
			w.target = ms.GetEnergyFraction()
		}
		ws = append(ws, w)
	}
	return ws, nil
}

func (w *milestoneWatch) value(r report.Row) float64 {
	if w.probe < 0 {
		return r.EnergyFraction
	}
	return r.Probes[w.probe]
}

// checkStart marks a milestone already met by the initial state.
func (w *milestoneWatch) checkStart(r report.Row) {
	if w.value(r) == w.target {
		w.reached, w.time = true, r.Time
	}
}

// check looks for a crossing of the target between two rows and
// interpolates its time linearly.
func (w *milestoneWatch) check(prev, cur report.Row) {
	a, b := w.value(prev)-w.target, w.value(cur)-w.target
	if a == 0 || a*b > 0 {
		return
	}
	w.reached = true
	w.time = prev.Time + (cur.Time-prev.Time)*a/(a-b)
}

// summary assembles the job summary.
func (m *Model) summary(last report.Row, watches []*milestoneWatch, out *solver.Outcome, stop string) *soakv1.Summary {
	spec, g, prob := m.Spec, m.Grid, m.Problem
	s := &soakv1.Summary{
		Name:                spec.GetName(),
		Caution:             report.Caution,
		StopReason:          stop,
		EndTimeS:            out.EndTime,
		TrueVolumeM3:        m.Solid.Volume(),
		ModelVolumeM3:       m.volume,
		EnergyImbalance:     out.EnergyImbalance,
		FinalEnergyFraction: last.EnergyFraction,
		FinalMinC:           last.Min,
		FinalMaxC:           last.Max,
		FinalMeanC:          last.Mean,
		Steps:               uint32(out.Steps),
		SolverIterations:    uint64(out.TotalIterations),
		Scheme:              prob.Stepping.Scheme,
		Grid: &soakv1.GridSummary{
			Cells:               []uint32{uint32(g.N[0]), uint32(g.N[1]), uint32(g.N[2])},
			CellSizeM:           g.CellSize,
			PartCells:           uint64(g.PartCells()),
			MemoryEstimateBytes: uint64(mesh.EstimateBytes(g.N)),
		},
	}
	if s.Scheme == "" {
		s.Scheme = "backward-euler"
	}
	for _, w := range watches {
		r := &soakv1.MilestoneResult{Name: w.spec.GetName()}
		if w.reached {
			r.TimeS = wrapperspb.Double(w.time)
		}
		s.Milestones = append(s.Milestones, r)
	}
	for i, p := range m.probes {
		s.FinalProbes = append(s.FinalProbes, &soakv1.ProbeReading{Name: p.name, TempC: last.Probes[i], Placement: p.placement})
	}
	for _, grp := range g.Groups {
		gs := &soakv1.SurfaceGroupSummary{Name: grp.Name, TrueAreaM2: grp.TrueArea, VoxelAreaM2: grp.VoxelArea, ModelAreaM2: grp.ModelArea}
		if grp.Exposure >= 0 {
			e := spec.GetExposure()[grp.Exposure]
			gs.HWM2K = e.GetHWM2K()
			gs.FluidC = e.FluidC
			gs.Emissivity = e.Emissivity
		}
		s.SurfaceGroups = append(s.SurfaceGroups, gs)
	}
	s.EnergyImbalance = finiteOr(s.EnergyImbalance, 0)
	return s
}

// exposedAreas is the true area each exposure entry covers, by the mesh.
func (m *Model) exposedAreas() []float64 {
	areas := make([]float64, len(m.Spec.GetExposure()))
	for _, grp := range m.Grid.Groups {
		if grp.Exposure >= 0 {
			areas[grp.Exposure] += grp.TrueArea
		}
	}
	return areas
}
