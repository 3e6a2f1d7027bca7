package solver

// A wavefront runs several passes over a level in one sweep of memory.
// Each stage at plane z reads the previous stage's output at planes z−1,
// z and z+1 only, so once stage s−1 has reached plane z+1, stage s can
// take plane z while the planes are still in cache: a sweep of the slab
// runs stage 0 on plane g, stage 1 on g−1, stage 2 on g−2 and so on.
//
// Slabs are worked on at once, and a stage at a slab's first plane needs
// the previous stage's output on the neighbour slab's last plane. So a
// band of planes at both ends of each slab goes first, stage by stage
// with every slab done between stages (S−1−s planes at each end for stage
// s of S), and the sweep then does the rest. A stage that overwrites an
// array an earlier stage reads (the smoother's ping-pong) only ever
// overwrites plane z after the earlier stage has read it: at z+1 in the
// sweep, or in the band on the neighbour slab.

// stageKind is what a wavefront stage does to one plane.
type stageKind int

const (
	// stageFromZero is the first Chebyshev step from x = 0 (pointwise).
	stageFromZero stageKind = iota
	// stageSmooth is a Chebyshev step.
	stageSmooth
	// stageResidual sets d to the scaled residual of its source.
	stageResidual
	// stageProlong adds the interpolated coarse correction to x (pointwise).
	stageProlong
)

// stage is one pass of a wavefront: src and dst are the level's arrays it
// reads (with neighbours) and writes; step is the Chebyshev step.
type stage struct {
	kind     stageKind
	step     int
	src, dst []float32
}

// wavefront is a sequence of stages run in one sweep, with the tasks that
// run it (made once, so that a cycle allocates nothing).
type wavefront struct {
	l      *mgLevel
	stages []stage
	band   int // the stage the band task runs
	// bandTask runs stage band on the end planes of slab w; sweepTask
	// runs the sweep of slab w; passTasks[s] runs stage s alone over slab
	// w, for the pass-by-pass reference.
	bandTask, sweepTask func(int)
	passTasks           []func(int)
}

func newWavefront(l *mgLevel, stages []stage) *wavefront {
	f := &wavefront{l: l, stages: stages}
	f.bandTask, f.sweepTask = f.runBand, f.sweep
	for s := range stages {
		f.passTasks = append(f.passTasks, func(w int) {
			for _, plane := range f.l.planes[w] {
				f.l.runStage(w, &f.stages[s], plane)
			}
		})
	}
	return f
}

// inBand tells whether stage s takes plane group g of a slab of n groups
// in the band rather than the sweep.
func (f *wavefront) inBand(s, g, n int) bool {
	depth := len(f.stages) - 1 - s
	return g < depth || g >= n-depth
}

func (f *wavefront) runBand(w int) {
	planes := f.l.planes[w]
	for g := range planes {
		if f.inBand(f.band, g, len(planes)) {
			f.l.runStage(w, &f.stages[f.band], planes[g])
		}
	}
}

func (f *wavefront) sweep(w int) {
	planes := f.l.planes[w]
	n, last := len(planes), len(f.stages)-1
	for k := range n + last {
		for s := range f.stages {
			g := k - s
			if g >= 0 && g < n && !f.inBand(s, g, n) {
				f.l.runStage(w, &f.stages[s], planes[g])
			}
		}
	}
}

// runWavefront runs the wavefront over every slab of its level and counts
// its traffic by the model: one sweep of memory as it ran (the stages
// of one pass each when the multigrid runs pass by pass), and the stages'
// own passes in the per-pass count.
func (mg *multigrid) runWavefront(f *wavefront, sweepBytes float64) {
	cells := float64(f.l.cells)
	passes := 0.0
	for _, st := range f.stages {
		passes += st.kind.passBytes()
	}
	mg.cost.PassBytes += passes * cells
	if mg.passByPass {
		for _, task := range f.passTasks {
			mg.run(f.l, task)
		}
		mg.moved += passes * cells
		return
	}
	for s := range len(f.stages) - 1 {
		f.band = s
		mg.run(f.l, f.bandTask)
	}
	mg.run(f.l, f.sweepTask)
	mg.moved += sweepBytes * cells
}

// passBytes is what a stage of this kind reads and writes per part cell
// when it runs as a pass of its own (float32 = 4 bytes; neighbours come
// from cache, writes counted once as the triad counts them).
func (k stageKind) passBytes() float64 {
	switch k {
	case stageFromZero:
		return 4 * 4 // b and the inverse diagonal in; d and x' out
	case stageSmooth:
		return 9 * 4 // x, the stencil (four arrays), b and d in; d and x' out
	case stageResidual:
		return 8 * 4 // x, the stencil, b and scale in; d out
	default: // stageProlong
		return 3*4 + 4.0/8 // scale in, x read and written, a coarse value per eight cells
	}
}

// planesOf splits each slab's spans into groups of one z-plane each, in order.
func planesOf(slabs [][]span) [][][]span {
	out := make([][][]span, len(slabs))
	for w, slab := range slabs {
		for i := 0; i < len(slab); {
			j := i
			for j < len(slab) && slab[j].z == slab[i].z {
				j++
			}
			out[w] = append(out[w], slab[i:j])
			i = j
		}
	}
	return out
}
