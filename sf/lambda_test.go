package sf

import (
	"errors"
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/mdp"
)

// TestTDLambdaHand checks two updates derived by hand on the chain
// 0 -> 1 -> 2 (terminal), one action, phi = e_s, alpha = 1/2, gamma = 1,
// from psi = 0: step 1 gives delta = e_0 and psi(0) = e_0/2; step 2 gives
// delta = e_1, psi(1) = e_1/2 and, through the trace gamma lambda of pair
// 0, psi(0) = e_0/2 + lambda e_1/2. Traces are cleared at the terminal.
func TestTDLambdaHand(t *testing.T) {
	for _, lambda := range []float64{0, 0.5, 1} {
		for _, tr := range []Trace{Accumulating, Replacing} {
			tb, _ := NewTable(3, 1, 3)
			l, err := NewTDLambda(tb, OneHotState{N: 3}, 1, &TDLambdaConfig{Lambda: lambda, Trace: tr, Schedule: StepSchedule{StepSize: 0.5}, Cutoff: -1})
			if err != nil {
				t.Fatal(err)
			}
			l.Update(0, 0, 1, false, 0)
			l.Update(1, 0, 2, true, 0)
			want0 := []float64{0.5, 0.5 * lambda, 0}
			want1 := []float64{0, 0.5, 0}
			if d, _ := maxAbsDiff(tb.Row(0, 0), want0); d > 1e-15 {
				t.Errorf("lambda %v %v: psi(0) = %v, want %v", lambda, tr, tb.Row(0, 0), want0)
			}
			if d, _ := maxAbsDiff(tb.Row(1, 0), want1); d > 1e-15 {
				t.Errorf("lambda %v %v: psi(1) = %v, want %v", lambda, tr, tb.Row(1, 0), want1)
			}
			if l.Live() != 0 {
				t.Errorf("lambda %v: %d live traces after a terminal", lambda, l.Live())
			}
		}
	}
}

// TestTDLambdaZero checks that lambda = 0 is TD(0) with the Sampled target
// (same constant step; agreement to rounding, 1e-12).
func TestTDLambdaZero(t *testing.T) {
	phi, _ := NewRandom(6, 3, false, rand.New(rand.NewPCG(1, 1)))
	t0, _ := NewTable(6, 2, 3)
	t1, _ := NewTable(6, 2, 3)
	td, _ := NewTD(t0, phi, 0.9, &TDConfig{Schedule: StepSchedule{StepSize: 0.2}})
	tl, _ := NewTDLambda(t1, phi, 0.9, &TDLambdaConfig{Schedule: StepSchedule{StepSize: 0.2}})
	rng := rand.New(rand.NewPCG(2, 2))
	for k := 0; k < 5000; k++ {
		s, a, s2, a2, term := rng.IntN(6), rng.IntN(2), rng.IntN(6), rng.IntN(2), rng.IntN(8) == 0
		td.Update(s, a, s2, term, a2)
		tl.Update(s, a, s2, term, a2)
	}
	if d, sc := maxAbsDiff(t1.Data, t0.Data); d > 1e-12*(1+sc) {
		t.Errorf("TD(0) and TD(lambda=0) differ by %g", d)
	}
}

// TestTDLambdaRandomWalk checks convergence to Exact on Sutton & Barto 2nd
// ed. Example 6.2 (gamma = 1, one-hot state features), lambda = 0.8 with
// accumulating and replacing traces, a step decaying with the update count
// 0.3/(1+n)^0.6; tolerance 0.02 of the largest entry at 1e6 transitions
// (measured about 0.01 of it for this seed).
func TestTDLambdaRandomWalk(t *testing.T) {
	m := randomWalk(t)
	pi := mdp.Uniform{N: 2}
	phi := OneHotState{N: 7}
	ex, err := Exact(m, pi, phi, 1)
	if err != nil {
		t.Fatal(err)
	}
	const budget = 1000000
	for _, tr := range []Trace{Accumulating, Replacing} {
		tb, _ := NewTable(7, 2, 7)
		l, err := NewTDLambda(tb, phi, 1, &TDLambdaConfig{Lambda: 0.8, Trace: tr, Schedule: StepSchedule{StepSize: 0.3, Power: 0.6}})
		if err != nil {
			t.Fatal(err)
		}
		rng := rand.New(rand.NewPCG(1, 2))
		env := mdp.NewSampler(m, 0)
		s, a := env.Reset(rng), rng.IntN(2)
		for k := 0; k < budget; k++ {
			out := env.Step(a, rng)
			a2 := rng.IntN(2)
			if err := l.Update(s, a, out.Next, out.Terminal(), a2); err != nil {
				t.Fatal(err)
			}
			if out.Done() {
				s, a = env.Reset(rng), rng.IntN(2)
				continue
			}
			s, a = out.Next, a2
		}
		d, sc := tableError(m, tb, ex)
		t.Logf("%v: max error %.4f of largest entry %.3f", tr, d, sc)
		if d > 0.02*sc {
			t.Errorf("%v: max error %.4f > 0.02 * %.3f", tr, d, sc)
		}
	}
}

func TestTDLambdaErrorsAndAllocs(t *testing.T) {
	tb, _ := NewTable(3, 2, 3)
	phi := OneHotState{N: 3}
	for _, s := range []*TDLambdaConfig{{Lambda: 1.5}, {Trace: 9}, {Schedule: StepSchedule{Power: 2}}} {
		if _, err := NewTDLambda(tb, phi, 0.9, s); !errors.Is(err, ErrConfig) {
			t.Errorf("%+v: err = %v, want ErrConfig", s, err)
		}
	}
	if _, err := NewTDLambda(tb, phi, 2, nil); !errors.Is(err, ErrDiscount) {
		t.Errorf("gamma 2: err = %v", err)
	}
	l, _ := NewTDLambda(tb, phi, 0.9, &TDLambdaConfig{Lambda: 0.9})
	if n := testing.AllocsPerRun(100, func() {
		l.Update(0, 1, 1, false, 0)
		l.Update(1, 0, 2, false, 1)
		l.Update(2, 1, 0, true, 0)
	}); n != 0 {
		t.Errorf("%v allocs per update", n)
	}
	big, _ := NewTable(1, 1, 1)
	lb, _ := NewTDLambda(big, FeatureFunc{D: 1, F: func(dst []float64, s, a, next int) { dst[0] = 1e308 }}, 1, &TDLambdaConfig{Schedule: StepSchedule{StepSize: 1}})
	lb.Update(0, 0, 0, false, 0) // psi = 1e308
	var de *DivergenceError
	if err := lb.Update(0, 0, 0, false, 0); !errors.As(err, &de) || de.Step != 2 {
		t.Errorf("divergence: err = %v, want step 2", err)
	}
}
