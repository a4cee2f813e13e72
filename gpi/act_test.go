package gpi

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/sf"
)

// bruteAct is the definition of GPI written out directly: scan every
// (source, action) pair in order i = 0.., a = 0.. and keep the first
// strict maximum of psi_i(s, a) . w.
func bruteAct(w []float64, s int, tabs []*table) (int, int, float64) {
	best, bi, ba := math.Inf(-1), 0, 0
	for i, t := range tabs {
		for a := 0; a < t.a; a++ {
			var q float64
			for k := 0; k < t.d; k++ {
				q += t.data[(s*t.a+a)*t.d+k] * w[k]
			}
			if q > best {
				best, bi, ba = q, i, a
			}
		}
	}
	return ba, bi, best
}

func TestActMatchesDefinition(t *testing.T) {
	const tol = 1e-12 // summation order differs from the brute-force loop
	rng := rand.New(rand.NewPCG(7, 1))
	for _, c := range []struct{ k, actions, dim int }{
		{1, 1, 1}, {2, 3, 5}, {5, 4, 16}, {10, 4, 64}, {3, 7, 33}, {4, 2, 100},
	} {
		const states = 6
		tabs := make([]*table, c.k)
		view := make([]Source, c.k)
		copied := make([]Source, c.k)
		sft := make([]Source, c.k)
		for i := range tabs {
			tabs[i] = randomTable(rng, states, c.actions, c.dim)
			view[i] = tabs[i]
			copied[i] = copyOnly{tabs[i]}
			sft[i] = &sf.Table{S: states, A: c.actions, D: c.dim, Data: tabs[i].data}
		}
		w := make([]float64, c.dim)
		for i := range w {
			w[i] = rng.NormFloat64()
		}
		var sel Selector
		for s := 0; s < states; s++ {
			wa, wi, wv := bruteAct(w, s, tabs)
			for name, src := range map[string][]Source{"view": view, "copy": copied, "sf.Table": sft} {
				a, i, v := sel.Act(w, s, src...)
				if a != wa || i != wi || math.Abs(v-wv) > tol {
					t.Errorf("k=%d A=%d d=%d s=%d %s: got (%d, %d, %v), want (%d, %d, %v)",
						c.k, c.actions, c.dim, s, name, a, i, v, wa, wi, wv)
				}
			}
			q := sel.Values(nil, w, s, view...)
			for i := range tabs {
				for a := 0; a < c.actions; a++ {
					if q[i*c.actions+a] > wv+tol {
						t.Errorf("values: Q_%d(%d, %d) = %v exceeds the GPI value %v", i, s, a, q[i*c.actions+a], wv)
					}
				}
			}
			if got := q[wi*c.actions+wa]; math.Abs(got-wv) > tol {
				t.Errorf("values: Q at the winner = %v, Act value %v", got, wv)
			}
		}
	}
}

func TestActTies(t *testing.T) {
	// Derived by hand: with w = (1, 0) the value of (s, a) is its first
	// feature. Sources 1 and 2 both reach the maximum 2, at actions 2 and 1
	// of source 1 and action 0 of source 2, so the documented rule (lowest
	// source, then lowest action) picks source 1, action 1.
	src := []Source{
		&table{a: 3, d: 2, data: []float64{1, 9, 0, 9, 1, 9}},
		&table{a: 3, d: 2, data: []float64{0, 0, 2, 0, 2, 0}},
		&table{a: 3, d: 2, data: []float64{2, 5, 2, 5, 2, 5}},
	}
	a, i, v := Act([]float64{1, 0}, 0, src...)
	if a != 1 || i != 1 || v != 2 {
		t.Errorf("got (%d, %d, %v), want (1, 1, 2)", a, i, v)
	}
	// All equal: source 0, action 0.
	same := &table{a: 2, d: 1, data: []float64{3, 3}}
	if a, i, _ := Act([]float64{1}, 0, same, same); a != 0 || i != 0 {
		t.Errorf("all equal: got (%d, %d), want (0, 0)", a, i)
	}
}

func TestActSpecialCases(t *testing.T) {
	nan := &table{a: 2, d: 1, data: []float64{1, math.NaN()}}
	ok := &table{a: 2, d: 1, data: []float64{5, 6}}
	a, i, v := Act([]float64{1}, 0, ok, nan)
	if a != -1 || i != -1 || !math.IsNaN(v) {
		t.Errorf("NaN: got (%d, %d, %v), want (-1, -1, NaN)", a, i, v)
	}
	inf := &table{a: 2, d: 1, data: []float64{math.Inf(-1), math.Inf(-1)}}
	a, i, v = Act([]float64{1}, 0, inf)
	if a != 0 || i != 0 || !math.IsInf(v, -1) {
		t.Errorf("-Inf: got (%d, %d, %v), want (0, 0, -Inf)", a, i, v)
	}
	for name, f := range map[string]func(){
		"no sources":    func() { Act([]float64{1}, 0) },
		"shape":         func() { Act([]float64{1}, 0, ok, &table{a: 3, d: 1, data: make([]float64, 3)}) },
		"w length":      func() { Act([]float64{1, 2}, 0, ok) },
		"values dst":    func() { new(Selector).Values(make([]float64, 3), []float64{1}, 0, ok) },
		"batch lengths": func() { new(Selector).ActStates(make([]int, 1), nil, nil, []float64{1}, []int{0, 0}, ok) },
	} {
		func() {
			defer func() {
				if recover() == nil {
					t.Errorf("%s: no panic", name)
				}
			}()
			f()
		}()
	}
}

func TestActStates(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 3))
	const states = 20
	src := []Source{randomTable(rng, states, 4, 8), randomTable(rng, states, 4, 8), randomTable(rng, states, 4, 8)}
	w := []float64{1, -1, 0.5, 0, 2, 0, -3, 1}
	ss := make([]int, 50)
	for j := range ss {
		ss[j] = rng.IntN(states)
	}
	acts, wins, vals := make([]int, len(ss)), make([]int, len(ss)), make([]float64, len(ss))
	var sel Selector
	sel.ActStates(acts, wins, vals, w, ss, src...)
	for j, s := range ss {
		a, i, v := Act(w, s, src...)
		if acts[j] != a || wins[j] != i || vals[j] != v {
			t.Errorf("state %d: batch (%d, %d, %v), single (%d, %d, %v)", s, acts[j], wins[j], vals[j], a, i, v)
		}
	}
}

func TestSelectorAllocs(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 5))
	for _, dim := range []int{4, 64} {
		src := make([]Source, 10)
		for i := range src {
			tab := randomTable(rng, 3, 4, dim)
			switch i % 3 {
			case 0:
				src[i] = tab
			case 1:
				src[i] = copyOnly{tab}
			case 2:
				src[i] = &sf.Table{S: 3, A: 4, D: dim, Data: tab.data}
			}
		}
		w := make([]float64, dim)
		var sel Selector
		ss := []int{0, 1, 2}
		acts := make([]int, 3)
		q := make([]float64, 40)
		n := testing.AllocsPerRun(100, func() {
			sel.Act(w, 1, src...)
			sel.ActStates(acts, nil, nil, w, ss, src...)
			sel.Values(q, w, 2, src...)
		})
		if n != 0 {
			t.Errorf("d=%d: %v allocations per choice, want 0", dim, n)
		}
	}
}
