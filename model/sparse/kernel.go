package sparse

// gemmNT computes C -= A Bᵀ for column-major blocks: A is m×k with leading
// dimension lda, B is n×k with leading dimension ldb, C is m×n with leading
// dimension ldc; that is c[i+j*ldc] -= Σ_t a[i+t*lda]·b[j+t*ldb]. It is the
// one dense kernel of the factorisation (supernode updates and the blocked
// panel factorisation). Tiles of 8×4 go to kern8x4 (vector code where the
// processor has it), the edges to plain loops.
func gemmNT(m, n, k int, a []float64, lda int, b []float64, ldb int, c []float64, ldc int) {
	if m <= 0 || n <= 0 || k <= 0 {
		return
	}
	// Bounds, checked once so the kernels may index freely.
	_ = a[(k-1)*lda+m-1]
	_ = b[(k-1)*ldb+n-1]
	_ = c[(n-1)*ldc+m-1]
	if !useVector || k < 2 {
		gemmNTGo(m, n, k, a, lda, b, ldb, c, ldc)
		return
	}
	m8 := m &^ 7
	m4 := m &^ 3
	n4 := n &^ 3
	for j := 0; j < n4; j += 4 {
		for i := 0; i < m8; i += 8 {
			kern8x4(k, &a[i], lda, &b[j], ldb, &c[i+j*ldc], ldc)
		}
		if m4 > m8 {
			kern4x4(k, &a[m8], lda, &b[j], ldb, &c[m8+j*ldc], ldc)
		}
	}
	for j := n4; j < n; j++ {
		for i := 0; i < m8; i += 8 {
			kern8x1(k, &a[i], lda, &b[j], ldb, &c[i+j*ldc])
		}
		if m4 > m8 {
			kern4x1(k, &a[m8], lda, &b[j], ldb, &c[m8+j*ldc])
		}
	}
	// The last m-m4 (< 4) rows of every column.
	if m4 < m {
		gemmNTGo(m-m4, n, k, a[m4:], lda, b, ldb, c[m4:], ldc)
	}
}

// gemmNTGo is gemmNT in plain Go: for each column j of C, an axpy of four
// columns of A at a time.
func gemmNTGo(m, n, k int, a []float64, lda int, b []float64, ldb int, c []float64, ldc int) {
	if m <= 0 || n <= 0 {
		return
	}
	for j := 0; j < n; j++ {
		cj := c[j*ldc : j*ldc+m]
		t := 0
		for ; t+4 <= k; t += 4 {
			a0 := a[t*lda : t*lda+m]
			a1 := a[(t+1)*lda : (t+1)*lda+m]
			a2 := a[(t+2)*lda : (t+2)*lda+m]
			a3 := a[(t+3)*lda : (t+3)*lda+m]
			b0, b1, b2, b3 := b[j+t*ldb], b[j+(t+1)*ldb], b[j+(t+2)*ldb], b[j+(t+3)*ldb]
			for i := range cj {
				cj[i] -= b0*a0[i] + b1*a1[i] + b2*a2[i] + b3*a3[i]
			}
		}
		for ; t < k; t++ {
			a0 := a[t*lda : t*lda+m]
			b0 := b[j+t*ldb]
			for i := range cj {
				cj[i] -= b0 * a0[i]
			}
		}
	}
}
