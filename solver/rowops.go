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

// blend4 sets dst to the weighted sum of four rows (each at least as long
// as dst), plus dst's own value when add: one pass over dst where four
// axpys would make four.
func blend4(vector bool, w *[4]float32, rows *[4][]float32, dst []float32, add bool) {
	n := len(dst)
	r0, r1, r2, r3 := rows[0][:n], rows[1][:n], rows[2][:n], rows[3][:n]
	if vector && n > 0 {
		blend4AVX(n, w, &r0[0], &r1[0], &r2[0], &r3[0], &dst[0], add)
		return
	}
	for i := range dst {
		v := (w[0]*r0[i] + w[2]*r2[i]) + (w[1]*r1[i] + w[3]*r3[i])
		if add {
			v += dst[i]
		}
		dst[i] = v
	}
}
