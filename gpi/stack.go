package gpi

import (
	"fmt"
	"math"
)

// Stack is a frozen set of k sources stored state-major: for every state,
// the psi(s, .) of source 0, then of source 1, and so on, contiguously. A
// GPI choice over a Stack (Selector.ActStack) is then a single
// matrix-vector product over k*actions rows of length dim, the fastest
// layout for acting with a fixed library of policies (for example after
// pretraining). A Stack holds copies: rebuild it after the sources change.
type Stack struct {
	states, k, actions, dim int
	data                    []float64 // data[((s*k+i)*actions+a)*dim+f]
}

// NewStack copies psi(s, .) of every source for states 0, ..., states-1
// into a new Stack. It returns an error wrapping ErrNoSources for no
// sources, ErrDimension for a non-positive states or sources of different
// shapes, and ErrNonFinite for a NaN or infinite psi. A source that does
// not cover the states panics as its Psi does.
func NewStack(states int, sources ...Source) (*Stack, error) {
	if len(sources) == 0 {
		return nil, fmt.Errorf("gpi: new stack: %w", ErrNoSources)
	}
	if states <= 0 {
		return nil, fmt.Errorf("gpi: new stack: %d states: %w", states, ErrDimension)
	}
	actions, dim := sources[0].Shape()
	if err := checkSources(sources, actions, dim, states); err != nil {
		return nil, fmt.Errorf("gpi: new stack: %w", err)
	}
	if actions <= 0 || dim <= 0 {
		return nil, fmt.Errorf("gpi: new stack: shape (%d, %d): %w", actions, dim, ErrDimension)
	}
	k, n := len(sources), actions*dim
	st := &Stack{states: states, k: k, actions: actions, dim: dim, data: make([]float64, states*k*n)}
	for s := 0; s < states; s++ {
		for i, src := range sources {
			p := st.data[(s*k+i)*n : (s*k+i+1)*n]
			src.Psi(p, s)
			for _, v := range p {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					return nil, fmt.Errorf("gpi: new stack: source %d, state %d: %w", i, s, ErrNonFinite)
				}
			}
		}
	}
	return st, nil
}

// Len returns the number of sources in the stack.
func (st *Stack) Len() int { return st.k }

// NumStates returns the number of states.
func (st *Stack) NumStates() int { return st.states }

// Shape returns the number of actions and the feature dimension.
func (st *Stack) Shape() (actions, dim int) { return st.actions, st.dim }

// Source returns source i of the stack as a Viewer reading the stack in
// place. It panics if i is out of range.
func (st *Stack) Source(i int) Viewer {
	if uint(i) >= uint(st.k) {
		panic(fmt.Sprintf("gpi: stack: source %d out of range [0, %d)", i, st.k))
	}
	return stackSource{st: st, i: i}
}

// stackSource is one source of a Stack.
type stackSource struct {
	st *Stack
	i  int
}

func (v stackSource) Shape() (actions, dim int) { return v.st.actions, v.st.dim }

func (v stackSource) State(s int) []float64 {
	st := v.st
	if uint(s) >= uint(st.states) {
		panic(fmt.Sprintf("gpi: stack: state %d out of range [0, %d)", s, st.states))
	}
	n := st.actions * st.dim
	off := (s*st.k + v.i) * n
	return st.data[off : off+n : off+n]
}

func (v stackSource) Psi(dst []float64, s int) {
	if len(dst) != v.st.actions*v.st.dim {
		panic(fmt.Sprintf("gpi: stack: psi slice has length %d, want %d", len(dst), v.st.actions*v.st.dim))
	}
	copy(dst, v.State(s))
}

// ActStack is Act over the sources of st, in order, with one matrix-vector
// product: it returns the same action, source and value as Act over
// st.Source(0), ..., st.Source(st.Len()-1), with the same tie rule and
// special cases. It allocates nothing once the selector's scratch has
// grown. It panics if len(w) is not the stack's dimension or s is out of
// range.
func (sel *Selector) ActStack(w []float64, s int, st *Stack) (action, source int, value float64) {
	if len(w) != st.dim {
		panic(fmt.Sprintf("gpi: act stack: task vector has length %d, stack has dimension %d", len(w), st.dim))
	}
	if uint(s) >= uint(st.states) {
		panic(fmt.Sprintf("gpi: act stack: state %d out of range [0, %d)", s, st.states))
	}
	rows := st.k * st.actions
	if cap(sel.q) < rows {
		sel.q = make([]float64, rows)
	}
	q := sel.q[:rows]
	off := s * rows * st.dim
	scores(q, st.data[off:off+rows*st.dim], w)
	best, bj := math.Inf(-1), 0
	nan := false
	for j, v := range q {
		if v > best {
			best, bj = v, j
		}
		nan = nan || v != v
	}
	if nan {
		return -1, -1, math.NaN()
	}
	return bj % st.actions, bj / st.actions, best
}
