package gpi

import "github.com/successor-go/successor/sf"

// An *sf.Table is a Source read in place.
var (
	_ Source = (*sf.Table)(nil)
	_ Viewer = (*sf.Table)(nil)
)

// Source is anything that gives successor features psi(s, a) for every
// action of a state: an SF table, a linear approximator, a universal SF at a
// fixed task vector. GPI works over any mix of sources with the same shape.
type Source interface {
	// Shape returns the number of actions and the feature dimension d.
	Shape() (actions, dim int)
	// Psi writes psi(s, a) for every action a into dst, action-major:
	// dst[a*dim + k] is feature k of action a. len(dst) is actions*dim.
	// It panics if len(dst) is wrong or s is out of range.
	Psi(dst []float64, s int)
}

// Viewer is a Source that can hand out its psi(s, .) in place, laid out as
// Psi would write it (action-major, actions*dim values). The selector reads
// a Viewer without copying. The returned slice must not be modified by the
// caller and need only stay valid until the next call that changes the
// source. *sf.Table is a Viewer.
type Viewer interface {
	Source
	State(s int) []float64
}
