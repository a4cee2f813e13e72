package sf

import (
	"fmt"
	"math"

	"github.com/successor-go/successor/linalg"
	"github.com/successor-go/successor/mdp"
)

// Target selects what a TD learner bootstraps from at a non-terminal next
// state s'.
type Target int

const (
	// Sampled bootstraps from psi(s', a') for the next action a' the caller
	// passes: the on-policy (SARSA-style) target. It learns psi of the
	// policy that generates the actions.
	Sampled Target = iota
	// Expected bootstraps from sum_a' pi(a'|s') psi(s', a') for the policy
	// in the settings (expected-SARSA style). It learns psi^pi from
	// transitions of any behaviour that visits every pair.
	Expected
	// Greedy bootstraps from psi(s', a*) with a* = argmax_a' psi(s', a') . w
	// for the task vector w in the settings, ties to the lowest action: SF
	// Q-learning (Barreto et al. 2017, Successor Features for Transfer in
	// Reinforcement Learning). psi . w then follows Q-learning
	// for the reward phi . w, and psi converges to the SFs of a policy
	// greedy for w.
	Greedy
)

// String returns the name of the target.
func (t Target) String() string {
	switch t {
	case Sampled:
		return "sampled"
	case Expected:
		return "expected"
	case Greedy:
		return "greedy"
	}
	return fmt.Sprintf("Target(%d)", int(t))
}

// StepSchedule is a step-size schedule. The step of the update of pair
// (s, a), after n earlier updates of that pair, is
//
//	alpha_n = StepSize / (1 + n)^Power.
//
// Power = 0 gives the constant step StepSize: the estimate then converges
// only in mean, to a neighbourhood of the fixed point whose width grows
// with StepSize. Power in (1/2, 1] satisfies the Robbins-Monro conditions
// (sum alpha_n = inf, sum alpha_n^2 < inf), under which tabular TD(0)
// converges with probability 1 when every pair is updated infinitely often
// (Jaakkola, Jordan and Singh 1994; Tsitsiklis 1994). Power = 1 is the
// running average and is slow when gamma is near 1; Power around 0.6-0.8 is
// the common practice. Powers 1, 0.75 and 0.5 take fast paths (a division
// and up to two square roots); others cost an exponential and a logarithm
// per update.
//
// The zero value is the constant step 0.1.
type StepSchedule struct {
	// StepSize is the initial step. 0 means 0.1 when Power = 0 and 1 when
	// Power > 0.
	StepSize float64
	// Power is the decay exponent, in [0, 1]; 0 means constant.
	Power float64
}

func (st StepSchedule) resolve() (StepSchedule, error) {
	if !(st.Power >= 0 && st.Power <= 1) {
		return st, fmt.Errorf("step power %v outside [0, 1]: %w", st.Power, ErrConfig)
	}
	if !(st.StepSize >= 0 && st.StepSize <= 1) {
		return st, fmt.Errorf("step %v outside [0, 1]: %w", st.StepSize, ErrConfig)
	}
	if st.StepSize == 0 {
		st.StepSize = 0.1
		if st.Power > 0 {
			st.StepSize = 1
		}
	}
	return st, nil
}

// schedule holds the per-pair visit counts of a decaying step size.
type schedule struct {
	alpha, power float64
	visits       []float64 // per pair; nil for a constant step
}

func newSchedule(st StepSchedule, pairs int) schedule {
	sc := schedule{alpha: st.StepSize, power: st.Power}
	if st.Power > 0 {
		sc.visits = make([]float64, pairs)
	}
	return sc
}

// step returns the step for pair i and counts the visit.
func (sc *schedule) step(i int) float64 {
	if sc.visits == nil {
		return sc.alpha
	}
	n := sc.visits[i] + 1
	sc.visits[i] = n
	switch sc.power {
	case 1:
		return sc.alpha / n
	case 0.5:
		return sc.alpha / math.Sqrt(n)
	case 0.75:
		r := math.Sqrt(n)
		return sc.alpha / (r * math.Sqrt(r))
	}
	return sc.alpha * math.Exp(-sc.power*math.Log(n))
}

// TDConfig configures a TD learner. A nil *TDConfig means the zero value:
// the Sampled target with the constant step 0.1.
type TDConfig struct {
	Target Target
	// Policy is the target policy of Expected; it is read once, at every
	// state (terminal ones included), when the learner is made. Required
	// for Expected, ignored otherwise.
	Policy mdp.Policy
	// Task is the task vector w of Greedy (copied). Required for Greedy,
	// ignored otherwise.
	Task []float64
	// Schedule is the step-size schedule; n counts the earlier updates of the
	// same pair.
	Schedule StepSchedule
}

// TD is the tabular TD(0) learner for successor features. An update for the
// transition (s, a, s') moves psi(s, a) toward its target,
//
//	psi(s,a) <- psi(s,a) + alpha (phi(s,a,s') + gamma psi' - psi(s,a)),
//
// where psi' depends on the Target (psi(s',a'), the pi-expectation over a',
// or the greedy action for w) and psi' = 0 when s' is terminal.
//
// Termination and truncation: pass terminal = true only when s' is a
// terminal state of the task (it bootstraps nothing). When an episode is cut
// by a time limit, pass terminal = false: s' still has a future and the
// update bootstraps from it.
//
// For the built-in one-hot and label maps the learner never forms phi (it
// adds alpha at the one or two hot entries), and for NextState and random
// features it reads the stored row in place. With such a map, the Sampled
// target and a step below 1, Update makes one pass over the row:
// about the cost of a row of multiply-adds (see BenchmarkTDRatio). The
// Greedy and Expected targets read the A rows of the next state first.
//
// Every update sums the new row; a NaN or infinity there stops the learner
// with a *DivergenceError. A TD learner is not safe for concurrent use.
type TD struct {
	Table *Table // the table being learned

	phi    FeatureMap
	kind   mapKind   // built-in sparse map
	labels []int     // label of each state, for kindLabels
	lconst int       // index of the constant label dimension, or -1
	sparse sparseMap // other sparse maps
	rows   rowMap
	gamma  float64
	target Target
	probs  []float64 // pi(a|s) at s*A + a, for Expected
	task   []float64 // w, for Greedy
	sched  schedule
	step   step // the scalars of a constant step

	buf   []float64 // phi scratch for generic maps
	mix   []float64 // expected-target scratch
	steps int
	err   error
}

// NewTD returns a TD(0) learner updating t in place for the features phi and
// discount gamma in [0, 1]. It returns an error wrapping ErrDiscount,
// ErrDimension (phi.Dim() != t.D, a task or policy of the wrong size, a
// feature map whose mdp.Checker refuses the table's states and actions),
// ErrConfig (a nil table or feature map, a missing policy or task, an
// unknown target or a bad step) or linalg.ErrNotStochastic (a policy that
// is not a distribution).
func NewTD(t *Table, phi FeatureMap, gamma float64, s *TDConfig) (*TD, error) {
	if s == nil {
		s = &TDConfig{}
	}
	if t == nil || phi == nil {
		return nil, fmt.Errorf("sf: td: nil table or feature map: %w", ErrConfig)
	}
	if !(gamma >= 0 && gamma <= 1) {
		return nil, fmt.Errorf("sf: td: gamma %v outside [0, 1]: %w", gamma, ErrDiscount)
	}
	if phi.Dim() != t.D {
		return nil, fmt.Errorf("sf: td: features have dimension %d, table %d: %w", phi.Dim(), t.D, ErrDimension)
	}
	if err := checkTable("td", t); err != nil {
		return nil, err
	}
	if err := checkFeatures(phi, t.S, t.A); err != nil {
		return nil, fmt.Errorf("sf: td: %w", err)
	}
	st, err := s.Schedule.resolve()
	if err != nil {
		return nil, fmt.Errorf("sf: td: %w", err)
	}
	l := &TD{
		Table:  t,
		phi:    phi,
		gamma:  gamma,
		target: s.Target,
		sched:  newSchedule(st, t.S*t.A),
		buf:    make([]float64, t.D),
		mix:    make([]float64, t.D),
	}
	l.lconst = -1
	switch f := phi.(type) {
	case OneHotState:
		l.kind = kindState
	case OneHotStateAction:
		l.kind = kindStateAction
	case *Labels:
		if len(f.of) != t.S {
			return nil, fmt.Errorf("sf: td: labels for %d states, table has %d: %w", len(f.of), t.S, ErrDimension)
		}
		l.kind, l.labels = kindLabels, f.of
		if f.Constant {
			l.lconst = f.n
		}
	default:
		l.sparse, _ = phi.(sparseMap)
		l.rows, _ = phi.(rowMap)
	}
	l.step = newStep(st.StepSize, gamma)
	if l.kind == kindState && t.D != t.S || l.kind == kindStateAction && t.D != t.S*t.A {
		return nil, fmt.Errorf("sf: td: one-hot map of dimension %d does not match a table of %d states and %d actions: %w", t.D, t.S, t.A, ErrDimension)
	}
	switch s.Target {
	case Sampled:
	case Expected:
		if s.Policy == nil {
			return nil, fmt.Errorf("sf: td: expected target without a policy: %w", ErrConfig)
		}
		p, err := policyProbs(t.S, t.A, s.Policy)
		if err != nil {
			return nil, fmt.Errorf("sf: td: %w", err)
		}
		l.probs = p
	case Greedy:
		if s.Task == nil {
			return nil, fmt.Errorf("sf: td: greedy target without a task: %w", ErrConfig)
		}
		if err := l.SetTask(s.Task); err != nil {
			return nil, err
		}
	default:
		return nil, fmt.Errorf("sf: td: unknown target %d: %w", int(s.Target), ErrConfig)
	}
	return l, nil
}

// SetTask replaces the task vector of the Greedy target (copied). It
// returns an error wrapping ErrDimension if len(w) != D, ErrNonFinite if w
// has a NaN or infinity.
func (l *TD) SetTask(w []float64) error {
	if len(w) != l.Table.D {
		return fmt.Errorf("sf: td: task vector has length %d, want %d: %w", len(w), l.Table.D, ErrDimension)
	}
	for _, v := range w {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("sf: td: task vector: %w", ErrNonFinite)
		}
	}
	l.task = append(l.task[:0], w...)
	return nil
}

// Steps returns the number of updates made.
func (l *TD) Steps() int { return l.steps }

// Err returns the *DivergenceError of the first update that produced a
// non-finite value, or nil.
func (l *TD) Err() error { return l.err }

// Update makes one TD(0) update of psi(s, a) from the transition to next,
// with phi(s, a, next) from the learner's feature map. terminal says that
// next is a terminal state (no bootstrap); nextAction is the action taken in
// next, read only by the Sampled target of a non-terminal next.
//
// It returns nil, or a *DivergenceError (wrapping ErrDiverged) if this or an
// earlier update produced a non-finite value; after that, updates do
// nothing. It panics if an index is out of range. It does not allocate.
func (l *TD) Update(s, a, next int, terminal bool, nextAction int) error {
	return l.update(s, a, next, terminal, nextAction, nil)
}

// UpdateFeatures is Update with phi(s, a, next) given by the caller (len D),
// for features computed elsewhere; the learner's feature map is not called.
// It panics if len(phi) != D or an index is out of range. It does not
// allocate.
func (l *TD) UpdateFeatures(s, a int, phi []float64, next int, terminal bool, nextAction int) error {
	if l.err != nil {
		return l.err
	}
	if len(phi) != l.Table.D {
		panic(fmt.Sprintf("sf: td: feature slice has length %d, want %d", len(phi), l.Table.D))
	}
	return l.update(s, a, next, terminal, nextAction, phi)
}

// update is Update with the features phi, or with the learner's feature map
// when phi is nil. The built-in sparse maps give the non-zero entries x,
// added after the kernel's pass over the row; other maps give a dense f,
// added in the pass. The target picks the kernel and the row or rows it
// bootstraps from.
func (l *TD) update(s, a, next int, terminal bool, nextAction int, phi []float64) error {
	if l.err != nil {
		return l.err
	}
	t := l.Table
	d, na := t.D, t.A
	if uint(next) >= uint(t.S) {
		panic(fmt.Sprintf("sf: td: next state %d out of range [0, %d)", next, t.S))
	}
	if uint(s) >= uint(t.S) || uint(a) >= uint(na) {
		panic(fmt.Sprintf("sf: td: pair (%d, %d) out of range", s, a))
	}
	an := nextAction // the action the Sampled or Greedy target bootstraps from
	if l.target == Greedy && !terminal {
		k := next * na * d
		an, _ = greedy(t.Data[k:k+na*d], l.task, na, d)
	}
	pair := s*na + a
	cur := t.Data[pair*d : pair*d+d : pair*d+d]
	st := l.step
	if l.sched.visits != nil {
		st = newStep(l.sched.step(pair), l.gamma)
	}
	f := phi
	x := sparse{i: -1, j: -1}
	switch {
	case f != nil:
	case l.kind == kindState:
		x = sparse{i: s, vi: 1, j: -1}
	case l.kind == kindStateAction:
		x = sparse{i: pair, vi: 1, j: -1}
	case l.kind == kindLabels:
		x = sparse{i: l.labels[next], vi: 1, j: l.lconst, vj: 1}
	case l.sparse != nil:
		x.i, x.vi, x.j, x.vj = l.sparse.hot(s, a, next)
	case l.rows != nil:
		f = l.rows.row(s, a, next)
	default:
		l.phi.Features(l.buf, s, a, next)
		f = l.buf
	}
	var sum float64
	switch {
	case terminal:
		sum = kernelTerminal(cur, f, st)
	case l.target == Expected && f == nil && st.om != 0:
		// One pass: mix the next rows and update together.
		sum = kernelExpected(cur, t.Data[next*na*d:(next+1)*na*d], l.probs[next*na:(next+1)*na], st)
	case l.target == Expected:
		sum = kernelRow(cur, l.mixture(next), f, st)
	default:
		if uint(an) >= uint(na) {
			panic(fmt.Sprintf("sf: td: next action %d out of range [0, %d)", an, na))
		}
		q := (next*na + an) * d
		nxt := t.Data[q : q+d : q+d]
		if f != nil || st.om == 0 {
			sum = kernelRow(cur, nxt, f, st)
			break
		}
		// The kernel of the Sampled and Greedy targets for sparse
		// features and a step below 1, cur = om*(cur + h*nxt): the
		// common case, written out here since a call costs about a
		// tenth of an update at d = 16 (BenchmarkTDRatio). The sparse
		// features join s0 before s1 does.
		om, h := st.om, st.h
		var s0, s1 float64
		k := 0
		for ; k <= d-8; k += 8 {
			c := cur[k : k+8 : k+8]
			y := nxt[k : k+8 : k+8]
			v0 := om * (c[0] + h*y[0])
			v1 := om * (c[1] + h*y[1])
			v2 := om * (c[2] + h*y[2])
			v3 := om * (c[3] + h*y[3])
			v4 := om * (c[4] + h*y[4])
			v5 := om * (c[5] + h*y[5])
			v6 := om * (c[6] + h*y[6])
			v7 := om * (c[7] + h*y[7])
			c[0], c[1], c[2], c[3] = v0, v1, v2, v3
			c[4], c[5], c[6], c[7] = v4, v5, v6, v7
			s0 += (v0 + v1) + (v2 + v3)
			s1 += (v4 + v5) + (v6 + v7)
		}
		for ; k < d; k++ {
			v := om * (cur[k] + h*nxt[k])
			cur[k] = v
			s0 += v
		}
		return l.count(s, a, x.add(cur, st.alpha, s0)+s1)
	}
	return l.count(s, a, x.add(cur, st.alpha, sum))
}

// sparse holds the non-zero entries of a sparse feature vector: vi at
// index i and vj at index j, index -1 for none.
type sparse struct {
	i, j   int
	vi, vj float64
}

// add adds alpha times the features to the row cur and returns sum plus
// the new values of the entries it changed.
func (x sparse) add(cur []float64, alpha, sum float64) float64 {
	if x.i >= 0 {
		cur[x.i] += alpha * x.vi
		sum += cur[x.i]
	}
	if x.j >= 0 {
		cur[x.j] += alpha * x.vj
		sum += cur[x.j]
	}
	return sum
}

// count counts an update of psi(s, a) whose new row sums to sum, and stops
// the learner if that is not finite.
func (l *TD) count(s, a int, sum float64) error {
	l.steps++
	if sum-sum != 0 { // NaN or an infinity in the updated row
		l.err = &DivergenceError{Learner: "td", Step: l.steps, State: s, Action: a}
		return l.err
	}
	return nil
}

// mixture writes sum_a' pi(a'|s') psi(s', a') into the scratch and returns it.
func (l *TD) mixture(next int) []float64 {
	t := l.Table
	d, na := t.D, t.A
	m := l.mix[:d:d]
	clear(m)
	p := l.probs[next*na : next*na+na : next*na+na]
	base := t.Data[next*na*d : (next+1)*na*d : (next+1)*na*d]
	for a, q := range p {
		if q != 0 {
			axpy(m, base[a*d:a*d+d:a*d+d], q)
		}
	}
	return m
}

// mapKind names the built-in sparse feature maps, whose entries update
// adds without forming phi.
type mapKind uint8

const (
	kindOther mapKind = iota
	kindState
	kindStateAction
	kindLabels
)

// policyProbs tabulates pi(a|s) for n states and na actions, checking that
// pi fits (mdp.Checker) and that every row is a distribution.
func policyProbs(n, na int, pi mdp.Policy) ([]float64, error) {
	if c, ok := pi.(mdp.Checker); ok {
		if err := c.Check(n, na); err != nil {
			return nil, err
		}
	}
	probs := make([]float64, n*na)
	for s := 0; s < n; s++ {
		if err := checkDist(probs[s*na:(s+1)*na], s, pi); err != nil {
			return nil, err
		}
	}
	return probs, nil
}

func checkDist(row []float64, s int, pi mdp.Policy) error {
	pi.Probs(row, s)
	var sum float64
	for a, v := range row {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("policy pi(%d|%d): %w", a, s, ErrNonFinite)
		}
		if v < 0 {
			return fmt.Errorf("policy pi(%d|%d) = %v: %w", a, s, v, linalg.ErrNotStochastic)
		}
		sum += v
	}
	if math.Abs(sum-1) > policyTol {
		return fmt.Errorf("policy at state %d sums to %v: %w", s, sum, linalg.ErrNotStochastic)
	}
	return nil
}
