package solver

// axpy sets dst += w·src, with the AVX2 kernel where vector allows.
func axpy(vector bool, w float32, src, dst []float32) {
	src = src[:len(dst)]
	if vector && len(dst) > 0 {
		axpyAVX(len(dst), w, &src[0], &dst[0])
		return
	}
	for i := range dst {
		dst[i] += w * src[i]
	}
}
