package skills

import (
	"fmt"
	"math"

	"github.com/successor-go/successor/internal/nn"
)

// OptimMethod selects the optimiser of a discriminator. The zero value is
// OptimAdam.
type OptimMethod uint8

const (
	// OptimAdam is dense Adam (Kingma & Ba 2015, Algorithm 1): every
	// update decays the moments of, and moves, every parameter, including
	// those whose gradient is zero. The default.
	OptimAdam OptimMethod = iota
	// OptimSparseAdam is Adam restricted, at each update, to the rows of W
	// whose input is non-zero somewhere in the minibatch, plus the bias b,
	// for a linear f(x) = x W + b (it is a configuration error with hidden
	// layers). For those entries the update is exactly Adam's; the other
	// rows of W are skipped entirely: their weights do not move and their
	// moments are not decayed. The step counter t of the bias corrections
	// is global (it counts every update, as in dense Adam), not per row.
	// It is therefore a different optimiser from dense Adam, which keeps
	// moving an untouched row by its decaying first moment; the two agree
	// bit for bit on any sequence of minibatches that each touch every row
	// (and always on the first update, when every moment is zero). With
	// one-hot observations an update costs O((r + 1) d) for r distinct
	// states in the minibatch, instead of O((n + 1) d) for n states.
	OptimSparseAdam
)

var optimNames = [...]string{"adam", "sparse-adam"}

// String returns "adam" or "sparse-adam".
func (m OptimMethod) String() string {
	if int(m) >= len(optimNames) {
		return fmt.Sprintf("OptimMethod(%d)", int(m))
	}
	return optimNames[m]
}

// MarshalText implements encoding.TextMarshaler: "adam" or "sparse-adam".
func (m OptimMethod) MarshalText() ([]byte, error) {
	if int(m) >= len(optimNames) {
		return nil, fmt.Errorf("skills: optimiser %d: %w", int(m), ErrConfig)
	}
	return []byte(m.String()), nil
}

// UnmarshalText implements encoding.TextUnmarshaler, accepting the names
// String returns. It returns an error wrapping ErrConfig for any other.
func (m *OptimMethod) UnmarshalText(b []byte) error {
	for i, n := range optimNames {
		if string(b) == n {
			*m = OptimMethod(i)
			return nil
		}
	}
	return fmt.Errorf("skills: unknown optimiser %q (want adam or sparse-adam): %w", b, ErrConfig)
}

// OptimConfig holds the optimiser settings shared by the discriminators. Every
// update is one step of Adam (Kingma & Ba 2015, Algorithm 1), dense or
// sparse (see OptimMethod), on the mean loss of a minibatch, after optional
// global gradient-norm clipping (Pascanu et al. 2013, Algorithm 1). Zero
// fields mean the defaults.
type OptimConfig struct {
	// Method selects dense Adam (the zero value) or sparse Adam.
	Method OptimMethod
	// StepSize is the Adam step size alpha. 0 means 1e-3.
	StepSize float64
	// Beta1 and Beta2 are the moment decay rates. 0 means 0.9 and 0.999.
	Beta1, Beta2 float64
	// Eps is added to the root second moment. 0 means 1e-8. (The defaults
	// are those of nn.AdamConfig.WithDefaults, Kingma & Ba 2015.)
	Eps float64
	// ClipNorm, if positive, rescales the gradient of the network weights
	// to at most this Euclidean norm. 0 means no clipping.
	ClipNorm float64
}

// resolve returns o with defaults filled in, or an error wrapping ErrConfig.
func (o OptimConfig) resolve() (OptimConfig, error) {
	c := nn.AdamConfig{StepSize: o.StepSize, Beta1: o.Beta1, Beta2: o.Beta2, Eps: o.Eps}.WithDefaults()
	o.StepSize, o.Beta1, o.Beta2, o.Eps = c.StepSize, c.Beta1, c.Beta2, c.Eps
	return o, o.check()
}

func (o OptimConfig) check() error {
	switch {
	case !(o.StepSize > 0) || math.IsInf(o.StepSize, 0):
		return fmt.Errorf("learn rate %g: %w", o.StepSize, ErrConfig)
	case !(o.Beta1 >= 0 && o.Beta1 < 1):
		return fmt.Errorf("beta1 %g not in [0, 1): %w", o.Beta1, ErrConfig)
	case !(o.Beta2 >= 0 && o.Beta2 < 1):
		return fmt.Errorf("beta2 %g not in [0, 1): %w", o.Beta2, ErrConfig)
	case !(o.Eps > 0) || math.IsInf(o.Eps, 0):
		return fmt.Errorf("eps %g: %w", o.Eps, ErrConfig)
	case !(o.ClipNorm >= 0) || math.IsInf(o.ClipNorm, 0):
		return fmt.Errorf("clip norm %g: %w", o.ClipNorm, ErrConfig)
	case o.Method > OptimSparseAdam:
		return fmt.Errorf("optimiser %v: %w", o.Method, ErrConfig)
	}
	return nil
}

// newAdam returns an Adam optimiser (internal/nn) for n parameters with the
// hyperparameters of o, taken as they are: o is resolved or checked already,
// and a zero Beta1 read from a file stays zero.
func newAdam(n int, o *OptimConfig) *nn.Adam {
	a := nn.NewAdam(n, nil)
	a.StepSize, a.Beta1, a.Beta2, a.Eps = o.StepSize, o.Beta1, o.Beta2, o.Eps
	return a
}

// checkNet reports an error wrapping ErrConfig if o cannot train the map
// described by net: sparse Adam needs a linear f.
func (o OptimConfig) checkNet(net *NetConfig) error {
	if o.Method == OptimSparseAdam && len(net.Hidden) > 0 {
		return fmt.Errorf("optimiser %v needs a linear net, have %d hidden layers: %w", o.Method, len(net.Hidden), ErrConfig)
	}
	return nil
}

// sparseAdamStep takes one sparse Adam step (OptimSparseAdam) on the flat
// parameters p of a linear map with out outputs per input row: Adam's update
// of a, applied only to the rows of W listed in rows and to the trailing
// bias of out entries. The arithmetic of each entry is that of nn.Adam.Step,
// so that an update touching every row is bit-identical to a dense one.
func sparseAdamStep(a *nn.Adam, p, g []float64, rows []int, out int) {
	a.T++
	b1, b2 := a.Beta1, a.Beta2
	c1 := 1 - math.Pow(b1, float64(a.T))
	c2 := 1 - math.Pow(b2, float64(a.T))
	m, v := a.M, a.V
	upd := func(lo, hi int) {
		for i := lo; i < hi; i++ {
			gi := g[i]
			m[i] = b1*m[i] + (1-b1)*gi
			v[i] = b2*v[i] + (1-b2)*gi*gi
			mh := m[i] / c1
			vh := v[i] / c2
			p[i] -= a.StepSize * mh / (math.Sqrt(vh) + a.Eps)
		}
	}
	for _, j := range rows {
		upd(j*out, (j+1)*out)
	}
	upd(len(p)-out, len(p))
}

// sparseClipNorm returns the Euclidean norm of g, whose non-zero entries lie
// in the listed rows of W and the trailing bias, and rescales those entries
// to norm c if c > 0 and the norm is above c, as nn.ClipNorm does. Rows are
// ascending, so the sum of squares is added in the same order as
// nn.ClipNorm's (whose extra terms are exact zeros) and the norm is
// bit-identical.
func sparseClipNorm(g []float64, rows []int, out int, c float64) float64 {
	var ss float64
	for _, j := range rows {
		for _, v := range g[j*out : (j+1)*out] {
			ss += v * v
		}
	}
	for _, v := range g[len(g)-out:] {
		ss += v * v
	}
	norm := math.Sqrt(ss)
	if c > 0 && norm > c {
		s := c / norm
		for _, j := range rows {
			gj := g[j*out : (j+1)*out]
			for i := range gj {
				gj[i] *= s
			}
		}
		gb := g[len(g)-out:]
		for i := range gb {
			gb[i] *= s
		}
	}
	return norm
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
