package skills

import (
	"fmt"
	"math"

	"github.com/successor-go/successor/internal/nn"
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

// newAdam returns an Adam optimiser (internal/nn) for n parameters with the
// hyperparameters of o, taken as they are: o is resolved or checked already,
// and a zero Beta1 read from a file stays zero.
func newAdam(n int, o *Optim) *nn.Adam {
	a := nn.NewAdam(n, nil)
	a.LR, a.Beta1, a.Beta2, a.Eps = o.LearnRate, o.Beta1, o.Beta2, o.Eps
	return a
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
