package gpi_test

import (
	"errors"
	"math"
	"testing"

	"github.com/successor-go/successor/gpi"
	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/sf"
)

// handMDP is a three-state deterministic MDP (derived by hand, see
// TestGPIBeatsEverySource): state 0 is the start, state 2 is terminal.
//
//	state 0, action 0 -> state 1      state 0, action 1 -> state 2
//	state 1, action 0 -> state 2 (pays the "bench" feature)
//	state 1, action 1 -> state 2
//
// Features phi(s, a, s') = (bench, step): bench = 1 only on (1, 0, 2), step
// = 1 on every transition.
func handMDP(t *testing.T) (*mdp.Finite, sf.FeatureMap) {
	t.Helper()
	m, err := mdp.New(3, 2, []mdp.ProbEntry{
		{State: 0, Action: 0, Next: 1, Prob: 1},
		{State: 0, Action: 1, Next: 2, Prob: 1},
		{State: 1, Action: 0, Next: 2, Prob: 1},
		{State: 1, Action: 1, Next: 2, Prob: 1},
	}, []bool{false, false, true}, []float64{1, 0, 0})
	if err != nil {
		t.Fatal(err)
	}
	phi := sf.FeatureFunc{D: 2, F: func(dst []float64, s, a, next int) {
		dst[0], dst[1] = 0, 1
		if s == 1 && a == 0 {
			dst[0] = 1
		}
	}}
	return m, phi
}

// TestGPIBeatsEverySource works GPI by hand on handMDP with gamma = 0.9 and
// w = (1, -0.1): reward 0.9 for the bench step, -0.1 for every other step.
//
// pi_1 = (0, 1) walks to state 1, then leaves without the bench:
//
//	Q1(1,0) = 0.9, Q1(1,1) = -0.1,
//	Q1(0,0) = -0.1 + 0.9 Q1(1,1) = -0.19, Q1(0,1) = -0.1, V1(0) = -0.19.
//
// pi_2 = (1, 0) would take the bench in state 1 but leaves from state 0:
//
//	Q2(1,0) = 0.9, Q2(1,1) = -0.1,
//	Q2(0,0) = -0.1 + 0.9 Q2(1,0) = 0.71, Q2(0,1) = -0.1, V2(0) = -0.1.
//
// GPI: in state 0 the largest Q is Q2(0,0) = 0.71 (action 0, source 1); in
// state 1 both give 0.9 at action 0 (tie, source 0). The GPI policy (0, 0)
// is neither source policy, and V(0) = -0.1 + 0.9 * 0.9 = 0.71, strictly
// above both V1(0) = -0.19 and V2(0) = -0.1.
func TestGPIBeatsEverySource(t *testing.T) {
	const tol = 1e-12 // exact solve of a 3-state system
	m, phi := handMDP(t)
	const gamma = 0.9
	w := []float64{1, -0.1}
	pols := []mdp.Policy{mdp.Deterministic{0, 1, 0}, mdp.Deterministic{1, 0, 0}}
	src := make([]gpi.Source, len(pols))
	for i, pi := range pols {
		tab, err := sf.Exact(m, pi, phi, gamma)
		if err != nil {
			t.Fatal(err)
		}
		src[i] = tab
	}
	res, err := gpi.Evaluate(m, src, phi, w, gamma, &gpi.EvaluateConfig{Policies: pols})
	if err != nil {
		t.Fatal(err)
	}
	if res.Policy[0] != 0 || res.Policy[1] != 0 || res.Winner[0] != 1 || res.Winner[1] != 0 {
		t.Errorf("GPI policy %v winners %v, want [0 0 .] and [1 0 .]", res.Policy, res.Winner)
	}
	for _, c := range []struct {
		name      string
		got, want float64
	}{
		{"V_gpi(0)", res.V[0], 0.71},
		{"V_gpi(1)", res.V[1], 0.9},
		{"V_1(0)", res.Sources[0].V[0], -0.19},
		{"V_2(0)", res.Sources[1].V[0], -0.1},
		{"Q_1(0,0)", res.Sources[0].Q[0], -0.19},
		{"Q_2(0,0)", res.Sources[1].Q[0], 0.71},
		{"psi_2(0,0).w", res.Approx[1][0], 0.71},
		{"improvement at (0,0)", res.Improvement()[0], 0},
		{"improvement at (0,1)", res.Improvement()[1], 0},
	} {
		if math.Abs(c.got-c.want) > tol {
			t.Errorf("%s = %.15g, want %.15g (derived by hand)", c.name, c.got, c.want)
		}
	}
	if !(res.V[0] > res.Sources[0].V[0]+0.5 && res.V[0] > res.Sources[1].V[0]+0.5) {
		t.Errorf("GPI V(0) = %v not strictly above the sources %v, %v", res.V[0], res.Sources[0].V[0], res.Sources[1].V[0])
	}

	// Without Policies, each source acts alone on w, greedy in psi_i . w:
	// source 0 alone picks argmax(Q1(0,.)) = action 1 in state 0 (-0.1 >
	// -0.19) so V = -0.1; source 1 alone is the GPI policy (0, 0), V = 0.71.
	alone, err := gpi.Evaluate(m, src, phi, w, gamma, nil)
	if err != nil {
		t.Fatal(err)
	}
	if got := alone.Sources[0].V[0]; math.Abs(got+0.1) > tol {
		t.Errorf("source 0 alone: V(0) = %v, want -0.1 (derived by hand)", got)
	}
	if got := alone.Sources[1].V[0]; math.Abs(got-0.71) > tol {
		t.Errorf("source 1 alone: V(0) = %v, want 0.71 (derived by hand)", got)
	}
}

func TestBoundFunctions(t *testing.T) {
	const tol = 1e-15
	for _, c := range []struct {
		name                     string
		wi                       []float64
		tasks                    [][]float64
		phiMax, eps, gamma, want float64
	}{
		// 2/(1-0.5) (1 * min(5, 1) + 0) = 4, derived by hand.
		{"nearest task", []float64{3, 4}, [][]float64{{0, 0}, {3, 5}}, 1, 0, 0.5, 4},
		// 2/(1-0.9) (2 * 0 + 0.1) = 2, derived by hand.
		{"own task", []float64{1, 2}, [][]float64{{1, 2}}, 2, 0.1, 0.9, 2},
		// gamma = 0: 2 (0.5 * sqrt(2) + 0).
		{"myopic", []float64{1, 1}, [][]float64{{0, 0}}, 0.5, 0, 0, math.Sqrt2},
	} {
		got, err := gpi.GapBound(c.wi, c.tasks, c.phiMax, c.eps, c.gamma)
		if err != nil || math.Abs(got-c.want) > tol*c.want {
			t.Errorf("%s: GapBound = %v, %v; want %v", c.name, got, err, c.want)
		}
	}
	if s, err := gpi.DominanceSlack(0.25, 0.75); err != nil || s != 2 {
		t.Errorf("DominanceSlack(0.25, 0.75) = %v, %v; want 2 (2*0.25/0.25)", s, err)
	}
	for _, c := range []struct {
		name string
		err  error
		want error
	}{
		{"gamma 1", second(gpi.DominanceSlack(0, 1)), gpi.ErrDiscount},
		{"negative eps", second(gpi.DominanceSlack(-1, 0.5)), gpi.ErrConfig},
		{"NaN eps", second(gpi.GapBound([]float64{1}, [][]float64{{1}}, 1, math.NaN(), 0.5)), gpi.ErrNonFinite},
		{"no tasks", second(gpi.GapBound([]float64{1}, nil, 1, 0, 0.5)), gpi.ErrNoSources},
		{"task length", second(gpi.GapBound([]float64{1}, [][]float64{{1, 2}}, 1, 0, 0.5)), gpi.ErrDimension},
		{"negative phiMax", second(gpi.GapBound([]float64{1}, [][]float64{{1}}, -1, 0, 0.5)), gpi.ErrConfig},
		{"dominance lengths", gpi.CheckDominance([]float64{1, 2}, [][]float64{{1}}, 1, 0, 0.5, 0), gpi.ErrDimension},
		{"gap lengths", gpi.CheckGap([]float64{1, 2}, []float64{1}, 1, 0, 0), gpi.ErrDimension},
	} {
		if !errors.Is(c.err, c.want) {
			t.Errorf("%s: error %v, want %v", c.name, c.err, c.want)
		}
	}
}

func second(_ float64, err error) error { return err }

func TestCheckFunctionsCanFail(t *testing.T) {
	// Hand-made values: at pair 3 (state 1, action 1 with 2 actions) the
	// GPI value 0 is below source 1's value 1 by more than the slack
	// 2*0.1/(1-0.5) = 0.4; pair 0 is short by 0.3, inside the slack.
	q := []float64{0, 5, 5, 0}
	src := [][]float64{{0.3, 0, 0, 0}, {0, 0, 0, 1}}
	err := gpi.CheckDominance(q, src, 2, 0.1, 0.5, 0)
	var de *gpi.DominanceError
	if !errors.As(err, &de) || !errors.Is(err, gpi.ErrBound) {
		t.Fatalf("got %v, want a *DominanceError", err)
	}
	if de.State != 1 || de.Action != 1 || de.Source != 1 || de.GPI != 0 || de.Value != 1 {
		t.Errorf("got %+v, want state 1 action 1 source 1", de)
	}
	if err := gpi.CheckDominance(q, src, 2, 0.4, 0.5, 0); err != nil {
		t.Errorf("slack 1.6 covers every pair, got %v", err)
	}
	if err := gpi.CheckDominance([]float64{math.NaN()}, [][]float64{{0}}, 1, 0, 0.5, 0); !errors.Is(err, gpi.ErrBound) {
		t.Errorf("NaN value: got %v, want ErrBound", err)
	}

	var ge *gpi.GapError
	err = gpi.CheckGap([]float64{1, 2, 3}, []float64{1, 0, 2.5}, 3, 1, 0.5)
	if !errors.As(err, &ge) || ge.Action != 1 || ge.Gap != 2 {
		t.Errorf("got %v, want a gap 2 at action 1", err)
	}
	if err := gpi.CheckGap([]float64{1, 2, 3}, []float64{1, 0, 2.5}, 3, 1.5, 0.5); err != nil {
		t.Errorf("bound 2 covers the gap 2, got %v", err)
	}
}

func TestEvaluateErrors(t *testing.T) {
	m, phi := handMDP(t)
	good, err := sf.NewTable(3, 2, 2)
	if err != nil {
		t.Fatal(err)
	}
	small, _ := sf.NewTable(2, 2, 2)
	wide, _ := sf.NewTable(3, 2, 3)
	w := []float64{1, 0}
	for _, c := range []struct {
		name string
		src  []gpi.Source
		w    []float64
		set  *gpi.EvaluateConfig
		want error
	}{
		{"no sources", nil, w, nil, gpi.ErrNoSources},
		{"too few states", []gpi.Source{small}, w, nil, gpi.ErrDimension},
		{"shape", []gpi.Source{good, wide}, w, nil, gpi.ErrDimension},
		{"w length", []gpi.Source{good}, []float64{1}, nil, gpi.ErrDimension},
		{"w NaN", []gpi.Source{good}, []float64{math.NaN(), 0}, nil, gpi.ErrNonFinite},
		{"policies", []gpi.Source{good}, w, &gpi.EvaluateConfig{Policies: []mdp.Policy{mdp.Uniform{N: 2}, mdp.Uniform{N: 2}}}, gpi.ErrDimension},
		{"tasks", []gpi.Source{good}, w, &gpi.EvaluateConfig{Tasks: [][]float64{{1}}}, gpi.ErrDimension},
	} {
		if _, err := gpi.Evaluate(m, c.src, phi, c.w, 0.9, c.set); !errors.Is(err, c.want) {
			t.Errorf("%s: error %v, want %v", c.name, err, c.want)
		}
	}
	// A discount the oracle rejects comes back wrapped.
	if _, err := gpi.Evaluate(m, []gpi.Source{good}, phi, w, 1.5, nil); !errors.Is(err, gpi.ErrDiscount) {
		t.Errorf("gamma 1.5: error %v, want ErrDiscount", err)
	}
	nan := good.Clone()
	nan.Data[0] = math.NaN()
	if _, err := gpi.Evaluate(m, []gpi.Source{nan}, phi, w, 0.9, nil); !errors.Is(err, gpi.ErrNonFinite) {
		t.Errorf("NaN psi: error %v, want ErrNonFinite", err)
	}
}

func TestExpectedRewardAndPhiMax(t *testing.T) {
	m, phi := handMDP(t)
	// Derived by hand from handMDP with w = (1, -0.1): every step costs
	// 0.1, the bench step (1, 0) pays 1; the terminal state 2 pays 0.
	want := []float64{-0.1, -0.1, 0.9, -0.1, 0, 0}
	got := gpi.ExpectedReward(m, phi, []float64{1, -0.1})
	for i := range want {
		if math.Abs(got[i]-want[i]) > 1e-15 {
			t.Errorf("rbar[%d] = %v, want %v (derived by hand)", i, got[i], want[i])
		}
	}
	// The largest feature vector is (1, 1) on the bench step: sqrt 2.
	if got := gpi.PhiMax(m, phi); got != math.Sqrt2 {
		t.Errorf("PhiMax = %v, want sqrt(2) (derived by hand)", got)
	}
}
