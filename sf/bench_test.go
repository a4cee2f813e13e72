package sf

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
	"time"

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

// BenchmarkTD measures one tabular TD(0) update with the built-in label
// features (d labels, constant step 0.1, gamma 0.9) on an L1-resident table
// of 8 states and 4 actions, cycling through 1024 seeded transitions (1 in
// 16 terminal), for each target.
func BenchmarkTD(b *testing.B) {
	const ns, na = 8, 4
	for _, target := range []Target{Sampled, Expected, Greedy} {
		for _, d := range []int{16, 64} {
			b.Run(fmt.Sprintf("%v/d=%d", target, d), func(b *testing.B) {
				benchTD(b, ns, na, d, target, StepSchedule{StepSize: 0.1})
			})
		}
	}
	for _, p := range []float64{0.75, 0.7} { // fast path, exp/log path
		b.Run(fmt.Sprintf("sampled/d=64/power=%v", p), func(b *testing.B) {
			benchTD(b, ns, na, 64, Sampled, StepSchedule{Power: p})
		})
	}
}

func benchTD(b *testing.B, ns, na, d int, target Target, step StepSchedule) {
	t, _ := NewTable(ns, na, d)
	w := make([]float64, d)
	for k := range w {
		w[k] = float64(k%5) - 2
	}
	labels := make([]int, ns)
	for s := range labels {
		labels[s] = (3 * s) % d
	}
	phi, err := NewLabels(labels, d, false)
	if err != nil {
		b.Fatal(err)
	}
	l, err := NewTD(t, phi, 0.9, &TDConfig{Target: target, Policy: mdp.Uniform{N: na}, Task: w, Schedule: step})
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

// BenchmarkTDRatio measures the TD update (label features, constant step
// 0.1, gamma 0.9, 8 states, 4 actions) and the two baseline rows (fmaRow,
// maddRow) in alternating chunks of 2048 calls and reports the fastest
// chunk of each, so that the ratios are robust to other load on the
// machine. Metrics: ns per TD update, ns per baseline row, and the update
// over the faster baseline ("x-bound"). The Expected and Greedy targets
// read all A = 4 rows of the next state, so their bound is about five rows.
func BenchmarkTDRatio(b *testing.B) {
	const ns, na, chunk = 8, 4, 2048
	for _, target := range []Target{Sampled, Expected, Greedy} {
		for _, d := range []int{16, 64} {
			b.Run(fmt.Sprintf("%v/d=%d", target, d), func(b *testing.B) {
				t, _ := NewTable(ns, na, d)
				labels := make([]int, ns)
				for s := range labels {
					labels[s] = (3 * s) % d
				}
				phi, _ := NewLabels(labels, d, false)
				w := make([]float64, d)
				for k := range w {
					w[k] = float64(k%5) - 2
				}
				l, err := NewTD(t, phi, 0.9, &TDConfig{Target: target, Policy: mdp.Uniform{N: na}, Task: w, Schedule: StepSchedule{StepSize: 0.1}})
				if err != nil {
					b.Fatal(err)
				}
				tr := benchStream(1024, ns, na)
				x, y := make([]float64, d), make([]float64, d)
				bestFMA, bestTD, bestMadd := math.Inf(1), math.Inf(1), math.Inf(1)
				b.ReportAllocs()
				for b.Loop() {
					t0 := time.Now()
					for k := 0; k < chunk; k++ {
						fmaRow(y, x, 0.999)
					}
					t1 := time.Now()
					for k := 0; k < chunk; k++ {
						p := &tr[k&1023]
						l.Update(p.s, p.a, p.next, p.terminal, p.nextAction)
					}
					t2 := time.Now()
					for k := 0; k < chunk; k++ {
						maddRow(y, x, 0.999)
					}
					t3 := time.Now()
					bestFMA = min(bestFMA, float64(t1.Sub(t0).Nanoseconds())/chunk)
					bestTD = min(bestTD, float64(t2.Sub(t1).Nanoseconds())/chunk)
					bestMadd = min(bestMadd, float64(t3.Sub(t2).Nanoseconds())/chunk)
				}
				b.ReportMetric(bestTD, "ns/update")
				b.ReportMetric(bestFMA, "ns/fma-row")
				b.ReportMetric(bestMadd, "ns/madd-row")
				b.ReportMetric(bestTD/min(bestFMA, bestMadd), "x-bound")
			})
		}
	}
}

// BenchmarkLinearTD measures one semi-gradient update of the linear
// approximator with d = 64 features, |x| = 128 observation entries and 4
// actions, for each target.
func BenchmarkLinearTD(b *testing.B) {
	const na, d, m = 4, 64, 128
	rng := rand.New(rand.NewPCG(3, 4))
	obs := make([][]float64, 16)
	for i := range obs {
		obs[i] = make([]float64, m)
		for j := range obs[i] {
			obs[i][j] = rng.NormFloat64() / math.Sqrt(m)
		}
	}
	phi := make([]float64, d)
	for k := range phi {
		phi[k] = rng.Float64()
	}
	w := make([]float64, d)
	w[0] = 1
	for _, target := range []Target{Sampled, Expected, Greedy} {
		b.Run(fmt.Sprintf("%v/d=%d/x=%d", target, d, m), func(b *testing.B) {
			lin, _ := NewLinear(na, d, m)
			lt, err := NewLinearTD(lin, 0.9, &LinearTDConfig{Target: target, Task: w, Schedule: StepSchedule{StepSize: 0.01},
				Policy: func(dst, x []float64) { dst[0], dst[1], dst[2], dst[3] = 0.25, 0.25, 0.25, 0.25 }})
			if err != nil {
				b.Fatal(err)
			}
			tr := benchStream(1024, 16, na)
			b.ReportAllocs()
			i := 0
			for b.Loop() {
				p := &tr[i&1023]
				lt.Update(obs[p.s], p.a, phi, obs[p.next], p.terminal, p.nextAction)
				i++
			}
			if lt.Err() != nil {
				b.Fatal(lt.Err())
			}
		})
	}
}

// BenchmarkDepotRun measures a whole learning run: 10^6 transitions sampled
// from the invented demo depot (mdp.Sampler, uniform random actions, episodes
// truncated at mdp.DepotTimeLimit) feeding TD(0) with the place-label
// features, gamma 0.95, decaying step 1/(1+n)^0.75. Reports steps/s.
func BenchmarkDepotRun(b *testing.B) {
	g, err := mdp.Depot()
	if err != nil {
		b.Fatal(err)
	}
	m := g.MDP
	phi, _ := GridLabels(g, false)
	na := m.NumActions()
	for _, target := range []Target{Sampled, Expected} {
		b.Run(target.String(), func(b *testing.B) {
			const steps = 1000000
			b.ReportAllocs()
			var elapsed time.Duration
			for b.Loop() {
				t0 := time.Now()
				tb, _ := NewTable(m.NumStates(), na, phi.Dim())
				l, err := NewTD(tb, phi, 0.95, &TDConfig{Target: target, Policy: mdp.Uniform{N: na}, Schedule: StepSchedule{Power: 0.75}})
				if err != nil {
					b.Fatal(err)
				}
				env := mdp.NewSampler(m, mdp.DepotTimeLimit)
				rng := rand.New(rand.NewPCG(1, 2))
				s, a := env.Reset(rng), rng.IntN(na)
				for k := 0; k < steps; k++ {
					out := env.Step(a, rng)
					a2 := rng.IntN(na)
					l.Update(s, a, out.Next, out.Terminal(), a2)
					if out.Done() {
						s, a = env.Reset(rng), rng.IntN(na)
						continue
					}
					s, a = out.Next, a2
				}
				if l.Err() != nil {
					b.Fatal(l.Err())
				}
				elapsed += time.Since(t0)
			}
			b.ReportMetric(float64(steps)*float64(b.N)/elapsed.Seconds(), "steps/s")
		})
	}
}
