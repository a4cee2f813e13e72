package usf

import (
	"fmt"
	"math"

	"github.com/successor-go/successor/sf"
)

// TabularConfig configures a Tabular approximator. A nil *TabularConfig
// means the zero value.
type TabularConfig struct {
	// Step is the step-size schedule, with the meaning of sf.StepSize
	// (alpha_n = Alpha/(1+n)^Power after n earlier updates of the same
	// (z, s, a)); the zero value is the constant step 0.1.
	Step sf.StepSize
}

// Tabular is a universal SF over a finite set of vectors z_1..z_K: one
// sf.Table per z, psi(s, a, z_k) = Tables[k] at (s, a). Observations are
// one-hot states. A z passed to Psi or in a Batch must equal one of the set
// exactly (the same float64 values).
type Tabular struct {
	Z      [][]float64 // the set (copied at construction)
	Tables []*sf.Table // Tables[k] holds psi(., ., Z[k])

	gamma  float64
	alpha  float64
	power  float64
	visits []float64 // per (k, s, a) when power > 0
	steps  int
	err    error
}

// NewTabular returns a zeroed tabular USF for the given number of states
// and actions over the set zs (each of the same length d >= 1), with
// discount gamma in [0, 1]. Errors wrap ErrDimension, ErrDiscount,
// ErrNonFinite or ErrSettings.
func NewTabular(states, actions int, zs [][]float64, gamma float64, cfg *TabularConfig) (*Tabular, error) {
	if err := checkGamma("tabular", gamma); err != nil {
		return nil, err
	}
	if len(zs) == 0 {
		return nil, fmt.Errorf("usf: tabular: empty z set: %w", ErrDimension)
	}
	var c TabularConfig
	if cfg != nil {
		c = *cfg
	}
	alpha, power, err := resolveStep(c.Step)
	if err != nil {
		return nil, fmt.Errorf("usf: tabular: %w", err)
	}
	d := len(zs[0])
	t := &Tabular{gamma: gamma, alpha: alpha, power: power}
	for k, z := range zs {
		if len(z) != d || d == 0 {
			return nil, fmt.Errorf("usf: tabular: z[%d] has length %d, want %d: %w", k, len(z), d, ErrDimension)
		}
		for _, v := range z {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, fmt.Errorf("usf: tabular: z[%d]: %w", k, ErrNonFinite)
			}
		}
		tab, err := sf.NewTable(states, actions, d)
		if err != nil {
			return nil, fmt.Errorf("usf: tabular: %w", err)
		}
		t.Z = append(t.Z, append([]float64(nil), z...))
		t.Tables = append(t.Tables, tab)
	}
	if power > 0 {
		t.visits = make([]float64, len(zs)*states*actions)
	}
	return t, nil
}

// resolveStep applies the defaults of sf.StepSize.
func resolveStep(st sf.StepSize) (alpha, power float64, err error) {
	if !(st.Power >= 0 && st.Power <= 1) {
		return 0, 0, fmt.Errorf("step power %v outside [0, 1]: %w", st.Power, ErrSettings)
	}
	if !(st.Alpha >= 0 && st.Alpha <= 1) {
		return 0, 0, fmt.Errorf("step %v outside [0, 1]: %w", st.Alpha, ErrSettings)
	}
	alpha = st.Alpha
	if alpha == 0 {
		alpha = 0.1
		if st.Power > 0 {
			alpha = 1
		}
	}
	return alpha, st.Power, nil
}

// Shape returns the number of states (the one-hot observation dimension),
// actions and features.
func (t *Tabular) Shape() (obs, actions, dim int) {
	tab := t.Tables[0]
	return tab.S, tab.A, tab.D
}

// Index returns k with Z[k] equal to z, or -1.
func (t *Tabular) Index(z []float64) int {
	for k, zk := range t.Z {
		if len(zk) != len(z) {
			return -1
		}
		eq := true
		for j, v := range zk {
			if v != z[j] {
				eq = false
				break
			}
		}
		if eq {
			return k
		}
	}
	return -1
}

func (t *Tabular) mustIndex(z []float64) int {
	k := t.Index(z)
	if k < 0 {
		panic("usf: tabular: z is not in the set")
	}
	return k
}

// Psi writes psi(s, ., z) for the state s of the one-hot x. It panics if x
// is not one-hot, z is not in the set or len(dst) != A*d.
func (t *Tabular) Psi(dst, x, z []float64) {
	s, _, _ := t.Shape()
	checkLen("tabular", "observation", x, s)
	t.PsiState(dst, hotIndex("tabular", x), z)
}

// PsiState writes psi(s, ., z) into dst. It panics if z is not in the set,
// s is out of range or len(dst) != A*d. It does not allocate.
func (t *Tabular) PsiState(dst []float64, s int, z []float64) {
	t.Tables[t.mustIndex(z)].Psi(dst, s)
}

// Steps returns the number of transitions learned from.
func (t *Tabular) Steps() int { return t.steps }

// Err returns the divergence error of an earlier update, or nil.
func (t *Tabular) Err() error { return t.err }

// Update applies online TD(0) to the transitions of b in order:
//
//	psi(s,a,z) += alpha (phi + gamma (1-terminal) psi(s',a',z) - psi(s,a,z))
//
// with a' the given next action or argmax_a' psi(s',a',z) . z. It reads S
// and Next if set, else the one-hot X and NextX. The returned loss is
// (1/(2n)) sum ||delta||^2 of the deltas as they were applied. It panics if
// b is malformed or a z is not in the set. It does not allocate.
func (t *Tabular) Update(b *Batch) (float64, error) {
	if t.err != nil {
		return 0, t.err
	}
	ns, na, d := t.Shape()
	n := b.Len()
	indexed := b.S != nil && b.Next != nil
	if indexed {
		if len(b.S) != n || len(b.Next) != n {
			panic("usf: tabular: batch S and Next must have one entry per transition")
		}
		bb := *b
		bb.X, bb.NextX = nil, nil
		bb.check("tabular", ns, na, d)
	} else {
		b.check("tabular", ns, na, d)
	}
	var loss float64
	for i := 0; i < n; i++ {
		var s, next int
		if indexed {
			s, next = b.S[i], b.Next[i]
		} else {
			s = hotIndex("tabular", b.X[i*ns:(i+1)*ns])
			next = hotIndex("tabular", b.NextX[i*ns:(i+1)*ns])
		}
		if uint(s) >= uint(ns) || uint(next) >= uint(ns) {
			panic(fmt.Sprintf("usf: tabular: state %d or %d out of range [0, %d)", s, next, ns))
		}
		z := b.Z[i*d : (i+1)*d]
		k := t.mustIndex(z)
		tab := t.Tables[k]
		a := b.A[i]
		phi := b.Phi[i*d : (i+1)*d]
		row := tab.Row(s, a)
		step := t.alpha
		if t.visits != nil {
			j := (k*ns+s)*na + a
			t.visits[j]++
			step = t.alpha * math.Pow(t.visits[j], -t.power)
		}
		t.steps++
		var nrow []float64
		if !b.Terminal[i] {
			an := b.nextAction(i)
			if an < 0 {
				an = greedy(tab.State(next), z, na)
			}
			nrow = tab.Row(next, an)
		}
		var sq float64
		for j := range row {
			y := phi[j]
			if nrow != nil {
				y += t.gamma * nrow[j]
			}
			delta := y - row[j]
			sq += delta * delta
			row[j] += step * delta
		}
		if math.IsNaN(sq) || math.IsInf(sq, 0) {
			t.err = &sf.DivergenceError{Learner: "usf tabular", Step: t.steps, State: s, Action: a}
			return 0, t.err
		}
		loss += sq
	}
	if n == 0 {
		return 0, nil
	}
	return loss / (2 * float64(n)), nil
}
