package sf

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/successor-go/successor/internal/vec"
	"github.com/successor-go/successor/mdp"
)

// FeatureMap gives transition features phi(s, a, s') in R^d. Implement it to
// plug your own features into every learner and oracle of the library.
//
// A map that knows the states and actions it covers should also implement
// mdp.Checker (Check(numStates, numActions int) error), as the maps of this
// package do: Exact and the TD learners call it, so that a map built for
// another MDP is an error wrapping ErrDimension rather than a panic.
// A map without it is trusted to accept every state and action of the MDP.
type FeatureMap interface {
	// Dim returns d, the number of features.
	Dim() int
	// Features writes phi(s, a, next) into dst (len d). It panics if
	// len(dst) != Dim() or an index is out of range.
	Features(dst []float64, s, a, next int)
}

// sparseMap is implemented by the built-in maps whose phi(s, a, s') has at
// most two non-zero entries. The TD learners use it to skip the feature
// vector altogether: hot returns the indices (or -1) and values of the
// non-zero entries.
type sparseMap interface {
	hot(s, a, next int) (i int, vi float64, j int, vj float64)
}

// rowMap is implemented by the built-in maps whose phi(s, a, s') is a row of
// a stored table; row returns a view of it that must not be modified.
type rowMap interface {
	row(s, a, next int) []float64
}

// Pin the built-in maps to the interfaces they serve.
var (
	_ FeatureMap = OneHotState{}
	_ FeatureMap = OneHotStateAction{}
	_ FeatureMap = (*Labels)(nil)
	_ FeatureMap = (*NextState)(nil)
	_ FeatureMap = FeatureFunc{}
	_ sparseMap  = OneHotState{}
	_ sparseMap  = OneHotStateAction{}
	_ sparseMap  = (*Labels)(nil)
	_ rowMap     = (*NextState)(nil)

	_ mdp.Checker = OneHotState{}
	_ mdp.Checker = OneHotStateAction{}
	_ mdp.Checker = (*Labels)(nil)
	_ mdp.Checker = (*NextState)(nil)
)

// checkFeatures calls phi's Check for an MDP of numStates states and
// numActions actions, if phi has one.
func checkFeatures(phi FeatureMap, numStates, numActions int) error {
	if c, ok := phi.(mdp.Checker); ok {
		return c.Check(numStates, numActions)
	}
	return nil
}

func checkLen(name string, dst []float64, d int) {
	if len(dst) != d {
		panic(fmt.Sprintf("sf: %s: feature slice has length %d, want %d", name, len(dst), d))
	}
}

// OneHotState is the one-hot feature of the current state,
//
//	phi(s, a, s') = e_s    (d = N),
//
// so that psi^pi(s, a) counts the discounted visits to every state starting
// with the visit to s at time 0: averaged over a ~ pi(.|s) it is row s of the
// successor representation M = (I - gamma P_pi)^-1 (Dayan 1993), with the
// transitions into terminal states removed from P_pi. See Exact for the
// identity in full.
type OneHotState struct {
	N int // number of states
}

// Dim returns N.
func (f OneHotState) Dim() int { return f.N }

// Features writes e_s into dst. It panics if len(dst) != N or s is out of
// range.
func (f OneHotState) Features(dst []float64, s, a, next int) {
	checkLen("one-hot state", dst, f.N)
	clear(dst)
	dst[s] = 1
}

// Check returns an error wrapping ErrDimension unless N is numStates.
func (f OneHotState) Check(numStates, numActions int) error {
	if f.N != numStates {
		return fmt.Errorf("sf: one-hot state: %d states, mdp has %d: %w", f.N, numStates, ErrDimension)
	}
	return nil
}

func (f OneHotState) hot(s, a, next int) (int, float64, int, float64) {
	if uint(s) >= uint(f.N) {
		panic(fmt.Sprintf("sf: one-hot state: state %d out of range [0, %d)", s, f.N))
	}
	return s, 1, -1, 0
}

// OneHotStateAction is the one-hot feature of the current state-action pair,
//
//	phi(s, a, s') = e_{s*A + a}    (d = N*A),
//
// so that the exact SFs are the successor representation of the chain over
// state-action pairs: Psi = (I - gamma P_pi)^-1 with P_pi as in Exact.
type OneHotStateAction struct {
	N, A int // number of states and actions
}

// Dim returns N*A.
func (f OneHotStateAction) Dim() int { return f.N * f.A }

// Features writes e_{s*A+a} into dst. It panics if len(dst) != N*A or an index
// is out of range.
func (f OneHotStateAction) Features(dst []float64, s, a, next int) {
	checkLen("one-hot state-action", dst, f.N*f.A)
	i, _, _, _ := f.hot(s, a, next)
	clear(dst)
	dst[i] = 1
}

// Check returns an error wrapping ErrDimension unless N and A are
// numStates and numActions.
func (f OneHotStateAction) Check(numStates, numActions int) error {
	if f.N != numStates || f.A != numActions {
		return fmt.Errorf("sf: one-hot state-action: %d states x %d actions, mdp has %d x %d: %w", f.N, f.A, numStates, numActions, ErrDimension)
	}
	return nil
}

func (f OneHotStateAction) hot(s, a, next int) (int, float64, int, float64) {
	if uint(s) >= uint(f.N) || uint(a) >= uint(f.A) {
		panic(fmt.Sprintf("sf: one-hot state-action: pair (%d, %d) out of range", s, a))
	}
	return s*f.A + a, 1, -1, 0
}

// Labels is the place feature of the next state: one dimension per label,
//
//	phi(s, a, s')[l] = 1 if s' carries label l, else 0,
//
// so that a reward phi . w pays w[l] on entering a cell labelled l. With
// Constant set, one more dimension (the last) is 1 on every transition, so
// that w can hold a per-step cost.
type Labels struct {
	of       []int // label of each state, -1 for none
	n        int   // number of labels
	Constant bool  // append a constant dimension
}

// NewLabels returns the label features for states labelled labelOf[s] in
// [0, numLabels), or -1 for an unlabelled state. The slice is copied. It
// returns an error wrapping ErrDimension if numLabels < 0 or above
// MaxValues, a label is out of range, or the map would have no dimension
// at all.
func NewLabels(labelOf []int, numLabels int, constant bool) (*Labels, error) {
	if numLabels < 0 || numLabels > MaxValues || (numLabels == 0 && !constant) {
		return nil, fmt.Errorf("sf: labels: %d labels and no constant: %w", numLabels, ErrDimension)
	}
	of := make([]int, len(labelOf))
	for s, l := range labelOf {
		if l < -1 || l >= numLabels {
			return nil, fmt.Errorf("sf: labels: state %d has label %d outside [-1, %d): %w", s, l, numLabels, ErrDimension)
		}
		of[s] = l
	}
	return &Labels{of: of, n: numLabels, Constant: constant}, nil
}

// GridLabels returns the label features of a parsed grid: dimension l is
// label g.LabelNames()[l] of the next state, and with constant a last
// dimension is 1 on every transition. It returns an error wrapping
// ErrDimension if the grid has no labels and constant is false.
func GridLabels(g *mdp.Grid, constant bool) (*Labels, error) {
	of := make([]int, g.NumStates())
	for s := range of {
		of[s] = g.LabelOf(s)
	}
	return NewLabels(of, len(g.LabelNames()), constant)
}

// Dim returns the number of labels, plus one with Constant.
func (f *Labels) Dim() int {
	if f.Constant {
		return f.n + 1
	}
	return f.n
}

// Label returns the label of state s, or -1.
func (f *Labels) Label(s int) int { return f.of[s] }

// Features writes the label indicator of next (and the constant) into dst. It
// panics if len(dst) != Dim() or next is out of range.
func (f *Labels) Features(dst []float64, s, a, next int) {
	checkLen("labels", dst, f.Dim())
	clear(dst)
	i, vi, j, vj := f.hot(s, a, next)
	if i >= 0 {
		dst[i] = vi
	}
	if j >= 0 {
		dst[j] = vj
	}
}

// Check returns an error wrapping ErrDimension unless f labels numStates
// states.
func (f *Labels) Check(numStates, numActions int) error {
	if len(f.of) != numStates {
		return fmt.Errorf("sf: labels: %d states labelled, mdp has %d: %w", len(f.of), numStates, ErrDimension)
	}
	return nil
}

func (f *Labels) hot(s, a, next int) (int, float64, int, float64) {
	l := f.of[next]
	if f.Constant {
		return l, 1, f.n, 1
	}
	return l, 1, -1, 0
}

// NextState is a stored feature of the next state, phi(s, a, s') = F[s'],
// for any table F of n rows of d values.
type NextState struct {
	n, d int
	data []float64 // row-major n x d
}

// NewNextState returns the feature map phi(s, a, s') = rows[s']. The rows
// are copied. It returns an error wrapping ErrDimension if there are no rows
// or they have unequal or zero length, and ErrNonFinite if a value is NaN or
// infinite.
func NewNextState(rows [][]float64) (*NextState, error) {
	if len(rows) == 0 || len(rows[0]) == 0 {
		return nil, fmt.Errorf("sf: next-state features: empty table: %w", ErrDimension)
	}
	d := len(rows[0])
	f := &NextState{n: len(rows), d: d, data: make([]float64, 0, len(rows)*d)}
	for s, r := range rows {
		if len(r) != d {
			return nil, fmt.Errorf("sf: next-state features: row %d has length %d, want %d: %w", s, len(r), d, ErrDimension)
		}
		for _, v := range r {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, fmt.Errorf("sf: next-state features: row %d: %w", s, ErrNonFinite)
			}
		}
		f.data = append(f.data, r...)
	}
	return f, nil
}

// NewRandom returns fixed random features of the next state for n states
// in dimension d: every entry is drawn from the standard normal distribution
// by rng, and with unit set each row is scaled to unit Euclidean length (a
// point on the sphere, the form skill features take). This is the ablation
// that uses no learned features; the same seed gives the same features.
// It returns an error wrapping ErrDimension if n or d is not positive or
// n*d exceeds MaxValues, and ErrConfig for a nil rng.
func NewRandom(n, d int, unit bool, rng *rand.Rand) (*NextState, error) {
	if err := checkSizes("random features", n, d); err != nil {
		return nil, err
	}
	if rng == nil {
		return nil, fmt.Errorf("sf: random features: nil rng: %w", ErrConfig)
	}
	f := &NextState{n: n, d: d, data: make([]float64, n*d)}
	for s := 0; s < n; s++ {
		r := f.data[s*d : (s+1)*d]
		if unit {
			vec.SampleSphere(r, rng)
			continue
		}
		for k := range r {
			r[k] = rng.NormFloat64()
		}
	}
	return f, nil
}

// Dim returns d.
func (f *NextState) Dim() int { return f.d }

// Row returns a view of F[s']. It must not be modified.
func (f *NextState) Row(next int) []float64 {
	return f.data[next*f.d : (next+1)*f.d : (next+1)*f.d]
}

// Features copies F[next] into dst. It panics if len(dst) != d or next is out
// of range.
func (f *NextState) Features(dst []float64, s, a, next int) {
	checkLen("next-state features", dst, f.d)
	copy(dst, f.Row(next))
}

// Check returns an error wrapping ErrDimension unless f has a row for each
// of numStates states.
func (f *NextState) Check(numStates, numActions int) error {
	if f.n != numStates {
		return fmt.Errorf("sf: next-state features: %d rows, mdp has %d states: %w", f.n, numStates, ErrDimension)
	}
	return nil
}

func (f *NextState) row(s, a, next int) []float64 { return f.Row(next) }

// FeatureFunc adapts a plain function of dimension D to a FeatureMap.
type FeatureFunc struct {
	D int
	F func(dst []float64, s, a, next int)
}

// Dim returns D.
func (f FeatureFunc) Dim() int { return f.D }

// Features calls F. It panics if len(dst) != D.
func (f FeatureFunc) Features(dst []float64, s, a, next int) {
	checkLen("feature func", dst, f.D)
	f.F(dst, s, a, next)
}
