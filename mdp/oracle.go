package mdp

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"

	"github.com/successor-go/successor/linalg"
)

// Reward is a reward function r(s, a, s').
type Reward func(s, a, next int) float64

// Values holds exact values of a policy: V[s] and Q[s*A + a]. Terminal
// states have V = 0 and Q = 0.
type Values struct {
	V []float64
	Q []float64

	// Solve reports how the last linear system was solved.
	Solve SolveReport
}

// SolveReport says how a policy-evaluation system (I - gamma P_pi) V = r_pi
// was solved and how well.
type SolveReport struct {
	Method     string  // "dense LU", or "iterative" with the method used
	Iterations int     // iterations of the iterative solver (0 for dense)
	Residual   float64 // ||r_pi - (I - gamma P_pi) V||_inf / max(1, ||r_pi||_inf)
}

// SolveMethod selects how the oracles solve the evaluation system.
type SolveMethod int

const (
	// SolveAuto uses a dense LU factorisation for at most DenseLimit
	// states and the iterative solver above.
	SolveAuto SolveMethod = iota
	// SolveDense always uses a dense LU factorisation (O(n^3) time, O(n^2)
	// memory).
	SolveDense
	// SolveIterative always uses the sparse iterative solver.
	SolveIterative
)

// DefaultDenseLimit is the largest number of states SolveAuto solves
// densely.
const DefaultDenseLimit = 2000

// DefaultIterTol is the default relative residual of the iterative solver.
const DefaultIterTol = 1e-12

// Solver configures the exact oracles. The zero value (and a nil *Solver)
// means the documented defaults; the package-level Evaluate, Optimal and
// friends use it.
type Solver struct {
	// Method chooses dense or iterative solves. SolveAuto (the zero
	// value) is dense for n <= DenseLimit states, iterative above.
	Method SolveMethod
	// DenseLimit is the threshold of SolveAuto. 0 means
	// DefaultDenseLimit.
	DenseLimit int
	// Tol is the relative residual the iterative solver must reach.
	// 0 means DefaultIterTol.
	Tol float64
	// MaxIter bounds the iterative solver. 0 means linalg's default
	// for gamma < 1 and 100000 sweeps for the gamma = 1 solver.
	MaxIter int
}

// Evaluate returns the exact V^pi and Q^pi of policy pi for reward r and
// discount gamma in [0, 1]:
//
//	V = (I - gamma P_pi)^-1 r_pi,   Q(s,a) = rbar(s,a) + gamma sum_s' P(s'|s,a) V(s'),
//
// with P_pi from Chain (terminal rows zero), rbar(s,a) = sum_s' P(s'|s,a)
// r(s,a,s') and r_pi(s) = sum_a pi(a|s) rbar(s,a). Terminal states have
// value 0 and stop bootstrapping.
//
// gamma = 1 is allowed when every state reaches a terminal state with
// positive probability under pi (an absorbing chain); otherwise the error
// wraps both ErrDiscount and linalg.ErrNotAbsorbing. Other errors
// wrap ErrConfig (nil mdp, policy or reward), ErrDiscount (gamma
// outside [0, 1] or NaN), ErrDimension (a policy of the wrong size, for
// the policies that implement Checker, as every policy of this package
// does), ErrNonFinite (a non-finite reward or
// result), linalg.ErrNotStochastic (pi is not a distribution),
// linalg.ErrSingular, or linalg.ErrNotConverged (iterative solver).
//
// The system is solved by linalg.SolveSuccessor (a banded or dense LU)
// for at most DefaultDenseLimit states, and above that iteratively
// (linalg.SolveIterative for gamma < 1, Gauss-Seidel sweeps for gamma = 1)
// to relative residual DefaultIterTol; use a Solver to choose. Values.Solve
// reports the method and the achieved max-norm residual. The cost is
// O(nnz(P)) to build P_pi plus the solve.
func Evaluate(m *Finite, pi Policy, r Reward, gamma float64) (*Values, error) {
	return (*Solver)(nil).Evaluate(m, pi, r, gamma)
}

// EvaluateExpected is Evaluate with the expected reward rbar[s*A + a] =
// sum_{s'} P(s'|s,a) r(s,a,s') given directly. Entries of terminal states
// are ignored. It returns an error wrapping ErrDimension if
// len(rbar) != NumStates*NumActions.
func EvaluateExpected(m *Finite, pi Policy, rbar []float64, gamma float64) (*Values, error) {
	return (*Solver)(nil).EvaluateExpected(m, pi, rbar, gamma)
}

// Evaluate is the package-level Evaluate with the settings of o.
func (o *Solver) Evaluate(m *Finite, pi Policy, r Reward, gamma float64) (*Values, error) {
	rbar, err := ExpectedReward(m, r)
	if err != nil {
		return nil, fmt.Errorf("mdp: evaluate: %w", err)
	}
	return o.EvaluateExpected(m, pi, rbar, gamma)
}

// EvaluateExpected is the package-level EvaluateExpected with the settings
// of o.
func (o *Solver) EvaluateExpected(m *Finite, pi Policy, rbar []float64, gamma float64) (*Values, error) {
	if err := checkProblem(m, rbar, gamma); err != nil {
		return nil, fmt.Errorf("mdp: evaluate: %w", err)
	}
	tab, err := m.PolicyTable(pi)
	if err != nil {
		return nil, fmt.Errorf("mdp: evaluate: %w", err)
	}
	v, err := o.evaluate(m, tab, rbar, gamma, nil)
	if err != nil {
		return nil, fmt.Errorf("mdp: evaluate: %w", err)
	}
	return v, nil
}

// ExpectedReward returns rbar[s*A + a] = sum_{s'} P(s'|s,a) r(s,a,s') for
// every non-terminal state (terminal rows are zero; r is not called
// there). The error wraps ErrNonFinite if r returns NaN or an
// infinity, or ErrConfig if r is nil.
func ExpectedReward(m *Finite, r Reward) ([]float64, error) {
	if m == nil {
		return nil, fmt.Errorf("mdp: expected reward: nil mdp: %w", ErrConfig)
	}
	if r == nil {
		return nil, fmt.Errorf("mdp: expected reward: nil reward: %w", ErrConfig)
	}
	rbar := make([]float64, m.n*m.a)
	for s := 0; s < m.n; s++ {
		if m.terminal[s] {
			continue
		}
		for a := 0; a < m.a; a++ {
			next, prob := m.Next(s, a)
			var sum float64
			for k, j := range next {
				v := r(s, a, j)
				if math.IsNaN(v) || math.IsInf(v, 0) {
					return nil, fmt.Errorf("mdp: reward r(%d,%d,%d) = %v: %w", s, a, j, v, ErrNonFinite)
				}
				sum += prob[k] * v
			}
			rbar[s*m.a+a] = sum
		}
	}
	return rbar, nil
}

func checkProblem(m *Finite, rbar []float64, gamma float64) error {
	if m == nil {
		return fmt.Errorf("nil mdp: %w", ErrConfig)
	}
	if !(gamma >= 0 && gamma <= 1) {
		return fmt.Errorf("gamma %v outside [0, 1]: %w", gamma, ErrDiscount)
	}
	if len(rbar) != m.n*m.a {
		return fmt.Errorf("expected reward has length %d, want %d: %w", len(rbar), m.n*m.a, ErrDimension)
	}
	for i, v := range rbar {
		if m.terminal[i/m.a] {
			continue
		}
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("expected reward of state %d action %d: %w", i/m.a, i%m.a, ErrNonFinite)
		}
	}
	return nil
}

// evaluate solves for V and Q given a validated policy table. A non-nil
// init is a starting guess for the iterative solvers (a warm start).
func (o *Solver) evaluate(m *Finite, tab, rbar []float64, gamma float64, init []float64) (*Values, error) {
	n, na := m.n, m.a
	p := m.chainFromTable(tab)
	b := make([]float64, n)
	for s := 0; s < n; s++ {
		if m.terminal[s] {
			continue
		}
		var sum float64
		for a := 0; a < na; a++ {
			sum += tab[s*na+a] * rbar[s*na+a]
		}
		b[s] = sum
	}
	if gamma == 1 {
		if s := linalg.CannotReach(p, m.terminal); s >= 0 {
			return nil, fmt.Errorf("gamma = 1 but state %d never reaches a terminal state under the policy: %w (%w)", s, ErrDiscount, linalg.ErrNotAbsorbing)
		}
	}
	v := make([]float64, n)
	warm := init != nil
	if warm {
		copy(v, init)
	}
	rep, err := o.solve(v, p, gamma, b, warm)
	if err != nil {
		return nil, err
	}
	for s, x := range v {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return nil, fmt.Errorf("value of state %d is %v: %w", s, x, ErrNonFinite)
		}
		if m.terminal[s] {
			v[s] = 0
		}
	}
	rep.Residual = residual(p, gamma, v, b)
	q := make([]float64, n*na)
	m.backup(q, rbar, v, gamma)
	return &Values{V: v, Q: q, Solve: rep}, nil
}

// backup sets q[s*A+a] = rbar[s*A+a] + gamma sum_s' P(s'|s,a) v[s'] for
// non-terminal s (terminal s' contribute 0) and q = 0 at terminal s.
func (m *Finite) backup(q, rbar, v []float64, gamma float64) {
	na := m.a
	for r := range q {
		if m.terminal[r/na] {
			q[r] = 0
			continue
		}
		next, prob := m.p.Row(r)
		var sum float64
		for k, j := range next {
			if !m.terminal[j] {
				sum += prob[k] * v[j]
			}
		}
		q[r] = rbar[r] + gamma*sum
	}
}

// residual returns ||b - (I - gamma P) v||_inf / max(1, ||b||_inf).
func residual(p *linalg.CSR, gamma float64, v, b []float64) float64 {
	var res, nb float64
	for i := range v {
		ind, val := p.Row(i)
		var s float64
		for k, j := range ind {
			s += val[k] * v[j]
		}
		res = math.Max(res, math.Abs(b[i]-v[i]+gamma*s))
		nb = math.Max(nb, math.Abs(b[i]))
	}
	return res / math.Max(1, nb)
}

// solve writes the solution of (I - gamma P) v = b into v. If warm, the
// iterative solvers start from the contents of v.
func (o *Solver) solve(v []float64, p *linalg.CSR, gamma float64, b []float64, warm bool) (SolveReport, error) {
	var s Solver
	if o != nil {
		s = *o
	}
	if s.DenseLimit <= 0 {
		s.DenseLimit = DefaultDenseLimit
	}
	if s.Tol <= 0 {
		s.Tol = DefaultIterTol
	}
	n := len(v)
	dense := s.Method == SolveDense || (s.Method == SolveAuto && n <= s.DenseLimit)
	if dense {
		bv := mat.NewVecDense(n, b)
		var x mat.Dense
		if gamma < 1 {
			// linalg reads the CSR in O(nnz) and uses a banded LU when the
			// chain is banded (grids in row-major order).
			if err := linalg.SolveSuccessor(&x, p, gamma, bv); err != nil {
				return SolveReport{}, err
			}
		} else {
			// gamma = 1 on an absorbing chain: I - P is non-singular
			// because every state is transient (P_pi has zero terminal rows).
			a := p.ToDense()
			a.Scale(-1, a)
			for i := 0; i < n; i++ {
				a.Set(i, i, a.At(i, i)+1)
			}
			var lu mat.LU
			lu.Factorize(a)
			if err := lu.SolveTo(&x, false, bv); err != nil {
				return SolveReport{}, fmt.Errorf("dense solve at gamma = 1: %v: %w", err, linalg.ErrSingular)
			}
		}
		for i := range v {
			v[i] = x.At(i, 0)
		}
		return SolveReport{Method: "dense LU"}, nil
	}
	if gamma < 1 {
		res, err := linalg.SolveIterative(v, p, gamma, b, &linalg.IterConfig{Tol: s.Tol, MaxIter: s.MaxIter, UseInitial: warm})
		if err != nil {
			return SolveReport{}, fmt.Errorf("iterative solve: %w", err)
		}
		return SolveReport{Method: fmt.Sprintf("iterative (%v, %v preconditioner)", res.Method, res.Precond), Iterations: res.Iterations}, nil
	}
	if !warm {
		copy(v, b)
	}
	return gaussSeidel(v, p, b, s.Tol, s.MaxIter)
}

// gaussSeidel solves (I - P) v = b for a sub-stochastic P whose chain is
// absorbing (every state transient), by Gauss-Seidel sweeps, which
// converge because the spectral radius of P is below 1. v holds the
// starting guess.
func gaussSeidel(v []float64, p *linalg.CSR, b []float64, tol float64, maxIter int) (SolveReport, error) {
	if maxIter <= 0 {
		maxIter = 100000
	}
	var nb float64
	for _, x := range b {
		nb = math.Max(nb, math.Abs(x))
	}
	for it := 1; it <= maxIter; it++ {
		for i := range v {
			ind, val := p.Row(i)
			s, d := b[i], 1.0
			for k, j := range ind {
				if j == i {
					d -= val[k]
				} else {
					s += val[k] * v[j]
				}
			}
			v[i] = s / d
		}
		if it%8 == 0 || it == maxIter {
			if r := residual(p, 1, v, b); r <= tol || nb == 0 {
				return SolveReport{Method: "iterative (Gauss-Seidel, gamma = 1)", Iterations: it}, nil
			}
		}
	}
	return SolveReport{}, fmt.Errorf("gauss-seidel at gamma = 1 after %d sweeps: %w", maxIter, linalg.ErrNotConverged)
}

// OptimalResult is the exact optimum of an MDP for a reward.
type OptimalResult struct {
	Values                   // Q* and V*
	Policy     Deterministic // a greedy optimal policy (ties to the lowest action)
	Method     string        // how it was computed
	Residual   float64       // achieved max-norm Bellman residual
	Iterations int           // iterations of the method
}

// MaxPolicyIterations bounds the policy-iteration loop of Optimal.
const MaxPolicyIterations = 1000

// Optimal returns the exact optimal Q*, V* = max_a Q* and a greedy optimal
// policy for reward r and discount gamma in [0, 1], by policy iteration
// with exact linear solves (Howard 1960; Sutton & Barto 2nd ed., Section
// 4.3). An action replaces the current one only if it improves Q by more
// than 1e-10 (1 + max |Q|), so round-off cannot make it cycle.
//
// The returned Policy is greedy in Q* with ties (actions within
// 1e-9 (1 + max |Q|) of the best) broken toward the lowest index. Residual
// is the max-norm Bellman optimality residual
//
//	max_{s,a} |Q(s,a) - rbar(s,a) - gamma sum_s' P(s'|s,a) max_a' Q(s',a')|.
//
// With gamma = 1, policy iteration starts from a policy that reaches a
// terminal state from every state (built backwards from the terminal
// states); the error wraps ErrDiscount (and
// linalg.ErrNotAbsorbing) if some state cannot reach a terminal state at
// all, or if an improvement step leads to a policy that
// never terminates (the optimum is unbounded, e.g. a positive-reward
// cycle). At gamma = 1 the lowest-index tie-break is used only if that
// policy terminates everywhere; otherwise Policy is the last policy of the
// iteration, which is also optimal.
func Optimal(m *Finite, r Reward, gamma float64) (*OptimalResult, error) {
	return (*Solver)(nil).Optimal(m, r, gamma)
}

// OptimalExpected is Optimal with the expected reward rbar[s*A + a] given
// directly (see EvaluateExpected).
func OptimalExpected(m *Finite, rbar []float64, gamma float64) (*OptimalResult, error) {
	return (*Solver)(nil).OptimalExpected(m, rbar, gamma)
}

// Optimal is the package-level Optimal with the settings of o.
func (o *Solver) Optimal(m *Finite, r Reward, gamma float64) (*OptimalResult, error) {
	rbar, err := ExpectedReward(m, r)
	if err != nil {
		return nil, fmt.Errorf("mdp: optimal: %w", err)
	}
	return o.OptimalExpected(m, rbar, gamma)
}

// OptimalExpected is the package-level OptimalExpected with the settings
// of o.
func (o *Solver) OptimalExpected(m *Finite, rbar []float64, gamma float64) (*OptimalResult, error) {
	if err := checkProblem(m, rbar, gamma); err != nil {
		return nil, fmt.Errorf("mdp: optimal: %w", err)
	}
	n, na := m.n, m.a
	var pol Deterministic
	if gamma < 1 {
		pol = make(Deterministic, n)
		for s := 0; s < n; s++ {
			if !m.terminal[s] {
				pol[s] = argmax(rbar[s*na : (s+1)*na])
			}
		}
	} else {
		var bad int
		pol, bad = m.properPolicy()
		if bad >= 0 {
			return nil, fmt.Errorf("mdp: optimal: gamma = 1 but state %d cannot reach a terminal state: %w (%w)", bad, ErrDiscount, linalg.ErrNotAbsorbing)
		}
	}
	tab := make([]float64, n*na)
	setTable := func(d Deterministic) {
		clear(tab)
		for s := 0; s < n; s++ {
			if !m.terminal[s] {
				tab[s*na+d[s]] = 1
			}
		}
	}
	var vals *Values
	var prev []float64
	it := 0
	for {
		it++
		setTable(pol)
		var err error
		vals, err = o.evaluate(m, tab, rbar, gamma, prev)
		if err != nil {
			if gamma == 1 && errors.Is(err, ErrDiscount) {
				return nil, fmt.Errorf("mdp: optimal: policy iteration reached a policy that never terminates, the optimum is unbounded or undefined at gamma = 1: %w", err)
			}
			return nil, fmt.Errorf("mdp: optimal: iteration %d: %w", it, err)
		}
		tol := 1e-10 * (1 + maxAbs(vals.Q))
		changed := false
		for s := 0; s < n; s++ {
			if m.terminal[s] {
				continue
			}
			q := vals.Q[s*na : (s+1)*na]
			best := argmax(q)
			if q[best] > q[pol[s]]+tol {
				pol[s] = best
				changed = true
			}
		}
		if !changed {
			break
		}
		prev = vals.V // warm start of the next evaluation
		if it >= MaxPolicyIterations {
			return nil, fmt.Errorf("mdp: optimal: policy iteration did not settle in %d iterations: %w", it, linalg.ErrNotConverged)
		}
	}
	q := vals.Q
	tieTol := 1e-9 * (1 + maxAbs(q))
	greedy := make(Deterministic, n)
	v := make([]float64, n)
	for s := 0; s < n; s++ {
		if m.terminal[s] {
			continue
		}
		row := q[s*na : (s+1)*na]
		best := argmax(row)
		v[s] = row[best]
		for a, x := range row {
			if x >= row[best]-tieTol {
				greedy[s] = a
				break
			}
		}
	}
	if gamma == 1 {
		setTable(greedy)
		if linalg.CannotReach(m.chainFromTable(tab), m.terminal) >= 0 {
			copy(greedy, pol)
		}
	}
	// Bellman optimality residual.
	tmp := make([]float64, n*na)
	m.backup(tmp, rbar, v, gamma)
	var res float64
	for i := range tmp {
		res = math.Max(res, math.Abs(tmp[i]-q[i]))
	}
	return &OptimalResult{
		Values:     Values{V: v, Q: q, Solve: vals.Solve},
		Policy:     greedy,
		Method:     "policy iteration, " + vals.Solve.Method,
		Residual:   res,
		Iterations: it,
	}, nil
}

// properPolicy returns a deterministic policy under which every state that
// can reach a terminal state does so with positive probability: states are
// visited breadth first backwards from the terminal states, and each takes
// an action with positive probability of moving into a state visited
// before it. It also returns a state that cannot reach a terminal state
// under any actions, or -1.
func (m *Finite) properPolicy() (Deterministic, int) {
	n, na := m.n, m.a
	// Reverse edges next -> row (s*A + a) by counting sort.
	cnt := make([]int, n+1)
	for r := 0; r < n*na; r++ {
		next, prob := m.p.Row(r)
		for k, j := range next {
			if prob[k] > 0 {
				cnt[j+1]++
			}
		}
	}
	for i := 0; i < n; i++ {
		cnt[i+1] += cnt[i]
	}
	rows := make([]int, cnt[n])
	fill := make([]int, n)
	copy(fill, cnt[:n])
	for r := 0; r < n*na; r++ {
		next, prob := m.p.Row(r)
		for k, j := range next {
			if prob[k] > 0 {
				rows[fill[j]] = r
				fill[j]++
			}
		}
	}
	pol := make(Deterministic, n)
	done := make([]bool, n)
	queue := make([]int, 0, n)
	for s := 0; s < n; s++ {
		if m.terminal[s] {
			done[s] = true
			queue = append(queue, s)
		}
	}
	for len(queue) > 0 {
		j := queue[0]
		queue = queue[1:]
		for _, r := range rows[cnt[j]:cnt[j+1]] {
			if s := r / na; !done[s] {
				done[s] = true
				pol[s] = r % na
				queue = append(queue, s)
			}
		}
	}
	for s, d := range done {
		if !d {
			return pol, s
		}
	}
	return pol, -1
}

func maxAbs(x []float64) float64 {
	var m float64
	for _, v := range x {
		m = math.Max(m, math.Abs(v))
	}
	return m
}
