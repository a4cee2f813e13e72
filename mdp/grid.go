package mdp

import (
	"fmt"
	"math"
	"slices"
	"strings"
	"unicode/utf8"

	"github.com/successor-go/successor/linalg"
)

// Grid actions. The four moves come first in clockwise order starting at
// up; Stay exists only when GridConfig.Stay is set.
const (
	Up    = 0 // row - 1
	Right = 1 // col + 1
	Down  = 2 // row + 1
	Left  = 3 // col - 1
	Stay  = 4 // stay put (GridConfig.Stay only)
)

var gridDirs = [4][2]int{{-1, 0}, {0, 1}, {1, 0}, {0, -1}}

// Reserved layout characters.
const (
	CellWall     = '#' // a wall: not a state
	CellFree     = '.' // a free cell
	CellStart    = 'S' // a free cell in the start set
	CellTerminal = 'T' // a free terminal cell
)

// GridConfig configures ParseGrid. A nil *GridConfig means the zero
// value: no labels, four moves, no slip.
type GridConfig struct {
	// Labels maps a one-character code used in the layout to a label
	// name. Several codes may share a name. Codes must not be one of the
	// reserved characters '#', '.', 'S', 'T' or white space.
	Labels map[rune]string
	// Terminal lists label names whose cells are terminal (in addition to
	// 'T' cells).
	Terminal []string
	// Stay adds a fifth action, Stay, that keeps the agent in place.
	Stay bool
	// Slip is the probability, in [0, 1], that a move (not Stay) is
	// replaced by one of the four moves drawn uniformly (possibly the
	// intended one). 0 means deterministic moves.
	Slip float64
}

// Grid is a grid world parsed from a text layout: an MDP whose states are
// the free cells in reading order (row by row, left to right), with their
// coordinates and labels.
type Grid struct {
	// MDP is the grid's finite MDP. Actions are Up, Right, Down, Left
	// (and Stay if GridConfig.Stay was set).
	MDP *Finite
	// Rows and Cols are the layout's size in cells.
	Rows, Cols int

	cell  []int    // state -> row*Cols + col
	state []int    // row*Cols + col -> state, -1 for a wall
	label []int    // state -> label index, -1 for none
	names []string // label names, sorted
	code  []rune   // state -> layout character
}

// LayoutError reports a malformed layout at a line and column (both
// 1-based, counting runes in the original text). It wraps ErrConfig.
type LayoutError struct {
	Line, Col int
	Msg       string
}

// Error returns the message, naming the line and, when known, the column.
func (e *LayoutError) Error() string {
	if e.Col > 0 {
		return fmt.Sprintf("mdp: grid: line %d, column %d: %s", e.Line, e.Col, e.Msg)
	}
	return fmt.Sprintf("mdp: grid: line %d: %s", e.Line, e.Msg)
}

// Unwrap returns ErrConfig.
func (e *LayoutError) Unwrap() error { return ErrConfig }

// ParseGrid returns the grid world described by layout: one line of text
// per row, one character per cell: '#' a wall, '.' a free cell, 'S' a start
// cell, 'T' a terminal cell, or a label code from opts.Labels (a free cell
// carrying that label). Blank lines before and after the layout and spaces
// and tabs around each line are ignored, so a layout can be an indented
// raw string; every row must then have the same number of cells.
//
// Moves into a wall or off the layout leave the agent in place (walls
// reflect). Terminal cells absorb with zero future. The start distribution
// is uniform over the 'S' cells, or, if there are none, over all
// non-terminal free cells. The grid has no reward: rewards are given to
// the oracles separately (see PlaceReward).
//
// Errors are *LayoutError (wrapping ErrConfig) naming the line and column
// of a bad character or ragged row, or wrap ErrConfig for bad options
// (a reserved label code, an empty name, an unknown terminal label, Slip
// outside [0, 1]) and layouts without free or non-terminal cells.
func ParseGrid(layout string, opts *GridConfig) (*Grid, error) {
	var o GridConfig
	if opts != nil {
		o = *opts
	}
	if !(o.Slip >= 0 && o.Slip <= 1) {
		return nil, fmt.Errorf("mdp: grid: slip %v outside [0, 1]: %w", o.Slip, ErrConfig)
	}
	nameSet := map[string]bool{}
	for c, name := range o.Labels {
		switch {
		case c == CellWall || c == CellFree || c == CellStart || c == CellTerminal:
			return nil, fmt.Errorf("mdp: grid: label code %q is reserved: %w", c, ErrConfig)
		case c == ' ' || c == '\t' || c == '\n' || c == '\r' || c == utf8.RuneError:
			return nil, fmt.Errorf("mdp: grid: label code %q is not a visible character: %w", c, ErrConfig)
		case name == "":
			return nil, fmt.Errorf("mdp: grid: label code %q has an empty name: %w", c, ErrConfig)
		}
		nameSet[name] = true
	}
	names := make([]string, 0, len(nameSet))
	for name := range nameSet {
		names = append(names, name)
	}
	slices.Sort(names)
	termName := map[string]bool{}
	for _, name := range o.Terminal {
		if !nameSet[name] {
			return nil, fmt.Errorf("mdp: grid: terminal label %q is not a label: %w", name, ErrConfig)
		}
		termName[name] = true
	}

	// Split into rows, remembering line numbers and column offsets.
	lines := strings.Split(layout, "\n")
	type row struct {
		line, off int // 1-based line, runes trimmed on the left
		text      string
	}
	var rows []row
	for i, l := range lines {
		l = strings.TrimSuffix(l, "\r")
		t := strings.TrimLeft(l, " \t")
		off := utf8.RuneCountInString(l[:len(l)-len(t)])
		t = strings.TrimRight(t, " \t")
		rows = append(rows, row{line: i + 1, off: off, text: t})
	}
	for len(rows) > 0 && rows[0].text == "" {
		rows = rows[1:]
	}
	for len(rows) > 0 && rows[len(rows)-1].text == "" {
		rows = rows[:len(rows)-1]
	}
	if len(rows) == 0 {
		return nil, fmt.Errorf("mdp: grid: empty layout: %w", ErrConfig)
	}
	nr := len(rows)
	nc := utf8.RuneCountInString(rows[0].text)
	if nr > MaxRows/nc {
		return nil, fmt.Errorf("mdp: grid: layout too large: %w", ErrConfig)
	}
	g := &Grid{Rows: nr, Cols: nc, names: names, state: make([]int, nr*nc)}
	var term []bool
	var isStart []bool
	for r, rw := range rows {
		if w := utf8.RuneCountInString(rw.text); w != nc {
			return nil, &LayoutError{Line: rw.line, Msg: fmt.Sprintf("%d cells, want %d as on line %d", w, nc, rows[0].line)}
		}
		c := 0
		for _, ch := range rw.text {
			pos := r*nc + c
			col := rw.off + c + 1
			c++
			if ch == CellWall {
				g.state[pos] = -1
				continue
			}
			lab := -1
			t, st := false, false
			switch ch {
			case CellFree:
			case CellStart:
				st = true
			case CellTerminal:
				t = true
			default:
				name, ok := o.Labels[ch]
				if !ok {
					return nil, &LayoutError{Line: rw.line, Col: col, Msg: fmt.Sprintf("unknown cell %q", ch)}
				}
				lab, _ = slices.BinarySearch(names, name)
				t = termName[name]
			}
			g.state[pos] = len(g.cell)
			g.cell = append(g.cell, pos)
			g.label = append(g.label, lab)
			g.code = append(g.code, ch)
			term = append(term, t)
			isStart = append(isStart, st)
		}
	}
	n := len(g.cell)
	if n == 0 {
		return nil, fmt.Errorf("mdp: grid: no free cells: %w", ErrConfig)
	}
	start := make([]float64, n)
	var ns int
	for s := range isStart {
		if isStart[s] {
			ns++
		}
	}
	if ns == 0 {
		for s := range term {
			if !term[s] {
				ns++
				isStart[s] = true
			}
		}
		if ns == 0 {
			return nil, fmt.Errorf("mdp: grid: every free cell is terminal: %w", ErrConfig)
		}
	}
	for s := range isStart {
		if isStart[s] {
			start[s] = 1 / float64(ns)
		}
	}
	na := 4
	if o.Stay {
		na = 5
	}
	p := g.transitions(na, o.Slip, term)
	m, err := newFromCSR(n, na, p, term, start)
	if err != nil {
		return nil, fmt.Errorf("mdp: grid: %w", err)
	}
	g.MDP = m
	return g, nil
}

// transitions builds the grid's CSR transition matrix.
func (g *Grid) transitions(na int, slip float64, term []bool) *linalg.CSR {
	n := len(g.cell)
	ptr := make([]int, n*na+1)
	per := 1 // entries per row: 1 without slip, up to 4 with it
	if slip > 0 {
		per = 4
	}
	ind := make([]int, 0, n*na*per)
	val := make([]float64, 0, n*na*per)
	var nb [4]int
	var buf [5]struct {
		j int
		p float64
	}
	for s := 0; s < n; s++ {
		r, c := g.Cell(s)
		for d, dir := range gridDirs {
			nb[d] = s
			if t, ok := g.StateAt(r+dir[0], c+dir[1]); ok {
				nb[d] = t
			}
		}
		for a := 0; a < na; a++ {
			k := 0
			add := func(j int, p float64) {
				if p == 0 {
					return
				}
				for i := 0; i < k; i++ {
					if buf[i].j == j {
						buf[i].p += p
						return
					}
				}
				buf[k].j, buf[k].p = j, p
				k++
			}
			switch {
			case term[s] || a == Stay:
				add(s, 1)
			default:
				add(nb[a], 1-slip)
				for d := range nb {
					add(nb[d], slip/4)
				}
			}
			// Insertion sort by next state (at most 5 entries).
			for i := 1; i < k; i++ {
				for j := i; j > 0 && buf[j].j < buf[j-1].j; j-- {
					buf[j], buf[j-1] = buf[j-1], buf[j]
				}
			}
			for i := 0; i < k; i++ {
				ind = append(ind, buf[i].j)
				val = append(val, buf[i].p)
			}
			ptr[s*na+a+1] = len(ind)
		}
	}
	p, err := linalg.NewCSR(n*na, n, ptr, ind, val)
	if err != nil {
		panic("mdp: grid: internal error: " + err.Error())
	}
	return p
}

// NumStates returns the number of free cells (states).
func (g *Grid) NumStates() int { return len(g.cell) }

// Cell returns the row and column (0-based) of state s. It panics if s is
// out of range.
func (g *Grid) Cell(s int) (row, col int) {
	pos := g.cell[s]
	return pos / g.Cols, pos % g.Cols
}

// StateAt returns the state at (row, col), or false for a wall or a
// position outside the layout.
func (g *Grid) StateAt(row, col int) (int, bool) {
	if row < 0 || row >= g.Rows || col < 0 || col >= g.Cols {
		return 0, false
	}
	s := g.state[row*g.Cols+col]
	return s, s >= 0
}

// LabelOf returns the index into LabelNames of the label of state s, or -1
// for an unlabelled cell. It panics if s is out of range.
func (g *Grid) LabelOf(s int) int { return g.label[s] }

// Label returns the label name of state s, or "" for an unlabelled cell.
func (g *Grid) Label(s int) string {
	if l := g.label[s]; l >= 0 {
		return g.names[l]
	}
	return ""
}

// LabelNames returns the label names in index order (sorted by name). The
// slice is a copy.
func (g *Grid) LabelNames() []string { return slices.Clone(g.names) }

// LabelIndex returns the index of a label name, or false if the grid has no
// such label.
func (g *Grid) LabelIndex(name string) (int, bool) { return slices.BinarySearch(g.names, name) }

// Code returns the layout character of state s ('.', 'S', 'T' or a label
// code).
func (g *Grid) Code(s int) rune { return g.code[s] }

// StatesWithLabel returns the states carrying label index l, in order.
func (g *Grid) StatesWithLabel(l int) []int {
	var out []int
	for s, x := range g.label {
		if x == l {
			out = append(out, s)
		}
	}
	return out
}

// PlaceReward returns the reward r(s, a, s') = w[LabelOf(s')] for a
// labelled s' and 0 otherwise: arriving in (or staying in) a labelled cell
// pays its weight. It returns an error wrapping ErrDimension if
// len(w) differs from the number of labels, or ErrNonFinite.
func (g *Grid) PlaceReward(w []float64) (Reward, error) {
	if len(w) != len(g.names) {
		return nil, fmt.Errorf("mdp: grid: %d weights for %d labels: %w", len(w), len(g.names), ErrDimension)
	}
	for i, v := range w {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("mdp: grid: weight of %q: %w", g.names[i], ErrNonFinite)
		}
	}
	w = slices.Clone(w)
	label := g.label
	return func(s, a, next int) float64 {
		if l := label[next]; l >= 0 {
			return w[l]
		}
		return 0
	}, nil
}

// Weights returns the weight vector over LabelNames with the given
// entries by name (others 0). It returns an error wrapping ErrConfig for
// an unknown name.
func (g *Grid) Weights(byName map[string]float64) ([]float64, error) {
	w := make([]float64, len(g.names))
	for name, v := range byName {
		i, ok := g.LabelIndex(name)
		if !ok {
			return nil, fmt.Errorf("mdp: grid: unknown label %q: %w", name, ErrConfig)
		}
		w[i] = v
	}
	return w, nil
}

// Format renders per-state values on the layout, one row per line, each
// cell printed with the fmt verb (e.g. "%6.2f"); walls are printed as
// blanks of the same width made of '#'. It panics if len(v) differs from
// the number of states.
func (g *Grid) Format(v []float64, verb string) string {
	if len(v) != len(g.cell) {
		panic("mdp: grid: format: wrong length")
	}
	width := len(fmt.Sprintf(verb, 0.0))
	var b strings.Builder
	for r := 0; r < g.Rows; r++ {
		for c := 0; c < g.Cols; c++ {
			if c > 0 {
				b.WriteByte(' ')
			}
			if s, ok := g.StateAt(r, c); ok {
				fmt.Fprintf(&b, verb, v[s])
			} else {
				b.WriteString(strings.Repeat("#", width))
			}
		}
		b.WriteByte('\n')
	}
	return b.String()
}
