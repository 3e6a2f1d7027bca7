package scheduler

import (
	"bytes"
	"errors"
	"fmt"

	"google.golang.org/genproto/googleapis/rpc/errdetails"

	"soakfarm/jobspec"
	"soakfarm/mesh/stl"
	soakv1 "soakfarm/proto/soak/v1"
)

// Limits bound what a submitted spec may ask of the farm. Each refusal
// names the limit and the scheduler flag that raises it.
type Limits struct {
	// Spec bounds the grid's cells and memory and the time steps.
	Spec jobspec.Limits
	// MaxSTLBytes bounds each STL body's data.
	MaxSTLBytes int64
	// MaxSTLTriangles bounds each STL body's triangles.
	MaxSTLTriangles int
}

// DefaultLimits suit parts a plant computes in minutes to hours; an STL
// body of a million triangles is finer than any grid the cell limit
// allows can resolve.
func DefaultLimits() Limits {
	return Limits{
		Spec:            jobspec.DefaultLimits(),
		MaxSTLBytes:     48 << 20,
		MaxSTLTriangles: 1_000_000,
	}
}

// The scheduler flags that raise each limit, named in refusals.
const (
	flagMaxCells        = "--max-cells"
	flagMaxMemory       = "--max-memory"
	flagMaxSteps        = "--max-steps"
	flagMaxSTLBytes     = "--max-stl-bytes"
	flagMaxSTLTriangles = "--max-stl-triangles"
)

// checkSTLBodies refuses STL bodies over the limits, and STL bodies whose
// mesh the spec does not carry: workers never read files, so a farm spec
// holds each mesh's bytes (soak submit copies them in).
func checkSTLBodies(spec *soakv1.JobSpec, lim Limits) []*errdetails.BadRequest_FieldViolation {
	var violations []*errdetails.BadRequest_FieldViolation
	for i, body := range spec.GetPart().GetBodies() {
		f := body.GetStl()
		if f == nil {
			continue
		}
		field := fmt.Sprintf("part.bodies[%d].stl.data", i)
		data := f.GetData()
		switch {
		case len(data) == 0:
			violations = append(violations, &errdetails.BadRequest_FieldViolation{Field: field,
				Description: fmt.Sprintf("missing: farm workers read no files, so the spec must carry the mesh of %q (soak submit copies it in)", f.GetFile())})
			continue
		case lim.MaxSTLBytes > 0 && int64(len(data)) > lim.MaxSTLBytes:
			violations = append(violations, &errdetails.BadRequest_FieldViolation{Field: field,
				Description: fmt.Sprintf("%d bytes, over the farm's limit of %d bytes per STL body (the scheduler's %s raises it)", len(data), lim.MaxSTLBytes, flagMaxSTLBytes)})
			continue
		}
		if lim.MaxSTLTriangles <= 0 {
			continue
		}
		// Other read errors are the spec validation's to report.
		_, err := stl.Read(bytes.NewReader(data), stl.Options{Units: f.GetUnits(), MaxTriangles: lim.MaxSTLTriangles})
		if errors.Is(err, stl.ErrLimit) {
			violations = append(violations, &errdetails.BadRequest_FieldViolation{Field: field,
				Description: fmt.Sprintf("more than the farm's limit of %d triangles per STL body (the scheduler's %s raises it)", lim.MaxSTLTriangles, flagMaxSTLTriangles)})
		}
	}
	return violations
}

// limitHints maps each problem of a spec that only a limit causes to the
// scheduler flag that raises that limit. It validates again with each
// limit lifted in turn: a problem that goes away is that limit's.
func limitHints(spec *soakv1.JobSpec, lim jobspec.Limits, problems []jobspec.Problem) map[jobspec.Problem]string {
	hints := make(map[jobspec.Problem]string)
	lifts := []struct {
		flag string
		lift func(*jobspec.Limits)
	}{
		{flagMaxCells, func(l *jobspec.Limits) { l.MaxCells = 0 }},
		{flagMaxMemory, func(l *jobspec.Limits) { l.MaxMemoryBytes = 0 }},
		{flagMaxSteps, func(l *jobspec.Limits) { l.MaxSteps = 0 }},
	}
	for _, l := range lifts {
		lifted := lim
		l.lift(&lifted)
		if lifted == lim {
			continue
		}
		remaining := map[jobspec.Problem]bool{}
		var ve *jobspec.ValidationError
		if errors.As(jobspec.Validate(spec, lifted), &ve) {
			for _, p := range ve.Problems {
				remaining[p] = true
			}
		}
		for _, p := range problems {
			if !remaining[p] {
				hints[p] = l.flag
			}
		}
	}
	return hints
}
