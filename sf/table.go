package sf

import "fmt"

// Table holds successor features psi(s, a) in R^D for every state-action
// pair in one flat slice: the row of (s, a) is Data[(s*A+a)*D : (s*A+a+1)*D].
type Table struct {
	S, A, D int
	Data    []float64
}

// NewTable returns a zeroed table for s states, a actions and d features.
func NewTable(s, a, d int) (*Table, error) {
	if s <= 0 || a <= 0 || d <= 0 {
		return nil, fmt.Errorf("sf: new table: sizes %d, %d, %d must be positive", s, a, d)
	}
	return &Table{S: s, A: a, D: d, Data: make([]float64, s*a*d)}, nil
}

// Row returns a view of psi(s, a). Writes through it change the table.
func (t *Table) Row(s, a int) []float64 {
	i := (s*t.A + a) * t.D
	return t.Data[i : i+t.D : i+t.D]
}

// State returns a view of psi(s, .) for all actions: A rows of D values.
func (t *Table) State(s int) []float64 {
	i := s * t.A * t.D
	return t.Data[i : i+t.A*t.D : i+t.A*t.D]
}
