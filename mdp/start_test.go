package mdp

import (
	"errors"
	"math"
	"slices"
	"testing"

	"github.com/successor-go/successor/linalg"
)

// TestWithStart checks that WithStart keeps the dynamics and the terminal
// flags, replaces the start distribution and leaves the input alone, on a
// 4-state chain with a slip and a terminal state; that UniformStart is
// uniform over the non-terminal states; and that the values of a policy
// do not change (V^pi does not depend on the start distribution; derived
// by hand from the Bellman equation V = r_pi + gamma P_pi V, in which the
// start distribution does not appear).
func TestWithStart(t *testing.T) {
	tr := []ProbEntry{
		{0, 0, 1, 0.9}, {0, 0, 0, 0.1}, {0, 1, 0, 1},
		{1, 0, 2, 0.9}, {1, 0, 1, 0.1}, {1, 1, 0, 1},
		{2, 0, 3, 0.9}, {2, 0, 2, 0.1}, {2, 1, 1, 1},
	}
	term := []bool{false, false, false, true}
	m, err := New(4, 2, tr, term, []float64{1, 0, 0, 0})
	if err != nil {
		t.Fatal(err)
	}
	st := UniformStart(m)
	if want := []float64{1.0 / 3, 1.0 / 3, 1.0 / 3, 0}; !slices.Equal(st, want) {
		t.Fatalf("UniformStart = %v, want %v", st, want)
	}
	c, err := WithStart(m, st)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(c.Start(), st) || !slices.Equal(m.Start(), []float64{1, 0, 0, 0}) {
		t.Errorf("start %v (input's %v)", c.Start(), m.Start())
	}
	for s := range 4 {
		if c.Terminal(s) != term[s] {
			t.Errorf("state %d: terminal %v", s, c.Terminal(s))
		}
		for a := range 2 {
			n1, p1 := m.Next(s, a)
			n2, p2 := c.Next(s, a)
			if !slices.Equal(n1, n2) || !slices.Equal(p1, p2) {
				t.Errorf("P(.|%d,%d): %v %v, want %v %v", s, a, n2, p2, n1, p1)
			}
		}
	}
	r := func(s, a, next int) float64 {
		if next == 3 {
			return 1
		}
		return 0
	}
	v1, err := Evaluate(m, Uniform{N: 2}, r, 0.9)
	if err != nil {
		t.Fatal(err)
	}
	v2, err := Evaluate(c, Uniform{N: 2}, r, 0.9)
	if err != nil {
		t.Fatal(err)
	}
	for s := range v1.V {
		if math.Abs(v1.V[s]-v2.V[s]) > 1e-12 {
			t.Errorf("V(%d) = %v with the new start, %v before", s, v2.V[s], v1.V[s])
		}
	}

	for _, tc := range []struct {
		start []float64
		want  error
	}{
		{[]float64{1, 0}, linalg.ErrDimension},
		{[]float64{0, 0, 0, 0}, ErrConfig},
		{[]float64{0.5, 0.6, -0.1, 0}, linalg.ErrNotStochastic},
		{[]float64{math.NaN(), 0, 0, 1}, linalg.ErrNonFinite},
	} {
		if _, err := WithStart(m, tc.start); !errors.Is(err, tc.want) {
			t.Errorf("start %v: error %v, want %v", tc.start, err, tc.want)
		}
	}
	all, err := New(1, 1, nil, []bool{true}, []float64{1})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := WithStart(all, UniformStart(all)); !errors.Is(err, ErrConfig) {
		t.Errorf("all terminal: error %v, want ErrConfig", err)
	}
}
