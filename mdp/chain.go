package mdp

import (
	"fmt"
	"slices"

	"github.com/successor-go/successor/linalg"
)

// PolicyTable returns pi(a | s) for every state as a table indexed s*A + a,
// after checking each row of a non-terminal state is a distribution (finite,
// non-negative, summing to 1 within PolicyTol). Rows of terminal states are
// zero: the policy is not queried there. A policy that implements
// Checker is checked first. The error wraps ErrConfig (a nil policy),
// ErrDimension (a policy of the wrong size), ErrNonFinite or
// linalg.ErrNotStochastic.
func (m *Finite) PolicyTable(pi Policy) ([]float64, error) {
	if pi == nil {
		return nil, fmt.Errorf("mdp: policy table: nil policy: %w", ErrConfig)
	}
	if c, ok := pi.(Checker); ok {
		if err := c.Check(m.n, m.a); err != nil {
			return nil, fmt.Errorf("mdp: policy table: %w", err)
		}
	}
	tab := make([]float64, m.n*m.a)
	for s := 0; s < m.n; s++ {
		if m.terminal[s] {
			continue
		}
		row := tab[s*m.a : (s+1)*m.a]
		pi.Probs(row, s)
		if err := checkDist(row); err != nil {
			return nil, fmt.Errorf("mdp: policy at state %d: %w", s, err)
		}
	}
	return tab, nil
}

// Chain returns the state chain under pi,
//
//	P_pi[s][s'] = sum_a pi(a|s) P(s'|s,a),
//
// as an n x n CSR, with the rows of terminal states zero (no future). So
// P_pi is sub-stochastic and (I - gamma P_pi)^-1 is the successor matrix
// with terminal states stopping the sum after their t = 0 term.
//
// Chain panics if pi does not give a probability distribution at some
// non-terminal state; ChainOf returns an error instead.
func (m *Finite) Chain(pi Policy) *linalg.CSR {
	c, err := m.ChainOf(pi)
	if err != nil {
		panic(err.Error())
	}
	return c
}

// ChainOf is Chain returning an error when pi is not a distribution at
// some state (wrapping linalg.ErrNotStochastic or ErrNonFinite) or does
// not fit m (ErrDimension, ErrConfig; see PolicyTable).
func (m *Finite) ChainOf(pi Policy) (*linalg.CSR, error) {
	tab, err := m.PolicyTable(pi)
	if err != nil {
		return nil, fmt.Errorf("mdp: chain: %w", err)
	}
	return m.chainFromTable(tab), nil
}

// chainFromTable builds P_pi from a validated policy table.
func (m *Finite) chainFromTable(tab []float64) *linalg.CSR {
	n, na := m.n, m.a
	ptr := make([]int, n+1)
	ind := make([]int, 0, m.p.NNZ()/na+n)
	val := make([]float64, 0, cap(ind))
	acc := make([]float64, n)
	pos := make([]int, n) // 1 + position in the current row's column list, 0 if absent
	var cols []int
	for s := 0; s < n; s++ {
		if !m.terminal[s] {
			cols = cols[:0]
			for a := 0; a < na; a++ {
				w := tab[s*na+a]
				if w == 0 {
					continue
				}
				next, prob := m.p.Row(s*na + a)
				for k, j := range next {
					if pos[j] == 0 {
						cols = append(cols, j)
						pos[j] = len(cols)
					}
					acc[j] += w * prob[k]
				}
			}
			slices.Sort(cols)
			for _, j := range cols {
				if acc[j] != 0 {
					ind = append(ind, j)
					val = append(val, acc[j])
				}
				acc[j] = 0
				pos[j] = 0
			}
		}
		ptr[s+1] = len(ind)
	}
	c, err := linalg.NewCSR(n, n, ptr, ind, val)
	if err != nil {
		panic("mdp: chain: internal error: " + err.Error())
	}
	return c
}

// StateActionChain returns the chain over state-action pairs under pi,
//
//	P_pi[(s,a),(s',a')] = P(s'|s,a) pi(a'|s')   (zero when s' is terminal),
//
// as an nA x nA CSR indexed s*A + a. Rows of terminal s are zero as well.
// This is the matrix of the closed-form successor features
// Psi = (I - gamma P_pi)^-1 PhiBar.
//
// StateActionChain panics if pi does not give a probability distribution at
// some non-terminal state; StateActionChainOf returns an error instead.
func (m *Finite) StateActionChain(pi Policy) *linalg.CSR {
	c, err := m.StateActionChainOf(pi)
	if err != nil {
		panic(err.Error())
	}
	return c
}

// StateActionChainOf is StateActionChain returning an error when pi is
// not a distribution at some state (wrapping linalg.ErrNotStochastic or
// ErrNonFinite) or does not fit m (ErrDimension, ErrConfig; see
// PolicyTable).
func (m *Finite) StateActionChainOf(pi Policy) (*linalg.CSR, error) {
	tab, err := m.PolicyTable(pi)
	if err != nil {
		return nil, fmt.Errorf("mdp: state-action chain: %w", err)
	}
	return m.stateActionChainFromTable(tab), nil
}

func (m *Finite) stateActionChainFromTable(tab []float64) *linalg.CSR {
	n, na := m.n, m.a
	rows := n * na
	// Count first to size the arrays exactly.
	nnz := 0
	for r := 0; r < rows; r++ {
		if m.terminal[r/na] {
			continue
		}
		next, _ := m.p.Row(r)
		for _, j := range next {
			if m.terminal[j] {
				continue
			}
			for b := 0; b < na; b++ {
				if tab[j*na+b] != 0 {
					nnz++
				}
			}
		}
	}
	ptr := make([]int, rows+1)
	ind := make([]int, 0, nnz)
	val := make([]float64, 0, nnz)
	for r := 0; r < rows; r++ {
		if !m.terminal[r/na] {
			next, prob := m.p.Row(r)
			// next is strictly increasing, so columns j*na+b come out sorted.
			for k, j := range next {
				if m.terminal[j] {
					continue
				}
				for b := 0; b < na; b++ {
					if w := tab[j*na+b]; w != 0 {
						if v := prob[k] * w; v != 0 {
							ind = append(ind, j*na+b)
							val = append(val, v)
						}
					}
				}
			}
		}
		ptr[r+1] = len(ind)
	}
	c, err := linalg.NewCSR(rows, rows, ptr, ind, val)
	if err != nil {
		panic("mdp: state-action chain: internal error: " + err.Error())
	}
	return c
}
