package mdp

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"
)

// openGrid returns an open rows x cols grid (no walls) with a goal label
// 'G' in the middle paying 1 on arrival, four moves and slip 0.1.
func openGrid(b *testing.B, rows, cols int) (*Grid, Reward) {
	b.Helper()
	var sb strings.Builder
	for r := 0; r < rows; r++ {
		line := []byte(strings.Repeat(".", cols))
		if r == rows/2 {
			line[cols/2] = 'G'
		}
		sb.Write(line)
		sb.WriteByte('\n')
	}
	g, err := ParseGrid(sb.String(), &GridConfig{Labels: map[rune]string{'G': "goal"}, Slip: 0.1})
	if err != nil {
		b.Fatal(err)
	}
	rew, err := g.PlaceReward([]float64{1})
	if err != nil {
		b.Fatal(err)
	}
	return g, rew
}

func BenchmarkEvaluate(b *testing.B) {
	depot, err := Depot()
	if err != nil {
		b.Fatal(err)
	}
	w, _ := depot.Weights(map[string]float64{"dock": 1, "lane": -1, "charger": -1})
	depotR, _ := depot.PlaceReward(w)
	cases := []struct {
		name string
		g    func() (*Grid, Reward)
	}{
		{"depot/n=105", func() (*Grid, Reward) { return depot, depotR }},
		{"grid/n=1e4", func() (*Grid, Reward) { return openGrid(b, 100, 100) }},
		{"grid/n=1e6", func() (*Grid, Reward) { return openGrid(b, 1000, 1000) }},
	}
	for _, tc := range cases {
		b.Run(tc.name, func(b *testing.B) {
			g, r := tc.g()
			m := g.MDP
			pi := Uniform{m.NumActions()}
			b.ReportAllocs()
			var v *Values
			for b.Loop() {
				var err error
				v, err = Evaluate(m, pi, r, 0.99)
				if err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(v.Solve.Iterations), "iters")
			b.ReportMetric(math.Log10(v.Solve.Residual+1e-300), "log10-residual")
		})
	}
}

func BenchmarkOptimal(b *testing.B) {
	for _, size := range []int{10, 100} {
		b.Run(fmt.Sprintf("grid/n=%d", size*size), func(b *testing.B) {
			g, r := openGrid(b, size, size)
			b.ReportAllocs()
			var res *OptimalResult
			for b.Loop() {
				var err error
				res, err = Optimal(g.MDP, r, 0.99)
				if err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(res.Iterations), "pi-iters")
		})
	}
}

func BenchmarkStateActionChain(b *testing.B) {
	g, _ := openGrid(b, 100, 100)
	pi := Uniform{g.MDP.NumActions()}
	b.ReportAllocs()
	for b.Loop() {
		g.MDP.StateActionChain(pi)
	}
}

func BenchmarkParseGrid(b *testing.B) {
	layout := strings.Repeat(strings.Repeat(".", 100)+"\n", 100)
	b.ReportAllocs()
	for b.Loop() {
		if _, err := ParseGrid(layout, nil); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkSamplerStep(b *testing.B) {
	for _, slip := range []float64{0, 0.2} {
		b.Run(fmt.Sprintf("depot/slip=%v", slip), func(b *testing.B) {
			opts := DepotConfig()
			opts.Slip = slip
			g, err := ParseGrid(DepotLayout, opts)
			if err != nil {
				b.Fatal(err)
			}
			e := NewSampler(g.MDP, DepotTimeLimit)
			rng := rand.New(rand.NewPCG(1, 2))
			e.Reset(rng)
			a := 0
			b.ReportAllocs()
			for b.Loop() {
				a = (a + 1) % 5
				if e.Step(a, rng).Done() {
					e.Reset(rng)
				}
			}
		})
	}
}
