package gpi

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/gonum"

	"github.com/successor-go/successor/sf"
)

// BenchmarkAct times one GPI choice over k sources with 4 actions and d = 64
// (k*4 dot products of length 64). "table" sources are *sf.Table, read in
// place; "copy" sources only implement Psi, so each is copied into the
// selector's scratch first; "stack" is Selector.ActStack over the same
// tables stacked state-major (one matrix-vector product). The state is
// fixed, as in a matmul-and-argmax over one stacked matrix; "states" cycles
// through 64 states so the psi rows come from the caches below L1.
func BenchmarkAct(b *testing.B) {
	const states, actions, dim = 64, 4, 64
	for _, k := range []int{10, 100} {
		for _, kind := range []string{"table", "copy", "states", "stack"} {
			b.Run(fmt.Sprintf("sources=%d/%s", k, kind), func(b *testing.B) {
				rng := rand.New(rand.NewPCG(1, 2))
				src := make([]Source, k)
				for i := range src {
					t, _ := sf.NewTable(states, actions, dim)
					for j := range t.Data {
						t.Data[j] = rng.NormFloat64()
					}
					if kind == "copy" {
						src[i] = copyOnly{t}
					} else {
						src[i] = t
					}
				}
				w := make([]float64, dim)
				for i := range w {
					w[i] = rng.NormFloat64()
				}
				var sel Selector
				if kind == "stack" {
					st, err := NewStack(states, src...)
					if err != nil {
						b.Fatal(err)
					}
					b.ReportAllocs()
					for b.Loop() {
						sel.ActStack(w, 3, st)
					}
					return
				}
				s, step := 3, 0
				if kind == "states" {
					step = 1
				}
				b.ReportAllocs()
				for b.Loop() {
					sel.Act(w, s, src...)
					s = (s + step) % states
				}
			})
		}
	}
}

// BenchmarkActReference times two ways of making the same choice as
// BenchmarkAct/sources=10/table without this package, to quote ratios from
// one run: "loop" is the plain Go triple loop over (source, action,
// feature); "gemv" is one gonum matrix-vector product over the 40 x 64
// matrix of all sources' rows stacked contiguously, then an argmax.
func BenchmarkActReference(b *testing.B) {
	const k, actions, dim = 10, 4, 64
	rng := rand.New(rand.NewPCG(1, 2))
	stacked := make([]float64, k*actions*dim)
	for i := range stacked {
		stacked[i] = rng.NormFloat64()
	}
	w := make([]float64, dim)
	for i := range w {
		w[i] = rng.NormFloat64()
	}
	q := make([]float64, k*actions)
	b.Run("loop", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			best, bj := math.Inf(-1), 0
			for j := 0; j < k*actions; j++ {
				var v float64
				for f := 0; f < dim; f++ {
					v += stacked[j*dim+f] * w[f]
				}
				if v > best {
					best, bj = v, j
				}
			}
			sink = bj
		}
	})
	b.Run("gemv", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			gonum.Implementation{}.Dgemv(blas.NoTrans, k*actions, dim, 1, stacked, dim, w, 1, 0, q, 1)
			best, bj := math.Inf(-1), 0
			for j, v := range q {
				if v > best {
					best, bj = v, j
				}
			}
			sink = bj
		}
	})
}

var sink int
