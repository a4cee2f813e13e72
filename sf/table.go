package sf

import (
	"fmt"

	"github.com/successor-go/successor/internal/vec"
)

// Table holds successor features psi(s, a) in R^D for every state-action
// pair in one flat slice: the row of (s, a) is Data[(s*A+a)*D : (s*A+a+1)*D].
// A Table is a GPI source: Shape and Psi give psi(s, .) action-major, and
// State gives the same values in place.
type Table struct {
	S, A, D int
	Data    []float64
}

// MaxValues bounds the number of values of a Table (S*A*D) and of a
// Linear (A*D*M): 2^32 float64s, 32 GiB. NewTable and NewLinear refuse
// larger sizes, and sizes whose product overflows, with an error rather
// than a failed allocation.
const MaxValues = 1 << 32

// checkSizes returns an error wrapping ErrDimension unless every size is
// positive and their product is at most MaxValues.
func checkSizes(what string, sizes ...int) error {
	p := uint64(1)
	for _, n := range sizes {
		if n <= 0 {
			return fmt.Errorf("sf: %s: sizes %v must be positive: %w", what, sizes, ErrDimension)
		}
		if uint64(n) > MaxValues/p {
			return fmt.Errorf("sf: %s: sizes %v hold more than %d values: %w", what, sizes, uint64(MaxValues), ErrDimension)
		}
		p *= uint64(n)
	}
	return nil
}

// checkTable returns an error wrapping ErrDimension unless t's sizes are
// valid (as NewTable checks them) and match len(t.Data).
func checkTable(what string, t *Table) error {
	if err := checkSizes(what, t.S, t.A, t.D); err != nil {
		return err
	}
	if len(t.Data) != t.S*t.A*t.D {
		return fmt.Errorf("sf: %s: table data has length %d, want %d: %w", what, len(t.Data), t.S*t.A*t.D, ErrDimension)
	}
	return nil
}

// NewTable returns a zeroed table for s states, a actions and d features.
// It returns an error wrapping ErrDimension if a size is not positive or
// the table would hold more than MaxValues values.
func NewTable(s, a, d int) (*Table, error) {
	if err := checkSizes("new table", s, a, d); err != nil {
		return nil, err
	}
	return &Table{S: s, A: a, D: d, Data: make([]float64, s*a*d)}, nil
}

// Clone returns a deep copy of t.
func (t *Table) Clone() *Table {
	c := *t
	c.Data = append([]float64(nil), t.Data...)
	return &c
}

// Row returns a view of psi(s, a). Writes through it change the table.
// It panics if (s, a) is out of range.
func (t *Table) Row(s, a int) []float64 {
	t.check(s, a)
	i := (s*t.A + a) * t.D
	return t.Data[i : i+t.D : i+t.D]
}

// State returns a view of psi(s, .) for all actions: A rows of D values,
// action-major, laid out as Psi writes them. It panics if s is out of range.
func (t *Table) State(s int) []float64 {
	if uint(s) >= uint(t.S) {
		panic(fmt.Sprintf("sf: table: state %d out of range [0, %d)", s, t.S))
	}
	i := s * t.A * t.D
	return t.Data[i : i+t.A*t.D : i+t.A*t.D]
}

// Shape returns the number of actions and the feature dimension.
func (t *Table) Shape() (actions, dim int) { return t.A, t.D }

// Psi copies psi(s, a) for every action into dst, action-major:
// dst[a*D + k] is feature k of action a. It panics if len(dst) != A*D or s is
// out of range. It does not allocate.
func (t *Table) Psi(dst []float64, s int) {
	if len(dst) != t.A*t.D {
		panic(fmt.Sprintf("sf: table: psi slice has length %d, want %d", len(dst), t.A*t.D))
	}
	copy(dst, t.State(s))
}

// Q returns psi(s, a) . w, the action value of (s, a) for the task w. It
// panics if len(w) != D or (s, a) is out of range.
func (t *Table) Q(s, a int, w []float64) float64 {
	t.checkTask(w)
	return vec.Dot(t.Row(s, a), w)
}

// Greedy returns the action maximising psi(s, a) . w and its value; ties go
// to the lowest action. It panics if len(w) != D or s is out of range.
func (t *Table) Greedy(s int, w []float64) (action int, q float64) {
	t.checkTask(w)
	return greedy(t.State(s), w, t.A, t.D)
}

// QTable writes Q(s, a) = psi(s, a) . w into dst[s*A + a] for every pair.
// It panics if len(dst) != S*A or len(w) != D.
func (t *Table) QTable(dst []float64, w []float64) {
	t.checkTask(w)
	if len(dst) != t.S*t.A {
		panic(fmt.Sprintf("sf: table: q slice has length %d, want %d", len(dst), t.S*t.A))
	}
	d := t.D
	for i := range dst {
		dst[i] = vec.Dot(t.Data[i*d:(i+1)*d], w)
	}
}

func (t *Table) check(s, a int) {
	if uint(s) >= uint(t.S) || uint(a) >= uint(t.A) {
		panic(fmt.Sprintf("sf: table: pair (%d, %d) out of range (%d states, %d actions)", s, a, t.S, t.A))
	}
}

func (t *Table) checkTask(w []float64) {
	if len(w) != t.D {
		panic(fmt.Sprintf("sf: table: task vector has length %d, want %d", len(w), t.D))
	}
}

// greedy returns argmax_a psi[a*d:(a+1)*d] . w over na actions, ties to the
// lowest action.
func greedy(psi, w []float64, na, d int) (int, float64) {
	best, bq := 0, vec.Dot(psi[:d], w)
	for a := 1; a < na; a++ {
		if q := vec.Dot(psi[a*d:(a+1)*d], w); q > bq {
			best, bq = a, q
		}
	}
	return best, bq
}
