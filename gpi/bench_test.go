package gpi

import (
	"fmt"
	"math/rand/v2"
	"testing"
)

func BenchmarkAct(b *testing.B) {
	for _, k := range []int{10, 100} {
		for _, viewer := range []bool{true, false} {
			name := fmt.Sprintf("sources=%d/actions=4/d=64", k)
			if !viewer {
				name += "/copy"
			}
			b.Run(name, func(b *testing.B) {
				rng := rand.New(rand.NewPCG(1, 2))
				const states = 16
				src := make([]Source, k)
				for i := range src {
					t := randomTable(rng, states, 4, 64)
					if viewer {
						src[i] = t
					} else {
						src[i] = copyOnly{t}
					}
				}
				w := make([]float64, 64)
				for i := range w {
					w[i] = rng.NormFloat64()
				}
				var sel Selector
				s := 0
				b.ReportAllocs()
				for b.Loop() {
					sel.Act(w, s, src...)
					_ = states
				}
			})
		}
	}
}
