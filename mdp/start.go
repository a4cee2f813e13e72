package mdp

import "fmt"

// WithStart returns a copy of m with the start distribution start (len
// NumStates) in place of m's: the same states, actions, transition
// probabilities and terminal flags. It serves, for example, reward-free
// exploration that drops the agent anywhere (UniformStart) while the tasks
// are scored from m's own start distribution. m is not modified.
//
// Errors are those of New for start: they wrap linalg.ErrDimension,
// linalg.ErrNonFinite, linalg.ErrNotStochastic or ErrConfig.
func WithStart(m *Finite, start []float64) (*Finite, error) {
	n, na := m.NumStates(), m.NumActions()
	var tr []ProbEntry
	term := make([]bool, n)
	for s := range n {
		term[s] = m.Terminal(s)
		if term[s] {
			continue // New adds the self-loops of terminal states
		}
		for a := range na {
			nx, p := m.Next(s, a)
			for k, j := range nx {
				tr = append(tr, ProbEntry{State: s, Action: a, Next: j, Prob: p[k]})
			}
		}
	}
	out, err := New(n, na, tr, term, start)
	if err != nil {
		return nil, fmt.Errorf("mdp: with start: %w", err)
	}
	return out, nil
}

// UniformStart returns the start distribution that is uniform over m's
// non-terminal states (1/k each for k non-terminal states, 0 on terminal
// ones). If every state is terminal it returns all zeros, which WithStart
// rejects.
func UniformStart(m *Finite) []float64 {
	st := make([]float64, m.NumStates())
	var k int
	for s := range st {
		if !m.Terminal(s) {
			k++
		}
	}
	for s := range st {
		if !m.Terminal(s) {
			st[s] = 1 / float64(k)
		}
	}
	return st
}
