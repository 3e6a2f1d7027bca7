package solver

import "unsafe"

// arrays hands out the solver's large float arrays, each starting at its
// own offset within a 4 KiB page. Large allocations start on page
// boundaries, and a stencil pass reads a dozen arrays at the same index:
// had they all started at the same page offset, every stream would fall in
// the same cache sets and evict the others (measured on a 128³ smoothing
// pass: 2.5 times slower). The offsets walk the 64 cache lines of a page in
// a scattered order.
type arrays struct{ next int }

// offsetLines is how many cache lines the k-th array is shifted by: an odd
// multiplier visits all 64 line offsets before repeating.
func (s *arrays) offsetLines() int {
	k := s.next
	s.next++
	return (k * 37) % 64
}

// slack is how many elements each array has past its end: the stencil
// kernels finish a span with a whole vector of eight cells, reading (not
// writing) up to seven past the span's last cell and its neighbours.
const slack = 8

// grow returns a zeroed array of n elements starting at the next offset,
// with slack elements after it.
func grow[T float32 | float64](s *arrays, n int) []T {
	var zero T
	shift := s.offsetLines() * 64 / int(unsafe.Sizeof(zero))
	return make([]T, n+shift+slack)[shift : shift+n : shift+n]
}
