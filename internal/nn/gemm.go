package nn

import (
	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
)

// Block limits that keep gonum's Dgemm on its single-threaded path: it goes
// parallel (goroutines, allocations) once ceil(m/64)*ceil(n/64) >= 4, so a
// block of at most 64 rows and 192 columns always runs serially.
const (
	gemmRows = 64
	gemmCols = 192
)

// gemm computes c = alpha op(a) op(b) + beta c for row-major matrices, with
// op(a) m x k and op(b) k x n, through gonum's BLAS in serial blocks. It
// allocates nothing.
func gemm(tA, tB bool, m, n, k int, alpha float64, a []float64, lda int, b []float64, ldb int, beta float64, c []float64, ldc int) {
	ta, tb := blas.NoTrans, blas.NoTrans
	if tA {
		ta = blas.Trans
	}
	if tB {
		tb = blas.Trans
	}
	impl := blas64.Implementation()
	for i0 := 0; i0 < m; i0 += gemmRows {
		mi := min(gemmRows, m-i0)
		var as []float64
		if tA {
			as = a[i0:] // a is k x m: columns i0..
		} else {
			as = a[i0*lda:]
		}
		for j0 := 0; j0 < n; j0 += gemmCols {
			nj := min(gemmCols, n-j0)
			var bs []float64
			if tB {
				bs = b[j0*ldb:] // b is n x k: rows j0..
			} else {
				bs = b[j0:]
			}
			impl.Dgemm(ta, tb, mi, nj, k, alpha, as, lda, bs, ldb, beta, c[i0*ldc+j0:], ldc)
		}
	}
}

// gemmLoop is gemm as plain Go loops (i-l-j order), kept to compare with
// the BLAS path in BenchmarkGemm and to cross-check it in tests.
func gemmLoop(tA, tB bool, m, n, k int, alpha float64, a []float64, lda int, b []float64, ldb int, beta float64, c []float64, ldc int) {
	for i := 0; i < m; i++ {
		ci := c[i*ldc : i*ldc+n]
		if beta == 0 {
			clear(ci)
		} else if beta != 1 {
			for j := range ci {
				ci[j] *= beta
			}
		}
		for l := 0; l < k; l++ {
			var av float64
			if tA {
				av = a[l*lda+i]
			} else {
				av = a[i*lda+l]
			}
			av *= alpha
			if av == 0 {
				continue
			}
			if tB {
				for j := range ci {
					ci[j] += av * b[j*ldb+l]
				}
			} else {
				bl := b[l*ldb : l*ldb+n]
				for j, bv := range bl {
					ci[j] += av * bv
				}
			}
		}
	}
}
