package sf

import (
	"errors"
	"testing"
)

// TestTable checks views, Q, Greedy (ties to the lowest action) and QTable
// on a small table whose values are derived by hand.
func TestTable(t *testing.T) {
	if _, err := NewTable(0, 1, 1); !errors.Is(err, ErrDimension) {
		t.Errorf("NewTable(0,1,1): err = %v, want ErrDimension", err)
	}
	tb, err := NewTable(2, 3, 2)
	if err != nil {
		t.Fatal(err)
	}
	// psi(s, a) = (s + a, a), written through Row.
	for s := 0; s < 2; s++ {
		for a := 0; a < 3; a++ {
			r := tb.Row(s, a)
			r[0], r[1] = float64(s+a), float64(a)
		}
	}
	w := []float64{1, -1} // Q(s, a) = s: all actions tie
	if a, q := tb.Greedy(1, w); a != 0 || q != 1 {
		t.Errorf("Greedy tie = (%d, %v), want (0, 1)", a, q)
	}
	w = []float64{0.5, 1} // Q(s, a) = 0.5 s + 1.5 a
	if a, q := tb.Greedy(0, w); a != 2 || q != 3 {
		t.Errorf("Greedy = (%d, %v), want (2, 3)", a, q)
	}
	if q := tb.Q(1, 1, w); q != 2 {
		t.Errorf("Q(1,1) = %v, want 2", q)
	}
	qt := make([]float64, 6)
	tb.QTable(qt, w)
	want := []float64{0, 1.5, 3, 0.5, 2, 3.5}
	for i := range qt {
		if qt[i] != want[i] {
			t.Fatalf("QTable = %v, want %v", qt, want)
		}
	}
	if a, d := tb.Shape(); a != 3 || d != 2 {
		t.Errorf("Shape = (%d, %d), want (3, 2)", a, d)
	}
	psi := make([]float64, 6)
	tb.Psi(psi, 1)
	wantPsi := []float64{1, 0, 2, 1, 3, 2}
	st := tb.State(1)
	for i := range psi {
		if psi[i] != wantPsi[i] || st[i] != wantPsi[i] {
			t.Fatalf("Psi = %v, State = %v, want %v", psi, st, wantPsi)
		}
	}
	if n := testing.AllocsPerRun(100, func() { tb.Psi(psi, 0) }); n != 0 {
		t.Errorf("Psi allocates %v times", n)
	}
	c := tb.Clone()
	c.Data[0] = 99
	if tb.Data[0] == 99 {
		t.Error("Clone shares data")
	}
	func() {
		defer func() {
			if recover() == nil {
				t.Error("Psi with wrong length: no panic")
			}
		}()
		tb.Psi(make([]float64, 5), 0)
	}()
}

// source is the GPI source contract (defined by package gpi, which imports
// sf): both the table and the linear adapter must satisfy it.
type source interface {
	Shape() (actions, dim int)
	Psi(dst []float64, s int)
}

var (
	_ source = (*Table)(nil)
	_ source = (*LinearSource)(nil)
)
