package sf

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/mdp"
)

// TestNewTableSizes checks that sizes whose product overflows, or exceeds
// MaxValues, are an ErrDimension (they used to give an empty table and no
// error, or panic in makeslice).
func TestNewTableSizes(t *testing.T) {
	for _, tc := range []struct {
		name    string
		s, a, d int
	}{
		{"product overflows to 0", 1 << 32, 1 << 16, 1 << 16}, // 2^64 wraps to 0
		{"product overflows", 1 << 40, 1 << 40, 3},
		{"beyond makeslice", 1 << 30, 1 << 30, 1},
		{"just above MaxValues", 1 << 16, 1 << 16, 2},
		{"zero", 3, 0, 2},
		{"negative", -1, 2, 2},
	} {
		if _, err := NewTable(tc.s, tc.a, tc.d); !errors.Is(err, ErrDimension) {
			t.Errorf("NewTable %s: error %v, want ErrDimension", tc.name, err)
		}
		if _, err := NewLinear(tc.s, tc.a, tc.d); !errors.Is(err, ErrDimension) {
			t.Errorf("NewLinear %s: error %v, want ErrDimension", tc.name, err)
		}
	}
	tb, err := NewTable(3, 2, 4)
	if err != nil || len(tb.Data) != 24 {
		t.Fatalf("3 x 2 x 4 table: %v, %d values", err, len(tb.Data))
	}
}

// TestExactWrongSize checks that Exact returns ErrDimension, not a panic,
// for a feature map or a policy built for another MDP.
func TestExactWrongSize(t *testing.T) {
	m := randomWalk(t) // 7 states, 2 actions
	labels, err := NewLabels([]int{0, 0, 1, 1, 0}, 2, false)
	if err != nil {
		t.Fatal(err)
	}
	next, err := NewNextState([][]float64{{1}, {2}, {3}})
	if err != nil {
		t.Fatal(err)
	}
	uni := mdp.Uniform{N: 2}
	for _, tc := range []struct {
		name string
		pi   mdp.Policy
		phi  FeatureMap
		want error
	}{
		{"one-hot state of 5 states", uni, OneHotState{N: 5}, ErrDimension},
		{"one-hot state-action of 3 actions", uni, OneHotStateAction{N: 7, A: 3}, ErrDimension},
		{"labels of 5 states", uni, labels, ErrDimension},
		{"next-state rows of 3 states", uni, next, ErrDimension},
		{"uniform of 3 actions", mdp.Uniform{N: 3}, OneHotState{N: 7}, ErrDimension},
		{"deterministic of 4 states", mdp.Deterministic{1, 1, 1, 1}, OneHotState{N: 7}, ErrDimension},
		{"deterministic action 2", mdp.Deterministic{0, 2, 0, 0, 0, 0, 0}, OneHotState{N: 7}, ErrDimension},
		{"nil policy", nil, OneHotState{N: 7}, ErrConfig},
		{"nil features", uni, nil, ErrConfig},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if _, err := Exact(m, tc.pi, tc.phi, 0.9); !errors.Is(err, tc.want) {
				t.Errorf("error %v, want %v", err, tc.want)
			}
		})
	}
	if _, err := Exact(m, uni, OneHotState{N: 7}, 0.9); err != nil {
		t.Errorf("the right sizes: %v", err)
	}
}

// TestNewTDConfig checks NewTD's errors against its doc: the greedy target
// without a task is a settings error (ErrConfig; it used to be
// ErrDimension), a task of the wrong length a dimension error, and a
// feature map or policy of the wrong size a dimension error.
func TestNewTDConfig(t *testing.T) {
	tb, err := NewTable(7, 2, 7)
	if err != nil {
		t.Fatal(err)
	}
	phi := OneHotState{N: 7}
	for _, tc := range []struct {
		name string
		tb   *Table
		phi  FeatureMap
		cfg  *TDConfig
		want error
	}{
		{"greedy without task", tb, phi, &TDConfig{Target: Greedy}, ErrConfig},
		{"greedy with a short task", tb, phi, &TDConfig{Target: Greedy, Task: []float64{1}}, ErrDimension},
		{"expected without policy", tb, phi, &TDConfig{Target: Expected}, ErrConfig},
		{"expected with a policy of 3 actions", tb, phi, &TDConfig{Target: Expected, Policy: mdp.Uniform{N: 3}}, ErrDimension},
		{"expected with a policy of 6 states", tb, phi, &TDConfig{Target: Expected, Policy: make(mdp.Deterministic, 6)}, ErrDimension},
		{"nil table", nil, phi, nil, ErrConfig},
		{"nil features", tb, nil, nil, ErrConfig},
		{"table sizes overflow", &Table{S: 1 << 32, A: 1 << 32, D: 7}, phi, nil, ErrDimension},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if _, err := NewTD(tc.tb, tc.phi, 0.9, tc.cfg); !errors.Is(err, tc.want) {
				t.Errorf("NewTD: error %v, want %v", err, tc.want)
			}
		})
	}
	if _, err := NewTDLambda(tb, OneHotStateAction{N: 7, A: 1}, 0.9, nil); !errors.Is(err, ErrDimension) {
		t.Errorf("NewTDLambda with a one-hot state-action map of 1 action: error %v, want ErrDimension", err)
	}
	lin, err := NewLinear(2, 3, 4)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := NewLinearTD(lin, 0.9, &LinearTDConfig{Target: Greedy}); !errors.Is(err, ErrConfig) {
		t.Errorf("NewLinearTD greedy without task: error %v, want ErrConfig", err)
	}
	if _, err := NewLinearTD(lin, 0.9, &LinearTDConfig{Target: Greedy, Task: []float64{1, math.NaN(), 0}}); !errors.Is(err, ErrNonFinite) {
		t.Errorf("NewLinearTD greedy with a NaN task: error %v, want ErrNonFinite", err)
	}
}

// TestTaskEstimatorOverflow checks that finite samples whose update
// overflows are refused with ErrNonFinite and leave the estimate as it
// was. Features of 1e200 used to panic in linalg.RLS: the guard summed
// phi and r, and 1e200 - 1e200 + 0 passes.
func TestTaskEstimatorOverflow(t *testing.T) {
	est, err := NewTaskEstimator(2, 1, nil)
	if err != nil {
		t.Fatal(err)
	}
	if err := est.Observe([]float64{1, 0}, 2); err != nil {
		t.Fatal(err)
	}
	w0 := make([]float64, 2)
	if err := est.Task(w0); err != nil {
		t.Fatal(err)
	}
	for _, s := range []struct {
		phi []float64
		r   float64
	}{
		{[]float64{1e200, -1e200}, 0},
		{[]float64{1e200, 1e200}, 1},
		{[]float64{1, 0}, 1e300},
		{[]float64{math.Inf(1), math.Inf(-1)}, 0},
	} {
		if err := est.Observe(s.phi, s.r); !errors.Is(err, ErrNonFinite) {
			t.Errorf("Observe(%v, %v): error %v, want ErrNonFinite", s.phi, s.r, err)
		}
	}
	w := make([]float64, 2)
	if err := est.Task(w); err != nil {
		t.Fatal(err)
	}
	if w[0] != w0[0] || w[1] != w0[1] || est.Fit().Samples != 1 {
		t.Errorf("after refused samples w = %v (was %v), %d samples", w, w0, est.Fit().Samples)
	}
}

// TestFeatureSizes checks the bounds of the feature constructors: sizes
// whose product overflows are an error, not a panic in the slicing.
func TestFeatureSizes(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for _, n := range []int{math.MaxInt, 1 << 40, MaxValues + 1} {
		if _, err := NewRandom(n, n, false, rng); !errors.Is(err, ErrDimension) {
			t.Errorf("NewRandom(%d, %d): error %v, want ErrDimension", n, n, err)
		}
		if _, err := NewLabels([]int{0}, n, true); !errors.Is(err, ErrDimension) {
			t.Errorf("NewLabels with %d labels: error %v, want ErrDimension", n, err)
		}
		if _, err := NewTaskEstimator(n, 1, nil); !errors.Is(err, ErrDimension) {
			t.Errorf("NewTaskEstimator(%d): error %v, want ErrDimension", n, err)
		}
	}
	if _, err := NewRandom(3, 2, true, nil); !errors.Is(err, ErrConfig) {
		t.Errorf("NewRandom with a nil rng: error %v, want ErrConfig", err)
	}
}
