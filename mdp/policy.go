package mdp

// Policy gives the action probabilities of a (possibly stochastic) policy.
type Policy interface {
	// Probs writes pi(. | s) into dst, whose length is the number of
	// actions. It panics if len(dst) is wrong or s is out of range.
	Probs(dst []float64, s int)
}

// Deterministic is a policy that takes action d[s] in state s.
type Deterministic []int

// Probs writes the one-hot distribution of action d[s] into dst.
func (d Deterministic) Probs(dst []float64, s int) {
	clear(dst)
	dst[d[s]] = 1
}

// Uniform is the policy that picks each of N actions with probability 1/N.
type Uniform struct{ N int }

// Probs writes 1/N into every entry of dst. It panics if len(dst) != N.
func (u Uniform) Probs(dst []float64, s int) {
	if len(dst) != u.N {
		panic("mdp: uniform: wrong length")
	}
	for i := range dst {
		dst[i] = 1 / float64(u.N)
	}
}
