// Package solver computes the transient temperature field of a voxelised
// part: implicit finite volumes on the mesh grid, convection and radiation
// at the boundary faces, temperature-dependent properties, adaptive time
// steps and energy bookkeeping.
package solver

import "soakfarm/mesh"

// StefanBoltzmann is σ in W/(m²·K⁴) (CODATA 2018, exact since the 2019 SI).
const StefanBoltzmann = 5.670374419e-8

// Curve is a property against temperature: linear between points, constant
// beyond the ends. One point means a constant.
type Curve struct {
	T []float64 // K, increasing
	V []float64 // value at each T
}

// Constant returns a Curve that is v at every temperature.
func Constant(v float64) Curve { return Curve{T: []float64{0}, V: []float64{v}} }

// Material holds the properties of one region of the part.
type Material struct {
	Density      float64 // kg/m³
	Conductivity Curve   // W/(m·K)
	SpecificHeat Curve   // J/(kg·K)
}

// ExposurePhase is the exposure of a surface group from Start on.
type ExposurePhase struct {
	Start        float64 // s
	H            float64 // convective coefficient, W/(m²·K)
	Fluid        float64 // K
	Emissivity   float64 // 0 … 1
	Surroundings float64 // K
}

// Exposure is the history of one surface group's exposure: phases sorted
// by Start, the first starting at 0. An insulated group has one phase with
// H = 0 and Emissivity = 0.
type Exposure struct {
	Phases []ExposurePhase
}

// Stepping controls time integration. A zero field takes its default:
// backward Euler; MaxChange the smaller of 5 K and 1/160 of the largest
// difference between the initial temperature and a fluid or surroundings
// temperature; FirstStep the smaller of the step at cell Fourier number 1
// and the step in which the initial surface heat flow changes a cell by
// MaxChange; MaxStep End/20; Tolerance 1e-8; Preconditioner multigrid.
// Backward Euler steps are further kept short enough that the estimated
// time lag stays near 0.5 %.
type Stepping struct {
	Scheme    string  // "backward-euler" or "bdf2"
	MaxChange float64 // largest cell temperature change per step, K
	FirstStep float64 // s
	MaxStep   float64 // s
	// Tolerance is the relative residual at which a linear solve stops.
	Tolerance float64
	// Preconditioner of the conjugate gradient linear solver: "multigrid"
	// (the default) or "jacobi", the plain diagonal kept as a reference.
	Preconditioner string
}

// Problem is everything the solver needs for one run.
type Problem struct {
	Grid      *mesh.Grid
	Materials []Material // index = region - 1
	Exposures []Exposure // index = surface group index of mesh.Grid.Groups
	Initial   float64    // uniform initial temperature, K
	End       float64    // s
	// Landings are times that a step must end on exactly (snapshot times,
	// exposure changes are added by the solver itself).
	Landings []float64
	Stepping Stepping
	// Threads is the number of goroutines for the linear algebra; 0 means
	// runtime.GOMAXPROCS(0).
	Threads int
	// Contacts adds a contact conductance where cells of two regions
	// touch; regions without one conduct through the harmonic mean alone.
	Contacts []Contact
}

// Contact is the thermal contact conductance between two regions: a
// resistance 1/(Conductance·A) in series with the half cells on each side.
type Contact struct {
	RegionA, RegionB uint8   // regions as in mesh.Grid.Region (1 or more)
	Conductance      float64 // W/(m²·K)
}

// State is the solution after an accepted step. The solver reuses it
// between calls of the observer: copy what must outlive the call.
type State struct {
	Time float64 // s
	Step int     // 0 for the initial state
	// T is the temperature of every grid cell in K, indexed like
	// mesh.Grid.Region; cells outside the part hold 0.
	T []float64
	// Iterations of the linear solver in this step (all Newton passes).
	Iterations int
	// TotalIterations since the start.
	TotalIterations int64
	// StoredEnergy is the energy the part has gained since the start, J
	// (negative while it cools).
	StoredEnergy float64
	// BoundaryHeat is the heat that has entered through the surface since
	// the start, J, integrated consistently with the time scheme.
	BoundaryHeat float64
}

// Observer is called with the initial state and after every accepted step.
// Returning true ends the run after that step.
type Observer func(*State) (stop bool)

// Outcome summarises a finished run.
type Outcome struct {
	Steps           int
	TotalIterations int64
	EndTime         float64 // s
	// EnergyImbalance is |StoredEnergy − BoundaryHeat| / |StoredEnergy| at
	// the end (0 when nothing changed).
	EnergyImbalance float64
}
