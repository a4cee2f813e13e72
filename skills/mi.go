package skills

import (
	"fmt"
	"math"
)

// MIEstimate is a variational lower bound on the mutual information I(S; Z)
// between the skill and the observations it reaches (Barber & Agakov 2003,
// "The IM algorithm: a variational approach to information maximization"):
//
//	I(S; Z) = H(Z) - H(Z | S) >= E[log q(z | s)] - E[log p(z)],
//
// estimated by the sample mean over N pairs (s_i, z_i) from rollouts, in
// nats. Because H(Z) = log K for the uniform categorical prior, the bound
// is at most log K there.
type MIEstimate struct {
	// N is the number of pairs.
	N int
	// Bound is (1/N) sum_i (log q(z_i | s_i) - log p(z_i)).
	Bound float64
	// StdErr is the standard error of Bound: the sample standard deviation
	// of the summands (divisor N-1) over sqrt(N); +Inf when N = 1. Pairs
	// from the same episode are correlated, so treat it as a lower bound on
	// the true uncertainty unless the pairs are independent.
	StdErr float64
	// Accuracy is the fraction of pairs with Predict(s_i) equal to the index
	// of the one-hot z_i, for a discriminator that is a Classifier; NaN
	// otherwise.
	Accuracy float64
}

// MIMeter accumulates the terms of an MIEstimate one pair at a time
// (Welford's running mean and variance), so rollouts need not be stored.
// The zero value is ready to use.
type MIMeter struct {
	n       int
	mean    float64
	m2      float64
	hits    int
	classed int
}

// Add adds the pair (x, z): log q(z | x) from d and log p(z) from p. It
// panics if a length is wrong.
func (m *MIMeter) Add(d Discriminator, p Prior, x, z []float64) {
	v := d.LogProb(x, z) - p.LogProb(z)
	m.n++
	delta := v - m.mean
	m.mean += delta / float64(m.n)
	m.m2 += delta * (v - m.mean)
	if c, ok := d.(Classifier); ok {
		if k, ok := oneHotIndex(z); ok {
			m.classed++
			if c.Predict(x) == k {
				m.hits++
			}
		}
	}
}

// Reset empties the meter.
func (m *MIMeter) Reset() { *m = MIMeter{} }

// Estimate returns the estimate from the pairs added so far. It returns an
// error wrapping ErrEmpty if there are none, and one wrapping ErrNonFinite
// if a log-likelihood was not finite (for example a z outside the support
// of p).
func (m *MIMeter) Estimate() (MIEstimate, error) {
	if m.n == 0 {
		return MIEstimate{}, fmt.Errorf("skills: mi estimate: %w", ErrEmpty)
	}
	e := MIEstimate{N: m.n, Bound: m.mean, StdErr: math.Inf(1), Accuracy: math.NaN()}
	if m.n > 1 {
		e.StdErr = math.Sqrt(m.m2 / float64(m.n-1) / float64(m.n))
	}
	if m.classed == m.n {
		e.Accuracy = float64(m.hits) / float64(m.n)
	}
	if !isFinite(e.Bound) {
		return e, fmt.Errorf("skills: mi estimate: bound %g: %w", e.Bound, ErrNonFinite)
	}
	return e, nil
}

// EstimateMI returns the MIEstimate of the pairs given as x (n rows of
// d.InDim(), row-major) and z (n rows of d.ZDim()). It returns an error
// wrapping ErrDimension if the lengths do not describe n >= 1 pairs, and
// the errors of MIMeter.Estimate.
func EstimateMI(d Discriminator, p Prior, x, z []float64) (MIEstimate, error) {
	in, zd := d.InDim(), d.ZDim()
	n := len(x) / in
	if n < 1 || len(x) != n*in || len(z) != n*zd || p.Dim() != zd {
		return MIEstimate{}, fmt.Errorf("skills: estimate mi: len(x) = %d, len(z) = %d, prior dim %d for rows of %d and %d: %w",
			len(x), len(z), p.Dim(), in, zd, ErrDimension)
	}
	var m MIMeter
	for i := 0; i < n; i++ {
		m.Add(d, p, x[i*in:(i+1)*in], z[i*zd:(i+1)*zd])
	}
	return m.Estimate()
}
