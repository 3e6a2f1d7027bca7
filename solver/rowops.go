package solver

// axpy sets dst += w·src, with the AVX2 kernel where vector allows.
func axpy(vector bool, w float32, src, dst []float32) {
	src = src[:len(dst)]
	i := 0
	if vector && len(dst) >= 8 {
		i = len(dst) &^ 7
		axpyAVX(i, w, &src[0], &dst[0])
	}
	for ; i < len(dst); i++ {
		dst[i] += w * src[i]
	}
}
