package skills

import (
	"fmt"
	"math"
)

// Optim holds the optimiser settings shared by the discriminators. Every
// update is one step of Adam (Kingma & Ba 2015, Algorithm 1) on the mean
// loss of a minibatch, after optional global gradient-norm clipping
// (Pascanu et al. 2013, Algorithm 1). Zero fields mean the defaults.
type Optim struct {
	// LearnRate is the Adam step size alpha. 0 means 1e-3.
	LearnRate float64
	// Beta1 and Beta2 are the moment decay rates. 0 means 0.9 and 0.999.
	Beta1, Beta2 float64
	// Eps is added to the root second moment. 0 means 1e-8.
	Eps float64
	// ClipNorm, if positive, rescales the gradient of the network weights
	// to at most this Euclidean norm. 0 means no clipping.
	ClipNorm float64
}

// resolve returns o with defaults filled in, or an error wrapping ErrConfig.
func (o Optim) resolve() (Optim, error) {
	if o.LearnRate == 0 {
		o.LearnRate = 1e-3
	}
	if o.Beta1 == 0 {
		o.Beta1 = 0.9
	}
	if o.Beta2 == 0 {
		o.Beta2 = 0.999
	}
	if o.Eps == 0 {
		o.Eps = 1e-8
	}
	return o, o.check()
}

func (o Optim) check() error {
	switch {
	case !(o.LearnRate > 0) || math.IsInf(o.LearnRate, 0):
		return fmt.Errorf("learn rate %g: %w", o.LearnRate, ErrConfig)
	case !(o.Beta1 >= 0 && o.Beta1 < 1):
		return fmt.Errorf("beta1 %g not in [0, 1): %w", o.Beta1, ErrConfig)
	case !(o.Beta2 >= 0 && o.Beta2 < 1):
		return fmt.Errorf("beta2 %g not in [0, 1): %w", o.Beta2, ErrConfig)
	case !(o.Eps > 0) || math.IsInf(o.Eps, 0):
		return fmt.Errorf("eps %g: %w", o.Eps, ErrConfig)
	case !(o.ClipNorm >= 0) || math.IsInf(o.ClipNorm, 0):
		return fmt.Errorf("clip norm %g: %w", o.ClipNorm, ErrConfig)
	}
	return nil
}

// adam is the Adam state for a flat parameter vector.
type adam struct {
	m, v []float64
	t    uint64
}

func newAdam(n int) adam { return adam{m: make([]float64, n), v: make([]float64, n)} }

// step applies one Adam update to p with gradient g.
func (a *adam) step(o *Optim, p, g []float64) {
	a.t++
	b1, b2 := o.Beta1, o.Beta2
	c1 := 1 - math.Pow(b1, float64(a.t))
	c2 := 1 - math.Pow(b2, float64(a.t))
	lr, eps := o.LearnRate, o.Eps
	m, v := a.m[:len(p)], a.v[:len(p)]
	g = g[:len(p)]
	for i, gi := range g {
		mi := b1*m[i] + (1-b1)*gi
		vi := b2*v[i] + (1-b2)*gi*gi
		m[i], v[i] = mi, vi
		p[i] -= lr * (mi / c1) / (math.Sqrt(vi/c2) + eps)
	}
}

func (a *adam) clone() adam {
	return adam{m: append([]float64(nil), a.m...), v: append([]float64(nil), a.v...), t: a.t}
}

// clipNorm scales g to norm at most c (c <= 0 disables) and returns the norm
// before clipping.
func clipNorm(g []float64, c float64) float64 {
	var ss float64
	for _, v := range g {
		ss += v * v
	}
	n := math.Sqrt(ss)
	if c > 0 && n > c {
		s := c / n
		for i := range g {
			g[i] *= s
		}
	}
	return n
}

func dot(a, b []float64) float64 {
	b = b[:len(a)]
	var s float64
	for i, v := range a {
		s += v * b[i]
	}
	return s
}

func isFinite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

func allFinite(v []float64) bool {
	for _, x := range v {
		if !isFinite(x) {
			return false
		}
	}
	return true
}
