package worker

import (
	"fmt"
	"io/fs"
	"math"
	"path/filepath"

	"soakfarm/jobspec"
	"soakfarm/mesh"
	soakv1 "soakfarm/proto/soak/v1"
)

// limitError is a job over one of this worker's resource limits. The job
// fails at once, without another attempt: every delivery would hit the
// same limit, and the worker itself stays healthy.
type limitError struct{ msg string }

func (e *limitError) Error() string { return e.msg }

// checkMemory refuses a spec whose grid needs more memory than the
// worker's MaxJobMemory, by the mesh's own estimate for the grid box,
// before anything is allocated.
func (w *Worker) checkMemory(spec *soakv1.JobSpec) error {
	if w.cfg.MaxJobMemory <= 0 {
		return nil
	}
	n, ok := gridCells(spec)
	if !ok {
		return nil
	}
	need := mesh.EstimateBytes(n)
	if need <= w.cfg.MaxJobMemory {
		return nil
	}
	return &limitError{fmt.Sprintf(
		"grid of %d × %d × %d cells needs about %s, over this worker's memory limit of %s (--max-job-memory); coarsen the grid or raise --max-job-memory on the workers",
		n[0], n[1], n[2], sizeText(need), sizeText(w.cfg.MaxJobMemory))}
}

// gridCells is the cell count of the grid box around the spec's part;
// false if the spec does not say (the pipeline reports why).
func gridCells(spec *soakv1.JobSpec) ([3]int, bool) {
	var n [3]int
	ext, ok := jobspec.Extents(spec.GetPart())
	h := jobspec.CellSize(spec)
	if !ok || h <= 0 {
		return n, false
	}
	for i, e := range ext {
		// The slack keeps an exact multiple from gaining a cell to
		// round-off, as the spec check does.
		n[i] = int(math.Ceil(e / h * (1 - 1e-12)))
	}
	return n, true
}

// checkDisk fails a job whose output folder has grown beyond the worker's
// MaxJobDisk.
func (w *Worker) checkDisk(outDir string) error {
	if w.cfg.MaxJobDisk <= 0 {
		return nil
	}
	var used int64
	err := filepath.WalkDir(outDir, func(_ string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if d.Type().IsRegular() {
			info, err := d.Info()
			if err != nil {
				return err
			}
			used += info.Size()
		}
		return nil
	})
	if err != nil {
		return fmt.Errorf("measure result files: %w", err)
	}
	if used <= w.cfg.MaxJobDisk {
		return nil
	}
	return &limitError{fmt.Sprintf(
		"result files reached %s, over this worker's disk limit of %s per job (--max-job-disk); ask for fewer snapshots or raise --max-job-disk on the workers",
		sizeText(used), sizeText(w.cfg.MaxJobDisk))}
}

func sizeText(b int64) string {
	switch {
	case b >= 1<<30:
		return fmt.Sprintf("%.1f GiB", float64(b)/(1<<30))
	case b >= 1<<20:
		return fmt.Sprintf("%.1f MiB", float64(b)/(1<<20))
	}
	return fmt.Sprintf("%.1f KiB", float64(b)/(1<<10))
}
