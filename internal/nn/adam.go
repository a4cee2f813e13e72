package nn

import (
	"fmt"
	"math"
)

// AdamConfig holds the Adam hyperparameters. Zero fields mean the defaults
// of Kingma & Ba 2015, Algorithm 1: StepSize 0.001, Beta1 0.9, Beta2 0.999,
// Eps 1e-8.
type AdamConfig struct {
	StepSize, Beta1, Beta2, Eps float64
}

// WithDefaults returns c with every zero field set to its default:
// StepSize 0.001, Beta1 0.9, Beta2 0.999, Eps 1e-8 (Kingma & Ba 2015, Algorithm 1).
func (c AdamConfig) WithDefaults() AdamConfig {
	if c.StepSize == 0 {
		c.StepSize = 0.001
	}
	if c.Beta1 == 0 {
		c.Beta1 = 0.9
	}
	if c.Beta2 == 0 {
		c.Beta2 = 0.999
	}
	if c.Eps == 0 {
		c.Eps = 1e-8
	}
	return c
}

// Adam is the Adam optimiser (Kingma & Ba 2015, Algorithm 1) over a flat
// parameter vector; see the package doc for the update.
type Adam struct {
	StepSize, Beta1, Beta2, Eps float64
	// T is the number of steps taken; the bias corrections use it.
	T int
	// M and V are the first and second moment estimates.
	M, V []float64
}

// NewAdam returns an optimiser for n parameters with zero moments. A nil
// cfg means the defaults. It panics if n < 0.
func NewAdam(n int, cfg *AdamConfig) *Adam {
	if n < 0 {
		panic("nn: new adam: negative size")
	}
	var c AdamConfig
	if cfg != nil {
		c = *cfg
	}
	c = c.WithDefaults()
	return &Adam{StepSize: c.StepSize, Beta1: c.Beta1, Beta2: c.Beta2, Eps: c.Eps, M: make([]float64, n), V: make([]float64, n)}
}

// Step applies one Adam update to params with gradient g. It panics if the
// lengths differ from the optimiser's size.
func (o *Adam) Step(params, g []float64) {
	if len(params) != len(o.M) || len(g) != len(o.M) {
		panic(fmt.Sprintf("nn: adam: lengths %d, %d, want %d", len(params), len(g), len(o.M)))
	}
	o.T++
	b1, b2 := o.Beta1, o.Beta2
	c1 := 1 - math.Pow(b1, float64(o.T))
	c2 := 1 - math.Pow(b2, float64(o.T))
	m, v := o.M, o.V
	for i, gi := range g {
		m[i] = b1*m[i] + (1-b1)*gi
		v[i] = b2*v[i] + (1-b2)*gi*gi
		mh := m[i] / c1
		vh := v[i] / c2
		params[i] -= o.StepSize * mh / (math.Sqrt(vh) + o.Eps)
	}
}

// Reset zeroes the moments and the step count.
func (o *Adam) Reset() {
	clear(o.M)
	clear(o.V)
	o.T = 0
}

// Clone returns a deep copy of o: the same hyperparameters, step count and
// moments, in new slices.
func (o *Adam) Clone() *Adam {
	c := *o
	c.M = append([]float64(nil), o.M...)
	c.V = append([]float64(nil), o.V...)
	return &c
}
