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
// as dst): one pass over dst where four axpys would make four.
func blend4(vector bool, w *[4]float32, rows *[4][]float32, dst []float32) {
	n := len(dst)
	r0, r1, r2, r3 := rows[0][:n], rows[1][:n], rows[2][:n], rows[3][:n]
	if vector && n > 0 {
		blend4AVX(n, w, &r0[0], &r1[0], &r2[0], &r3[0], &dst[0])
		return
	}
	for i := range dst {
		dst[i] = (w[0]*r0[i] + w[2]*r2[i]) + (w[1]*r1[i] + w[3]*r3[i])
	}
}

// gatherPairs sets out[I] = ¼·(row[2I] + row[2I+3]) + ¾·(row[2I+1] +
// row[2I+2]): restriction's weights along a halved x, row holding the
// fine cells from 2I − 1 on.
func gatherPairs(vector bool, row, out []float32) {
	n := len(out)
	row = row[:2*n+2]
	if vector && n > 0 {
		restrictRowAVX(n, &row[0], &out[0])
		return
	}
	for I := range out {
		t := row[2*I : 2*I+4 : 2*I+4]
		out[I] = 0.25*(t[0]+t[3]) + 0.75*(t[1]+t[2])
	}
}
