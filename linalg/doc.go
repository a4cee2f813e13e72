// Package linalg provides the numerical bottom layer of the library: dense
// and sparse solves of (I - gamma P), the fundamental matrix of an absorbing
// chain, stationary distributions, stochastic-matrix checks and least
// squares. It knows nothing of reinforcement learning.
//
// # Equations and conventions
//
// P is an n x n matrix, row-stochastic for a Markov chain (P[i][j] is the
// probability of moving from i to j; CheckStochastic verifies it). The
// successor matrix of P with discount gamma in [0, 1) is
//
//	M = sum_{t>=0} gamma^t P^t = (I - gamma P)^-1,
//
// so M[s][s'] is the expected discounted number of visits to s' from s, the
// visit at t = 0 included; every row of M sums to 1/(1 - gamma). Successor
// computes M, SolveSuccessor computes (I - gamma P)^-1 B for a block of
// right-hand sides B (state features, rewards) without forming M, and the
// iterative solver (SolveIterative, IterSolver, SolveIterativeMulti) solves
// (I - gamma P) x = b for chains far too large for a dense factorisation.
// None of these require P to be stochastic; gamma = 1 is rejected.
//
// For an absorbing chain with transient block Q and transient-to-absorbing
// block R, Fundamental computes N = (I - Q)^-1; N 1 is the expected number
// of steps to absorption and N R the absorption probabilities (Grinstead &
// Snell, Introduction to Probability, ch. 11). Stationary computes pi with
// pi P = pi, sum(pi) = 1 for an irreducible P. CannotReach finds a row of
// a sparse P from which no row of a given target set is reachable along its
// positive entries; with the rows that lose mass as the target, it is the
// structural test that a sub-stochastic P is a transient block.
//
// Ridge computes w = argmin ||X w - y||^2 + lambda ||w||^2; RLS computes the
// same w recursively, one sample at a time.
//
// # Methods and cost
//
// Successor and SolveSuccessor read the band of P (lower and upper
// bandwidths kl, ku; a chain on a rows x cols grid numbered row by row has
// kl = ku = cols). When the band is narrow they factorise I - gamma P by a
// banded LU with partial pivoting, O(n kl (kl + ku)) time and
// O(n (2 kl + ku)) memory, and solve each right-hand side in
// O(n (2 kl + ku)); otherwise they use gonum's dense blocked LU, O(n^3).
// Successor adds n right-hand sides. For a sub-stochastic P and gamma < 1
// the matrix I - gamma P is strictly diagonally dominant by rows, so it is
// never singular and elimination is stable (Higham, Accuracy and Stability
// of Numerical Algorithms, 2nd ed., §9.5); pivoting is kept for general P.
// A *CSR argument is read in O(nnz), any other mat.Matrix in O(n^2).
//
// Fundamental uses the same factorisation with gamma = 1 after a structural
// check, O(n + nnz), that every transient state reaches a leaking row
// (CannotReach).
// Stationary checks irreducibility by two graph searches and uses the GTH
// state-reduction algorithm (Grassmann, Taksar & Heyman 1985), which keeps
// the band: O(n kl ku) time, O(n (kl + ku)) memory.
//
// The iterative solver uses conjugate gradients when P is symmetric and
// BiCGSTAB otherwise, preconditioned by symmetric Gauss-Seidel through
// Eisenstat's trick (Jacobi when I - gamma P is not diagonally dominant; see
// IterSolver.Solve); each iteration costs O(nnz + n)
// and is split over two goroutines for n >= 1<<17. Restarted GMRES(m)
// (IterGMRES) is there too, as an explicit choice and as the fallback.
// When BiCGSTAB breaks down (rho = rhat.r, rhat.v or t.s, whose ratio is
// omega, below 1e-14 times the norms of its factors; this happens exactly
// when the shadow residual r0 is a left eigenvector of the preconditioned
// matrix, as for b a unit vector on a row of P that is zero), it restarts
// from the current iterate with a pseudo-random shadow residual from fixed
// seeds; the automatic choice hands over to GMRES(30) after a third
// breakdown (a diverging BiCGSTAB ends in breakdowns too). CG's
// non-positive curvature (P symmetric, I - gamma P indefinite) hands over
// to BiCGSTAB. Same inputs, same bits. The stopping rule is the relative
// residual
//
//	||b - (I - gamma P) x||_2 / ||b||_2 <= Tol   (default 1e-8),
//
// checked on the recurrence residual, then confirmed on the true residual
// recomputed from x, within MaxIter iterations (default 10000); otherwise it
// returns a *NotConvergedError with the residual it reached. On the random
// walk of a 1000 x 1000 grid (10^6 states) with gamma = 0.99 and Tol = 1e-6
// it needs about 35-40 iterations and 76 MB of workspace (6 float64 vectors
// and one int32 vector of length n, and an int32 copy of the CSR indices;
// BiCGSTAB needs 4 more float64 vectors, GMRES(m) m + 2 more).
//
// Ridge uses Householder QR of the augmented matrix [X; sqrt(lambda) I],
// O((m + d) d^2); RLS costs O(d^2) per sample.
//
// # Errors
//
// Functions return errors wrapping the sentinels ErrNotStochastic,
// ErrSingular, ErrDiscount, ErrDimension, ErrNotConverged, ErrNonFinite,
// ErrNotAbsorbing, ErrReducible, ErrConfig and ErrRankDeficient (which
// also matches ErrSingular); use errors.Is. ErrDimension, ErrNonFinite,
// ErrDiscount and ErrConfig are shared by the whole library: the other
// packages re-export the same values under the same names. NaN or Inf in any input is an
// error, never a NaN in the output. Hot-path methods (CSR.MulVecTo,
// RLS.Update) panic on programmer errors such as a wrong slice length, as
// their documentation says.
package linalg
