package sf

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/mdp"
)

// fmaRow is the baseline: one bare loop of len(y) fused multiply-adds,
// y[k] = a*x[k] + y[k], over resliced (bounds-check free) slices. It is the
// scalar lower bound for touching one row of d values.
//
//go:noinline
func fmaRow(y, x []float64, a float64) {
	x = x[:len(y)]
	for k := range y {
		y[k] = math.FMA(a, x[k], y[k])
	}
}

// BenchmarkBaselineFMA is the scalar lower bound the TD update benchmarks
// are compared with: d fused multiply-adds over L1-resident slices.
func BenchmarkBaselineFMA(b *testing.B) {
	for _, d := range []int{16, 64} {
		b.Run(fmt.Sprintf("d=%d", d), func(b *testing.B) {
			x := make([]float64, d)
			y := make([]float64, d)
			for k := range x {
				x[k] = float64(k) / float64(d)
			}
			b.ReportAllocs()
			for b.Loop() {
				fmaRow(y, x, 0.999)
			}
		})
	}
}

type benchTransition struct {
	s, a, next, nextAction int
	terminal               bool
}

// benchStream returns n seeded random transitions over s states and a
// actions, about 1 in 16 terminal.
func benchStream(n, s, a int) []benchTransition {
	rng := rand.New(rand.NewPCG(1, 2))
	tr := make([]benchTransition, n)
	for i := range tr {
		tr[i] = benchTransition{rng.IntN(s), rng.IntN(a), rng.IntN(s), rng.IntN(a), rng.IntN(16) == 0}
	}
	return tr
}

// BenchmarkTD measures one tabular TD(0) update with one-hot state-action
// features on an L1-resident table (8 states, 4 actions), for each target.
func BenchmarkTD(b *testing.B) {
	const ns, na = 8, 4
	for _, target := range []Target{Sampled, Expected, Greedy} {
		for _, d := range []int{16, 64} {
			b.Run(fmt.Sprintf("%v/d=%d", target, d), func(b *testing.B) {
				benchTD(b, ns, na, d, target, StepSize{Alpha: 0.1})
			})
		}
	}
	b.Run("sampled/d=64/decaying", func(b *testing.B) {
		benchTD(b, ns, na, 64, Sampled, StepSize{Power: 0.7})
	})
}

func benchTD(b *testing.B, ns, na, d int, target Target, step StepSize) {
	t, _ := NewTable(ns, na, d)
	w := make([]float64, d)
	for k := range w {
		w[k] = float64(k%5) - 2
	}
	phi := FeatureFunc{D: d, F: func(dst []float64, s, a, next int) { clear(dst); dst[(s*na+a)%d] = 1 }}
	_ = phi
	l, err := NewTD(t, hotMod{d: d, na: na}, 0.9, &TDSettings{Target: target, Policy: mdp.Uniform{N: na}, Task: w, Step: step})
	if err != nil {
		b.Fatal(err)
	}
	tr := benchStream(1024, ns, na)
	b.ReportAllocs()
	i := 0
	for b.Loop() {
		x := &tr[i&1023]
		l.Update(x.s, x.a, x.next, x.terminal, x.nextAction)
		i++
	}
	if l.Err() != nil {
		b.Fatal(l.Err())
	}
}

// hotMod is a sparse built-in-style map for benchmarks: e_{(s*A+a) mod d}.
type hotMod struct{ d, na int }

func (h hotMod) Dim() int { return h.d }
func (h hotMod) Features(dst []float64, s, a, next int) {
	clear(dst)
	dst[(s*h.na+a)%h.d] = 1
}
func (h hotMod) hot(s, a, next int) (int, float64, int, float64) {
	return (s*h.na + a) % h.d, 1, -1, 0
}

//go:noinline
func maddRow(y, x []float64, a float64) {
	x = x[:len(y)]
	for k := range y {
		y[k] += a * x[k]
	}
}

func BenchmarkBaselineMadd(b *testing.B) {
	for _, d := range []int{16, 64} {
		b.Run(fmt.Sprintf("d=%d", d), func(b *testing.B) {
			x := make([]float64, d)
			y := make([]float64, d)
			for k := range x {
				x[k] = float64(k) / float64(d)
			}
			b.ReportAllocs()
			for b.Loop() {
				maddRow(y, x, 0.999)
			}
		})
	}
}
