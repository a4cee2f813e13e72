package usf

import (
	"fmt"
	"math"

	"github.com/successor-go/successor/internal/vec"
	"github.com/successor-go/successor/sf"
)

// LinearConfig configures a Linear approximator. A nil *LinearConfig
// means the zero value.
type LinearConfig struct {
	// Alpha is the constant step size. 0 means 0.1. For one-hot x and
	// unit z one update moves psi(s, a, z) by alpha delta; in general by
	// alpha ||x||^2 (||z||^2 [+1 with Affine]) delta, which must stay
	// below 2 for stability.
	Alpha float64
	// Affine adds a bias per (observation entry, action, feature), so that
	// psi(s, a, z) = M_{s,a} z + b_{s,a} for one-hot x.
	Affine bool
}

// Linear is the universal SF linear in the joint feature x(s) outer z
// (see the package doc):
//
//	psi_k(s, a, z) = sum_{i,j} W[i, a, k, j] x_i z_j  (+ W[i, a, k, d] x_i with Affine)
//
// W is stored in one slice, index ((i*A + a)*d + k)*e + j with e = d, or
// d+1 with Affine; for a one-hot x = e_s the block of state s is the A
// matrices M_{s,a} (d x e, row-major) one after another.
type Linear struct {
	W []float64
	// Alpha is the step size; a caller may change it between updates to
	// anneal it.
	Alpha float64

	obs, na, d, e int
	gamma         float64
	steps         int
	err           error
	next          []float64 // A*d scratch
	cur           []float64 // d scratch
}

// NewLinear returns a zeroed linear USF for observations of dimension obs,
// the given number of actions and features of dimension dim, with discount
// gamma in [0, 1]. Errors wrap ErrDimension, ErrDiscount or ErrConfig.
func NewLinear(obs, actions, dim int, gamma float64, cfg *LinearConfig) (*Linear, error) {
	if err := checkGamma("linear", gamma); err != nil {
		return nil, err
	}
	if obs <= 0 || actions <= 0 || dim <= 0 {
		return nil, fmt.Errorf("usf: linear: sizes %d, %d, %d must be positive: %w", obs, actions, dim, ErrDimension)
	}
	var c LinearConfig
	if cfg != nil {
		c = *cfg
	}
	if c.Alpha == 0 {
		c.Alpha = 0.1
	}
	if !(c.Alpha > 0) || math.IsInf(c.Alpha, 0) {
		return nil, fmt.Errorf("usf: linear: step %v: %w", c.Alpha, ErrConfig)
	}
	e := dim
	if c.Affine {
		e++
	}
	if obs*actions*dim*e > 1<<28 {
		return nil, fmt.Errorf("usf: linear: %d weights is too many: %w", obs*actions*dim*e, ErrDimension)
	}
	return &Linear{
		W:     make([]float64, obs*actions*dim*e),
		Alpha: c.Alpha,
		obs:   obs, na: actions, d: dim, e: e,
		gamma: gamma,
		next:  make([]float64, actions*dim),
		cur:   make([]float64, dim),
	}, nil
}

// Shape returns the observation dimension, actions and features.
func (l *Linear) Shape() (obs, actions, dim int) { return l.obs, l.na, l.d }

// Affine reports whether the approximator has the bias term.
func (l *Linear) Affine() bool { return l.e > l.d }

// Steps returns the number of transitions learned from.
func (l *Linear) Steps() int { return l.steps }

// Err returns the divergence error of an earlier update, or nil.
func (l *Linear) Err() error { return l.err }

// rowDot returns sum_j w[j] z[j] (+ w[d] with Affine) for one row of W.
func (l *Linear) rowDot(w, z []float64) float64 {
	v := vec.Dot(z, w)
	if l.e > l.d {
		v += w[l.d]
	}
	return v
}

// psiState writes psi(s, a, z) for the actions [a0, a1) into dst (len
// (a1-a0)*d).
func (l *Linear) psiState(dst []float64, s, a0, a1 int, z []float64) {
	d, e := l.d, l.e
	blk := l.W[((s*l.na+a0)*d)*e : ((s*l.na+a1)*d)*e]
	if e == d {
		for r := range dst {
			dst[r] = vec.Dot(z, blk[r*e:(r+1)*e])
		}
		return
	}
	for r := range dst {
		row := blk[r*e : (r+1)*e]
		dst[r] = vec.Dot(z, row) + row[d]
	}
}

// psiDense writes psi(x, a, z) for the actions [a0, a1) into dst, skipping
// zero entries of x.
func (l *Linear) psiDense(dst []float64, x []float64, a0, a1 int, z []float64) {
	d, e := l.d, l.e
	clear(dst)
	for i, xi := range x {
		if xi == 0 {
			continue
		}
		blk := l.W[((i*l.na+a0)*d)*e : ((i*l.na+a1)*d)*e]
		for r := range dst {
			dst[r] += xi * l.rowDot(blk[r*e:(r+1)*e], z)
		}
	}
}

// Psi writes psi(s, ., z) for observation x into dst (action-major). It
// panics if a length is wrong. It does not allocate.
func (l *Linear) Psi(dst, x, z []float64) {
	checkLen("linear", "psi slice", dst, l.na*l.d)
	checkLen("linear", "observation", x, l.obs)
	checkLen("linear", "z", z, l.d)
	l.psiDense(dst, x, 0, l.na, z)
}

// PsiState writes psi(s, ., z) = (M_{s,a} z [+ b_{s,a}])_a for the one-hot
// observation e_s into dst. It panics if s is out of range or a length is
// wrong. It does not allocate.
func (l *Linear) PsiState(dst []float64, s int, z []float64) {
	checkLen("linear", "psi slice", dst, l.na*l.d)
	checkLen("linear", "z", z, l.d)
	if uint(s) >= uint(l.obs) {
		panic(fmt.Sprintf("usf: linear: state %d out of range [0, %d)", s, l.obs))
	}
	l.psiState(dst, s, 0, l.na, z)
}

// Update applies semi-gradient TD(0) to the transitions of b one after
// another, in order (online TD):
//
//	delta = phi + gamma (1-terminal) psi(s', a', z) - psi(s, a, z)
//	W[i, a, k, j] += Alpha delta_k x_i z_j      (and W[i, a, k, d] += Alpha delta_k x_i)
//
// with a' the given next action or argmax_a' psi(s', a', z) . z. It reads X
// and NextX if set, else the one-hot states S and Next. The loss is
// (1/(2n)) sum ||delta||^2 of the deltas as applied. It panics if b is
// malformed. It does not allocate.
func (l *Linear) Update(b *Batch) (float64, error) {
	if l.err != nil {
		return 0, l.err
	}
	b.check("linear", l.obs, l.na, l.d, false)
	n := b.Len()
	d, na := l.d, l.na
	dense := b.X != nil
	var loss float64
	for i := 0; i < n; i++ {
		a := b.A[i]
		z := b.Z[i*d : (i+1)*d]
		phi := b.Phi[i*d : (i+1)*d]
		var x []float64
		s := -1
		if dense {
			x = b.X[i*l.obs : (i+1)*l.obs]
		} else {
			s = b.S[i]
			if uint(s) >= uint(l.obs) || uint(b.Next[i]) >= uint(l.obs) {
				panic(fmt.Sprintf("usf: linear: state %d or %d out of range [0, %d)", s, b.Next[i], l.obs))
			}
		}
		// Bootstrap term gamma psi(s', a', z), in l.cur.
		cur := l.cur
		clear(cur)
		if !b.Terminal[i] {
			an := b.nextAction(i)
			a0, a1 := 0, na
			if an >= 0 {
				a0, a1 = an, an+1
			}
			nx := l.next[:(a1-a0)*d]
			if dense {
				l.psiDense(nx, b.NextX[i*l.obs:(i+1)*l.obs], a0, a1, z)
			} else {
				l.psiState(nx, b.Next[i], a0, a1, z)
			}
			if an < 0 {
				an = greedy(nx, z, na)
			} else {
				an = 0
			}
			for k := range cur {
				cur[k] = l.gamma * nx[an*d+k]
			}
		}
		// delta = phi + bootstrap - psi(s, a, z), in l.next[:d].
		delta := l.next[:d]
		if dense {
			l.psiDense(delta, x, a, a+1, z)
		} else {
			l.psiState(delta, s, a, a+1, z)
		}
		var sq float64
		for k := range delta {
			v := phi[k] + cur[k] - delta[k]
			delta[k] = v
			sq += v * v
		}
		l.steps++
		if math.IsNaN(sq) || math.IsInf(sq, 0) {
			l.err = &sf.DivergenceError{Learner: "usf linear", Step: l.steps, State: s, Action: a}
			return 0, l.err
		}
		loss += sq
		if dense {
			for j, xi := range x {
				if xi != 0 {
					l.step(j, a, xi, delta, z)
				}
			}
		} else {
			l.step(s, a, 1, delta, z)
		}
	}
	if n == 0 {
		return 0, nil
	}
	return loss / (2 * float64(n)), nil
}

// step adds Alpha xi delta_k z_j (and Alpha xi delta_k for the bias) to
// the block of observation entry i and action a.
func (l *Linear) step(i, a int, xi float64, delta, z []float64) {
	d, e := l.d, l.e
	blk := l.W[((i*l.na+a)*d)*e : ((i*l.na+a+1)*d)*e]
	for k, dk := range delta {
		c := l.Alpha * xi * dk
		if c == 0 {
			continue
		}
		row := blk[k*e : (k+1)*e]
		for j, zj := range z {
			row[j] += c * zj
		}
		if e > d {
			row[d] += c
		}
	}
}
