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

// gatherAdd gathers g[I] = ¼·(row[2I] + row[2I+3]) + ¾·(row[2I+1] +
// row[2I+2]) for I < n, restriction's weights along a halved x with row
// holding the fine cells from 2I − 1 on, and adds w[k]·g to dst[k] for
// each of the four rows (each at least n long): one fine row of
// restriction added into the coarse rows it feeds.
func gatherAdd(vector bool, row []float32, w *[4]float32, dst *[4][]float32, n int) {
	row = row[:2*n+2]
	d0, d1, d2, d3 := dst[0][:n], dst[1][:n], dst[2][:n], dst[3][:n]
	if vector && n > 0 {
		gatherAddAVX(n, &row[0], w, &d0[0], &d1[0], &d2[0], &d3[0])
		return
	}
	for I := range n {
		t := row[2*I : 2*I+4 : 2*I+4]
		g := 0.25*(t[0]+t[3]) + 0.75*(t[1]+t[2])
		d0[I] += w[0] * g
		d1[I] += w[1] * g
		d2[I] += w[2] * g
		d3[I] += w[3] * g
	}
}
