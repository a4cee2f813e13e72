package gpi

import (
	"fmt"
	"math"

	"github.com/successor-go/successor/sf"
)

// Selector chooses GPI actions. It holds scratch space so that, once it has
// seen the largest source shape, a choice allocates nothing. The zero value
// is ready to use. A Selector must not be used by several goroutines at once;
// give each goroutine its own.
type Selector struct {
	buf []float64 // psi(s, .) of a source that is not a Viewer
	q   []float64 // Q_i(s, .) of one source
}

// view returns psi(s, .) of src, which must have the given shape: in place
// for an *sf.Table or a Viewer, otherwise copied into the selector's
// scratch. i is the source's index, for messages.
func (sel *Selector) view(src Source, i, s, actions, dim int) []float64 {
	n := actions * dim
	if t, ok := src.(*sf.Table); ok {
		// The common case, read without a method call.
		if t.A != actions || t.D != dim {
			panic(shapeMsg(i, t.A, t.D, actions, dim))
		}
		if uint(s) >= uint(t.S) {
			panic(fmt.Sprintf("gpi: state %d out of range of source %d (%d states)", s, i, t.S))
		}
		off := s * n
		return t.Data[off : off+n : off+n]
	}
	if a, d := src.Shape(); a != actions || d != dim {
		panic(shapeMsg(i, a, d, actions, dim))
	}
	if v, ok := src.(Viewer); ok {
		p := v.State(s)
		if len(p) != n {
			panic(fmt.Sprintf("gpi: state view of source %d has length %d, want %d", i, len(p), n))
		}
		return p
	}
	if cap(sel.buf) < n {
		sel.buf = make([]float64, n)
	}
	p := sel.buf[:n]
	src.Psi(p, s)
	return p
}

func shapeMsg(i, a, d, actions, dim int) string {
	return fmt.Sprintf("gpi: source %d has shape (%d, %d), source 0 has (%d, %d)", i, a, d, actions, dim)
}

// shape returns the shape of the first source and checks it against w; the
// other sources are checked as they are read.
func shape(w []float64, sources []Source) (actions, dim int) {
	if len(sources) == 0 {
		panic("gpi: no sources")
	}
	if t, ok := sources[0].(*sf.Table); ok {
		actions, dim = t.A, t.D
	} else {
		actions, dim = sources[0].Shape()
	}
	if len(w) != dim {
		panic(fmt.Sprintf("gpi: task vector has length %d, sources have dimension %d", len(w), dim))
	}
	return actions, dim
}

// Act returns the GPI action in state s for task vector w,
//
//	action = argmax_a max_i psi_i(s, a) . w,
//
// the index of the source that attains the maximum, and the maximum value
// Q = psi_source(s, action) . w.
//
// Ties go to the lowest source index, then to the lowest action: of all
// pairs (i, a) attaining the maximum, Act returns the first in the order
// i = 0, 1, ... with a = 0, 1, ... inside each i.
//
// Act allocates nothing once the selector's scratch has grown to the
// sources' shape. It panics if sources is empty, if the sources differ in
// shape, if len(w) is not their feature dimension, or if s is out of range
// of a source.
//
// Special cases are:
//
//	any psi_i(s, a) . w is NaN  =>  action -1, source -1, value NaN
//	all values -Inf             =>  action 0, source 0, value -Inf
func (sel *Selector) Act(w []float64, s int, sources ...Source) (action, source int, value float64) {
	actions, dim := shape(w, sources)
	if cap(sel.q) < actions {
		sel.q = make([]float64, actions)
	}
	qs := sel.q[:actions]
	best, bi, ba := math.Inf(-1), 0, 0
	nan := false
	for i, src := range sources {
		scores(qs, sel.view(src, i, s, actions, dim), w)
		for a, q := range qs {
			if q > best {
				best, bi, ba = q, i, a
			}
			nan = nan || q != q
		}
	}
	if nan {
		return -1, -1, math.NaN()
	}
	return ba, bi, best
}

// Values computes generalized policy evaluation (GPE) in state s: it writes
// Q_i(s, a) = psi_i(s, a) . w into dst[i*actions + a] for every source i and
// action a, and returns dst. If dst is nil a new slice is allocated.
// Values panics under the same conditions as Act, or if dst is not nil and
// its length is not len(sources)*actions.
func (sel *Selector) Values(dst, w []float64, s int, sources ...Source) []float64 {
	actions, dim := shape(w, sources)
	if dst == nil {
		dst = make([]float64, len(sources)*actions)
	}
	if len(dst) != len(sources)*actions {
		panic(fmt.Sprintf("gpi: values: dst has length %d, want %d", len(dst), len(sources)*actions))
	}
	for i, src := range sources {
		scores(dst[i*actions:(i+1)*actions], sel.view(src, i, s, actions, dim), w)
	}
	return dst
}

// ActStates is the batch form of Act: for each states[j] it writes the GPI
// action into actions[j], the winning source into winners[j] and the value
// into values[j]. winners and values may be nil when not wanted. It panics
// under the same conditions as Act, or if a non-nil destination's length
// differs from len(states).
func (sel *Selector) ActStates(actions, winners []int, values []float64, w []float64, states []int, sources ...Source) {
	if len(actions) != len(states) || (winners != nil && len(winners) != len(states)) || (values != nil && len(values) != len(states)) {
		panic("gpi: act states: destination length differs from len(states)")
	}
	for j, s := range states {
		a, i, v := sel.Act(w, s, sources...)
		actions[j] = a
		if winners != nil {
			winners[j] = i
		}
		if values != nil {
			values[j] = v
		}
	}
}

// Act is Selector.Act with a fresh selector, whose scratch it allocates on
// every call; use a Selector in loops.
func Act(w []float64, s int, sources ...Source) (action, source int, value float64) {
	var sel Selector
	return sel.Act(w, s, sources...)
}
