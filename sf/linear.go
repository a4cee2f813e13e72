package sf

import (
	"fmt"
	"math"

	"github.com/successor-go/successor/internal/vec"
)

// Linear is a linear approximator of successor features over an
// observation vector x(s) in R^M,
//
//	psi(s, a) = W_a x(s),
//
// with one D x M matrix W_a per action, stored row-major one after another
// in W: entry (k, j) of W_a is W[(a*D + k)*M + j]. It is for state spaces too
// large for a Table; with one-hot observations x(s) = e_s it is a Table
// stored transposed.
type Linear struct {
	A, D, M int
	W       []float64
}

// NewLinear returns a zero approximator for the given numbers of actions,
// features and observation entries. It returns an error wrapping
// ErrDimension if a size is not positive or the weights would number more
// than MaxValues.
func NewLinear(actions, d, m int) (*Linear, error) {
	if err := checkSizes("new linear", actions, d, m); err != nil {
		return nil, err
	}
	return &Linear{A: actions, D: d, M: m, W: make([]float64, actions*d*m)}, nil
}

// Clone returns a deep copy of l.
func (l *Linear) Clone() *Linear {
	c := *l
	c.W = append([]float64(nil), l.W...)
	return &c
}

// Shape returns the number of actions and the feature dimension.
func (l *Linear) Shape() (actions, dim int) { return l.A, l.D }

// Eval writes psi(x, a) = W_a x into dst. It panics if len(dst) != D,
// len(x) != M or a is out of range. It does not allocate.
func (l *Linear) Eval(dst, x []float64, a int) {
	if len(dst) != l.D || len(x) != l.M {
		panic(fmt.Sprintf("sf: linear: eval lengths %d, %d, want %d, %d", len(dst), len(x), l.D, l.M))
	}
	if uint(a) >= uint(l.A) {
		panic(fmt.Sprintf("sf: linear: action %d out of range [0, %d)", a, l.A))
	}
	m := l.M
	w := l.W[a*l.D*m : (a+1)*l.D*m]
	for k := range dst {
		dst[k] = vec.Dot(w[k*m:(k+1)*m], x)
	}
}

// EvalAll writes psi(x, a) for every action into dst, action-major
// (dst[a*D + k]), as a GPI source lays them out. It panics if
// len(dst) != A*D or len(x) != M. It does not allocate.
func (l *Linear) EvalAll(dst, x []float64) {
	if len(dst) != l.A*l.D || len(x) != l.M {
		panic(fmt.Sprintf("sf: linear: eval lengths %d, %d, want %d, %d", len(dst), len(x), l.A*l.D, l.M))
	}
	m := l.M
	for r := range dst {
		dst[r] = vec.Dot(l.W[r*m:(r+1)*m], x)
	}
}

// LinearSource adapts a Linear to a GPI source over integer states, with
// the observation of state s written by Obs. It holds scratch space, so it
// must not be used by several goroutines at once.
type LinearSource struct {
	L   *Linear
	Obs func(dst []float64, s int) // writes x(s), len M
	x   []float64
}

// NewLinearSource returns the source psi(s, a) = W_a x(s) for obs writing
// x(s).
func NewLinearSource(l *Linear, obs func(dst []float64, s int)) *LinearSource {
	return &LinearSource{L: l, Obs: obs, x: make([]float64, l.M)}
}

// Shape returns the number of actions and the feature dimension.
func (src *LinearSource) Shape() (actions, dim int) { return src.L.A, src.L.D }

// Psi writes psi(s, a) = W_a x(s) for every action into dst, action-major.
// It panics if len(dst) != A*D. It does not allocate.
func (src *LinearSource) Psi(dst []float64, s int) {
	if len(src.x) != src.L.M {
		src.x = make([]float64, src.L.M)
	}
	src.Obs(src.x, s)
	src.L.EvalAll(dst, src.x)
}

// LinearTDConfig configures a LinearTD learner. A nil *LinearTDConfig
// means the zero value: the Sampled target with the constant step 0.1.
type LinearTDConfig struct {
	Target Target
	// Policy writes the target policy's probabilities pi(.|x') (len A) for
	// the observation x' of the next state. Required for Expected.
	Policy func(dst, x []float64)
	// Task is the task vector w of Greedy (copied). Required for Greedy.
	Task []float64
	// Schedule is the step-size schedule; n counts all updates of the learner
	// (not per pair): alpha_n = StepSize / (1 + n)^Power.
	Schedule StepSchedule
}

// LinearTD is the semi-gradient TD(0) learner for a Linear approximator
// (Sutton & Barto 2nd ed., Section 9.3, applied to each feature k):
//
//	delta = phi(s,a,s') + gamma psi' - W_a x,
//	W_a  <- W_a + alpha delta x^T,
//
// with psi' = W_a' x' (Sampled), sum_a' pi(a'|x') W_a' x' (Expected) or
// W_a* x' for the a* greedy in psi . w (Greedy), and psi' = 0 at a terminal
// next state (a truncated one bootstraps; see TD). On-policy linear TD
// converges to the TD fixed point (Tsitsiklis and Van Roy 1997) under the
// Robbins-Monro conditions of StepSize; off-policy and greedy targets carry
// no such guarantee (divergence is detected and reported).
//
// An update costs about (2 + A) D M multiply-adds for Expected and Greedy
// (all actions at x' are evaluated) and 3 D M for Sampled. A LinearTD is not
// safe for concurrent use.
type LinearTD struct {
	Model *Linear

	gamma  float64
	target Target
	policy func(dst, x []float64)
	task   []float64
	sched  schedule

	tgt   []float64 // psi' (D)
	all   []float64 // psi(x', .) (A*D)
	probs []float64 // pi(.|x') (A)
	steps int
	err   error
}

// NewLinearTD returns a semi-gradient TD(0) learner updating l in place with
// discount gamma in [0, 1]. Errors are as for NewTD.
func NewLinearTD(l *Linear, gamma float64, s *LinearTDConfig) (*LinearTD, error) {
	if s == nil {
		s = &LinearTDConfig{}
	}
	if l == nil {
		return nil, fmt.Errorf("sf: linear td: nil model: %w", ErrConfig)
	}
	if !(gamma >= 0 && gamma <= 1) {
		return nil, fmt.Errorf("sf: linear td: gamma %v outside [0, 1]: %w", gamma, ErrDiscount)
	}
	if err := checkSizes("linear td", l.A, l.D, l.M); err != nil {
		return nil, err
	}
	if len(l.W) != l.A*l.D*l.M {
		return nil, fmt.Errorf("sf: linear td: weights have length %d, want %d: %w", len(l.W), l.A*l.D*l.M, ErrDimension)
	}
	st, err := s.Schedule.resolve()
	if err != nil {
		return nil, fmt.Errorf("sf: linear td: %w", err)
	}
	lt := &LinearTD{
		Model:  l,
		gamma:  gamma,
		target: s.Target,
		sched:  newSchedule(st, 1),
		tgt:    make([]float64, l.D),
		all:    make([]float64, l.A*l.D),
		probs:  make([]float64, l.A),
	}
	switch s.Target {
	case Sampled:
	case Expected:
		if s.Policy == nil {
			return nil, fmt.Errorf("sf: linear td: expected target without a policy: %w", ErrConfig)
		}
		lt.policy = s.Policy
	case Greedy:
		if s.Task == nil {
			return nil, fmt.Errorf("sf: linear td: greedy target without a task: %w", ErrConfig)
		}
		if len(s.Task) != l.D {
			return nil, fmt.Errorf("sf: linear td: task vector has length %d, want %d: %w", len(s.Task), l.D, ErrDimension)
		}
		for _, v := range s.Task {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, fmt.Errorf("sf: linear td: task vector: %w", ErrNonFinite)
			}
		}
		lt.task = append([]float64(nil), s.Task...)
	default:
		return nil, fmt.Errorf("sf: linear td: unknown target %d: %w", int(s.Target), ErrConfig)
	}
	return lt, nil
}

// Steps returns the number of updates made.
func (lt *LinearTD) Steps() int { return lt.steps }

// Err returns the *DivergenceError of the first update with a non-finite
// TD error, or nil.
func (lt *LinearTD) Err() error { return lt.err }

// Update makes one semi-gradient update from the transition with
// observation x, action a, features phi = phi(s, a, s'), next observation
// xNext, and nextAction (read only by the Sampled target at a non-terminal
// next state). xNext is not read when terminal is true and may be nil.
//
// It returns nil, or a *DivergenceError (State -1) once a TD error is
// non-finite; after that, updates do nothing. It panics if a slice has the
// wrong length or an action is out of range. It does not allocate.
func (lt *LinearTD) Update(x []float64, a int, phi, xNext []float64, terminal bool, nextAction int) error {
	if lt.err != nil {
		return lt.err
	}
	l := lt.Model
	d, m := l.D, l.M
	if len(x) != m || len(phi) != d || (!terminal && len(xNext) != m) {
		panic(fmt.Sprintf("sf: linear td: lengths x %d, phi %d, next %d, want %d, %d, %d", len(x), len(phi), len(xNext), m, d, m))
	}
	if uint(a) >= uint(l.A) {
		panic(fmt.Sprintf("sf: linear td: action %d out of range [0, %d)", a, l.A))
	}
	alpha := lt.sched.step(0)
	tgt := lt.tgt
	same := -1 // the action whose rows give psi' one row at a time
	switch {
	case terminal:
		clear(tgt)
	case lt.target == Sampled:
		if uint(nextAction) >= uint(l.A) {
			panic(fmt.Sprintf("sf: linear td: next action %d out of range [0, %d)", nextAction, l.A))
		}
		same = nextAction
	case lt.target == Greedy:
		l.EvalAll(lt.all, xNext)
		a2, _ := greedy(lt.all, lt.task, l.A, d)
		copy(tgt, lt.all[a2*d:(a2+1)*d])
	default: // Expected
		l.EvalAll(lt.all, xNext)
		lt.policy(lt.probs, xNext)
		clear(tgt)
		for a2, q := range lt.probs {
			if q != 0 {
				axpy(tgt, lt.all[a2*d:(a2+1)*d], q)
			}
		}
	}
	wa := l.W[a*d*m : (a+1)*d*m]
	var check float64
	for k := 0; k < d; k++ {
		row := wa[k*m : (k+1)*m : (k+1)*m]
		var next, now float64
		if same >= 0 {
			next, now = dot2(l.W[(same*d+k)*m:(same*d+k+1)*m], xNext, row, x)
		} else {
			next, now = tgt[k], vec.Dot(row, x)
		}
		delta := phi[k] + lt.gamma*next - now
		check += delta
		axpy(row, x, alpha*delta)
	}
	lt.steps++
	if math.IsNaN(check) || math.IsInf(check, 0) {
		lt.err = &DivergenceError{Learner: "linear", Step: lt.steps, State: -1, Action: a}
		return lt.err
	}
	return nil
}
