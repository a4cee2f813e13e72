package gpi

import "math/rand/v2"

// table is a minimal in-memory Source for tests: psi(s, a) stored flat,
// action-major within a state. It is a Viewer.
type table struct {
	a, d int
	data []float64
}

func (t *table) Shape() (int, int) { return t.a, t.d }
func (t *table) Psi(dst []float64, s int) {
	n := t.a * t.d
	if len(dst) != n {
		panic("table: wrong length")
	}
	copy(dst, t.data[s*n:(s+1)*n])
}
func (t *table) State(s int) []float64 {
	n := t.a * t.d
	return t.data[s*n : (s+1)*n : (s+1)*n]
}

// copyOnly hides the State method so the selector takes the copying path.
type copyOnly struct{ t Source }

func (c copyOnly) Shape() (int, int)        { return c.t.Shape() }
func (c copyOnly) Psi(dst []float64, s int) { c.t.Psi(dst, s) }

func randomTable(rng *rand.Rand, states, actions, dim int) *table {
	t := &table{a: actions, d: dim, data: make([]float64, states*actions*dim)}
	for i := range t.data {
		t.data[i] = rng.NormFloat64()
	}
	return t
}
