package linalg

import (
	"errors"
	"fmt"
	"runtime"
	"sync"
	"sync/atomic"

	"gonum.org/v1/gonum/mat"
)

// SolveIterativeMulti solves (I - gamma P) X = B column by column with the
// iterative solver, writing X into dst and returning one IterResult per
// column. b is n x m; dst is resized to n x m if empty and must be n x m
// otherwise (with s.UseInitial its columns are the initial guesses).
//
// Columns are shared among s.Workers goroutines (0 means
// min(2, GOMAXPROCS, m)), each with its own IterSolver running on one
// goroutine, so that the columns need no synchronisation between kernels
// (each column's result is then the same bits whatever the number of
// workers). With a single column the one solve uses
// the default parallel split of IterSolver.Solve. Workspace is about 8 n
// float64 and n int32 per worker for CG (12 n float64 for BiCGSTAB, and
// m + 2 n more when GMRES(m) runs), plus one shared int32 copy of P's
// indices. Each column gets the full breakdown handling of
// IterSolver.Solve (a new shadow residual, then GMRES under IterAuto) and
// its own IterResult.Breakdowns.
//
// The error, if any, is that of the lowest-numbered failing column, wrapped
// with its index; the other columns are still solved and reported. Errors
// wrap the sentinels listed at IterSolver.Solve.
func SolveIterativeMulti(dst *mat.Dense, p *CSR, gamma float64, b *mat.Dense, s *IterConfig) ([]IterResult, error) {
	var cfg IterConfig
	if s != nil {
		cfg = *s
	}
	if !(gamma >= 0 && gamma < 1) {
		return nil, fmt.Errorf("linalg: iterative multi: gamma %v outside [0, 1): %w", gamma, ErrDiscount)
	}
	n, c := p.Dims()
	if n != c {
		return nil, fmt.Errorf("linalg: iterative multi: p is %dx%d, not square: %w", n, c, ErrDimension)
	}
	br, m := b.Dims()
	if br != n {
		return nil, fmt.Errorf("linalg: iterative multi: b has %d rows, want %d: %w", br, n, ErrDimension)
	}
	if err := checkDst(dst, n, m); err != nil {
		return nil, fmt.Errorf("linalg: iterative multi: %w", err)
	}
	if n == 0 || m == 0 {
		return make([]IterResult, m), nil
	}
	if dst.IsEmpty() {
		dst.ReuseAs(n, m)
		cfg.UseInitial = false
	}
	workers := cfg.Workers
	if workers <= 0 {
		workers = min(2, runtime.GOMAXPROCS(0))
	}
	workers = max(1, min(workers, m))
	inner := cfg
	if workers > 1 {
		inner.Workers = 1
	} else if s == nil || s.Workers <= 0 {
		inner.Workers = 0
	}
	results := make([]IterResult, m)
	errs := make([]error, m)
	// Build the int32 index copy once and share it (read-only) among the
	// workers' solvers.
	var shared IterSolver
	shared.p, shared.n = p, n
	if err := shared.compactIndices(); err != nil {
		return nil, fmt.Errorf("linalg: iterative multi: %w", err)
	}
	var next atomic.Int64
	work := func() {
		is := IterSolver{ptr32: shared.ptr32, ind32: shared.ind32, idxFor: p}
		xc := make([]float64, n)
		bc := make([]float64, n)
		for {
			j := int(next.Add(1) - 1)
			if j >= m {
				return
			}
			mat.Col(bc, j, b)
			if inner.UseInitial {
				mat.Col(xc, j, dst)
			}
			results[j], errs[j] = is.Solve(xc, p, gamma, bc, &inner)
			if errs[j] == nil || !isInputError(errs[j]) {
				dst.SetCol(j, xc)
			}
		}
	}
	var wg sync.WaitGroup
	for w := 1; w < workers; w++ {
		wg.Go(work)
	}
	work()
	wg.Wait()
	for j, err := range errs {
		if err != nil {
			return results, fmt.Errorf("linalg: iterative multi: column %d: %w", j, err)
		}
	}
	return results, nil
}

// isInputError reports whether err rejects the input (so that no iterate
// was produced).
func isInputError(err error) bool {
	var nc *NotConvergedError
	return !errors.As(err, &nc)
}
