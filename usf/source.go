package usf

import (
	"fmt"
	"math"
)

// Source is a universal SF at a fixed z, seen as the successor features of
// the policy of z over integer states: Psi(dst, s) = psi(x(s), ., z). It
// satisfies the gpi package's Source interface (Shape and Psi,
// action-major). The approximator is read live: training it changes the
// source.
type Source struct {
	ap    Approximator
	z     []float64
	obs   Observer
	fast  StatePsi // one-hot observations and an indexed approximator
	x     []float64
	na, d int
}

// NewSource returns the source psi(., ., z) of ap for observations obs. A
// nil obs means the one-hot observation OneHot{N: obs dimension of ap}.
// z is copied. Errors wrap ErrDimension (a length mismatch) or
// ErrNonFinite.
func NewSource(ap Approximator, z []float64, obs Observer) (*Source, error) {
	no := ap.ObsDim()
	na, d := ap.Shape()
	if len(z) != d {
		return nil, fmt.Errorf("usf: source: z has length %d, want %d: %w", len(z), d, ErrDimension)
	}
	for _, v := range z {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("usf: source: z: %w", ErrNonFinite)
		}
	}
	if obs == nil {
		obs = OneHot{N: no}
	}
	if obs.Dim() != no {
		return nil, fmt.Errorf("usf: source: observer dimension %d, approximator %d: %w", obs.Dim(), no, ErrDimension)
	}
	src := &Source{ap: ap, z: append([]float64(nil), z...), obs: obs, na: na, d: d}
	if _, ok := obs.(OneHot); ok {
		src.fast, _ = ap.(StatePsi)
	}
	if src.fast == nil {
		src.x = make([]float64, no)
	}
	return src, nil
}

// Z returns a copy of the source's z.
func (src *Source) Z() []float64 { return append([]float64(nil), src.z...) }

// Shape returns the number of actions and the feature dimension.
func (src *Source) Shape() (actions, dim int) { return src.na, src.d }

// Psi writes psi(x(s), a, z) for every action a into dst, action-major. It
// panics if len(dst) != actions*dim or s is out of range. It does not
// allocate (for approximators whose Psi does not).
func (src *Source) Psi(dst []float64, s int) {
	if src.fast != nil {
		src.fast.PsiState(dst, s, src.z)
		return
	}
	src.obs.Observe(src.x, s)
	src.ap.Psi(dst, src.x, src.z)
}

// Sources returns one Source per vector of zs, sharing ap and obs.
func Sources(ap Approximator, zs [][]float64, obs Observer) ([]*Source, error) {
	out := make([]*Source, len(zs))
	for i, z := range zs {
		s, err := NewSource(ap, z, obs)
		if err != nil {
			return nil, fmt.Errorf("usf: sources: z[%d]: %w", i, err)
		}
		out[i] = s
	}
	return out, nil
}
