package gpi

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/sf"
)

func TestActStackMatchesAct(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 1))
	for _, c := range []struct{ k, actions, dim int }{
		{1, 1, 1}, {2, 3, 5}, {10, 4, 64}, {7, 5, 6},
	} {
		const states = 5
		src := make([]Source, c.k)
		for i := range src {
			src[i] = randomTable(rng, states, c.actions, c.dim)
		}
		st, err := NewStack(states, src...)
		if err != nil {
			t.Fatal(err)
		}
		views := make([]Source, c.k)
		for i := range views {
			views[i] = st.Source(i)
		}
		w := make([]float64, c.dim)
		for i := range w {
			w[i] = rng.NormFloat64()
		}
		var sel Selector
		for s := 0; s < states; s++ {
			a, i, v := sel.Act(w, s, src...)
			if a2, i2, v2 := sel.ActStack(w, s, st); a2 != a || i2 != i || math.Abs(v2-v) > 1e-12 {
				t.Errorf("k=%d s=%d: ActStack (%d, %d, %v), Act (%d, %d, %v)", c.k, s, a2, i2, v2, a, i, v)
			}
			if a2, i2, v2 := sel.Act(w, s, views...); a2 != a || i2 != i || v2 != v {
				t.Errorf("k=%d s=%d: Act over stack views (%d, %d, %v), over tables (%d, %d, %v)", c.k, s, a2, i2, v2, a, i, v)
			}
		}
	}
	// Ties, derived by hand as in TestActTies: source 1 action 1.
	st, err := NewStack(1,
		&table{a: 3, d: 2, data: []float64{1, 9, 0, 9, 1, 9}},
		&table{a: 3, d: 2, data: []float64{0, 0, 2, 0, 2, 0}},
		&table{a: 3, d: 2, data: []float64{2, 5, 2, 5, 2, 5}})
	if err != nil {
		t.Fatal(err)
	}
	var sel Selector
	if a, i, v := sel.ActStack([]float64{1, 0}, 0, st); a != 1 || i != 1 || v != 2 {
		t.Errorf("ties: got (%d, %d, %v), want (1, 1, 2)", a, i, v)
	}
	w := []float64{1, 0}
	n := testing.AllocsPerRun(100, func() { sel.ActStack(w, 0, st) })
	if n != 0 {
		t.Errorf("ActStack: %v allocations, want 0", n)
	}
}

func TestNewStackErrors(t *testing.T) {
	good := &table{a: 2, d: 1, data: []float64{1, 2, 3, 4}}
	nan := &table{a: 2, d: 1, data: []float64{1, math.NaN(), 3, 4}}
	wide := &table{a: 2, d: 2, data: make([]float64, 8)}
	small, _ := sf.NewTable(1, 2, 1)
	for _, c := range []struct {
		name   string
		states int
		src    []Source
		want   error
	}{
		{"no sources", 2, nil, ErrNoSources},
		{"states", 0, []Source{good}, ErrDimension},
		{"shape", 2, []Source{good, wide}, ErrDimension},
		{"table too small", 2, []Source{good, small}, ErrDimension},
		{"NaN", 2, []Source{good, nan}, ErrNonFinite},
	} {
		if _, err := NewStack(c.states, c.src...); !errors.Is(err, c.want) {
			t.Errorf("%s: error %v, want %v", c.name, err, c.want)
		}
	}
}
