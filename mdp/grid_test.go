package mdp

import (
	"errors"
	"math"
	"strings"
	"testing"
	"unicode/utf8"

	"github.com/successor-go/successor/internal/testtol"
	"github.com/successor-go/successor/linalg"
)

func TestParseGridBasic(t *testing.T) {
	layout := `
		#####
		#S.D#
		#.#T#
		#####
	`
	g, err := ParseGrid(layout, &GridConfig{Labels: map[rune]string{'D': "dock"}})
	if err != nil {
		t.Fatal(err)
	}
	if g.Rows != 4 || g.Cols != 5 || g.NumStates() != 5 {
		t.Fatalf("size %dx%d with %d states", g.Rows, g.Cols, g.NumStates())
	}
	m := g.MDP
	if m.NumActions() != 4 {
		t.Errorf("%d actions", m.NumActions())
	}
	// Reading order: (1,1) S, (1,2), (1,3) D, (2,1), (2,3) T.
	wantCells := [][2]int{{1, 1}, {1, 2}, {1, 3}, {2, 1}, {2, 3}}
	for s, w := range wantCells {
		r, c := g.Cell(s)
		if r != w[0] || c != w[1] {
			t.Errorf("Cell(%d) = (%d,%d), want %v", s, r, c, w)
		}
		if got, ok := g.StateAt(r, c); !ok || got != s {
			t.Errorf("StateAt(%d,%d) = %d, %v", r, c, got, ok)
		}
	}
	if _, ok := g.StateAt(0, 0); ok {
		t.Error("wall is a state")
	}
	if _, ok := g.StateAt(-1, 2); ok {
		t.Error("outside is a state")
	}
	if g.Label(2) != "dock" || g.LabelOf(2) != 0 || g.LabelOf(0) != -1 || g.Label(0) != "" {
		t.Error("labels wrong")
	}
	if g.Code(0) != 'S' || g.Code(4) != 'T' {
		t.Error("codes wrong")
	}
	if !m.Terminal(4) || m.Terminal(2) {
		t.Error("terminal flags wrong")
	}
	if st := m.Start(); st[0] != 1 {
		t.Errorf("start %v", st)
	}
	// Moves (derived by hand from the layout): from S = 0, Up hits a wall,
	// Right goes to 1, Down to 3, Left hits a wall.
	for a, want := range []int{0, 1, 3, 0} {
		next, p := m.Next(0, a)
		if len(next) != 1 || next[0] != want || p[0] != 1 {
			t.Errorf("Next(0,%d) = %v %v, want %d", a, next, p, want)
		}
	}
	// From D = 2, Down goes to the terminal T = 4.
	if next, _ := m.Next(2, Down); next[0] != 4 {
		t.Errorf("Next(2, Down) = %v", next)
	}
	if got := g.StatesWithLabel(0); len(got) != 1 || got[0] != 2 {
		t.Errorf("StatesWithLabel = %v", got)
	}
}

// TestParseGridSlip checks the slip rule by hand: with slip p, a move goes
// as intended with probability 1 - p + p/4 and each other direction with
// p/4; reflected moves add up on the cell itself.
func TestParseGridSlip(t *testing.T) {
	g, err := ParseGrid("...\n...\n...", &GridConfig{Slip: 0.2, Stay: true})
	if err != nil {
		t.Fatal(err)
	}
	m := g.MDP
	if m.NumActions() != 5 {
		t.Fatalf("%d actions", m.NumActions())
	}
	if st := m.Start(); math.Abs(st[4]-1.0/9) > 1e-15 {
		t.Errorf("start not uniform: %v", st)
	}
	// Centre state 4, action Up: 0.8 + 0.05 to 1, 0.05 each to 5, 7, 3.
	want := map[int]float64{1: 0.85, 3: 0.05, 5: 0.05, 7: 0.05}
	next, p := m.Next(4, Up)
	for k, j := range next {
		if math.Abs(p[k]-want[j]) > 1e-15 {
			t.Errorf("P(%d | centre, Up) = %v, want %v", j, p[k], want[j])
		}
	}
	// Corner state 0, action Left: reflected intended move (0.85) plus
	// slips Up (0.05, reflected) -> 0.9 stay; Right -> 1, Down -> 3.
	want = map[int]float64{0: 0.9, 1: 0.05, 3: 0.05}
	next, p = m.Next(0, Left)
	if len(next) != 3 {
		t.Fatalf("Next(0, Left) = %v", next)
	}
	for k, j := range next {
		if math.Abs(p[k]-want[j]) > 1e-15 {
			t.Errorf("P(%d | corner, Left) = %v, want %v", j, p[k], want[j])
		}
	}
	if next, p := m.Next(4, Stay); len(next) != 1 || next[0] != 4 || p[0] != 1 {
		t.Errorf("Stay: %v %v", next, p)
	}
}

func TestParseGridErrors(t *testing.T) {
	for _, tc := range []struct {
		name      string
		layout    string
		opts      *GridConfig
		line, col int // for *LayoutError; 0 if not one
	}{
		{"empty", "", nil, 0, 0},
		{"blank", "  \n\t\n", nil, 0, 0},
		{"all walls", "###\n###", nil, 0, 0},
		{"all terminal", "TT", nil, 0, 0},
		{"unknown char", "#.#\n#x#", nil, 2, 2},
		{"unknown char indented", "\n  ...\n  .?.", nil, 3, 4},
		{"unknown after unicode", "é.z", &GridConfig{Labels: map[rune]string{'é': "e"}}, 1, 3},
		{"ragged", "...\n..\n...", nil, 2, 0},
		{"inner blank line", "...\n\n...", nil, 2, 0},
		{"space inside", ". .", nil, 1, 2},
		{"reserved code", "...", &GridConfig{Labels: map[rune]string{'#': "x"}}, 0, 0},
		{"reserved S", "...", &GridConfig{Labels: map[rune]string{'S': "x"}}, 0, 0},
		{"space code", "...", &GridConfig{Labels: map[rune]string{' ': "x"}}, 0, 0},
		{"empty name", "...", &GridConfig{Labels: map[rune]string{'x': ""}}, 0, 0},
		{"unknown terminal label", "...", &GridConfig{Terminal: []string{"dock"}}, 0, 0},
		{"slip", "...", &GridConfig{Slip: 1.5}, 0, 0},
		{"slip NaN", "...", &GridConfig{Slip: math.NaN()}, 0, 0},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := ParseGrid(tc.layout, tc.opts)
			if !errors.Is(err, ErrConfig) {
				t.Fatalf("error %v, want ErrConfig", err)
			}
			var le *LayoutError
			if tc.line > 0 {
				if !errors.As(err, &le) || le.Line != tc.line || le.Col != tc.col {
					t.Fatalf("error %v, want line %d column %d", err, tc.line, tc.col)
				}
				if !strings.Contains(err.Error(), "line") {
					t.Errorf("message %q lacks the line", err)
				}
			}
		})
	}
}

func TestGridTerminalLabelsAndRewards(t *testing.T) {
	g, err := ParseGrid("S..G", &GridConfig{Labels: map[rune]string{'G': "goal"}, Terminal: []string{"goal"}})
	if err != nil {
		t.Fatal(err)
	}
	if !g.MDP.Terminal(3) {
		t.Fatal("goal not terminal")
	}
	w, err := g.Weights(map[string]float64{"goal": 1})
	if err != nil {
		t.Fatal(err)
	}
	r, err := g.PlaceReward(w)
	if err != nil {
		t.Fatal(err)
	}
	res, err := Optimal(g.MDP, r, 0.5)
	if err != nil {
		t.Fatal(err)
	}
	// Derived by hand: reaching the goal from k steps away pays 0.5^(k-1).
	want := []float64{0.25, 0.5, 1, 0}
	if d := maxDiff(res.V, want); d > testtol.Exact {
		t.Errorf("V* = %v, want %v", res.V, want)
	}
	if _, err := g.Weights(map[string]float64{"nope": 1}); !errors.Is(err, ErrConfig) {
		t.Errorf("unknown weight name: %v", err)
	}
	if _, err := g.PlaceReward([]float64{1, 2}); !errors.Is(err, linalg.ErrDimension) {
		t.Errorf("weight length: %v", err)
	}
	if _, err := g.PlaceReward([]float64{math.NaN()}); !errors.Is(err, linalg.ErrNonFinite) {
		t.Errorf("weight NaN: %v", err)
	}
	if s := g.Format(res.V, "%4.2f"); s != "0.25 0.50 1.00 0.00\n" {
		t.Errorf("Format = %q", s)
	}
}

// TestDepot checks the invented demo floor against its documented design.
func TestDepot(t *testing.T) {
	g, err := Depot()
	if err != nil {
		t.Fatal(err)
	}
	if n := g.NumStates(); n < 60 || n > 120 {
		t.Errorf("%d free cells, want 60..120", n)
	}
	wantNames := []string{"bay1", "bay2", "bench", "charger", "dock", "lane"}
	if got := g.LabelNames(); strings.Join(got, ",") != strings.Join(wantNames, ",") {
		t.Errorf("labels %v, want %v", got, wantNames)
	}
	for l := range wantNames {
		if len(g.StatesWithLabel(l)) == 0 {
			t.Errorf("no %s cell", wantNames[l])
		}
	}
	m := g.MDP
	if m.NumActions() != 5 {
		t.Errorf("%d actions, want 5 (with Stay)", m.NumActions())
	}
	var starts int
	for s, p := range m.Start() {
		if p > 0 {
			starts++
			if g.Code(s) != 'S' {
				t.Errorf("start at %q", g.Code(s))
			}
		}
		if m.Terminal(s) {
			t.Errorf("state %d terminal", s)
		}
	}
	if starts != 1 {
		t.Errorf("%d start cells", starts)
	}
	// The documented tasks, at gamma 0.95: the dock job with the lane
	// penalised must avoid lane and charger cells on its way; without the
	// penalty the straight route crosses the lane.
	path := func(w map[string]float64) (steps int, lane int) {
		wv, err := g.Weights(w)
		if err != nil {
			t.Fatal(err)
		}
		r, err := g.PlaceReward(wv)
		if err != nil {
			t.Fatal(err)
		}
		res, err := Optimal(m, r, 0.95)
		if err != nil {
			t.Fatal(err)
		}
		dock, _ := g.LabelIndex("dock")
		s := -1
		for i, p := range m.Start() {
			if p > 0 {
				s = i
			}
		}
		for steps = 0; g.LabelOf(s) != dock && steps < 100; steps++ {
			next, _ := m.Next(s, res.Policy[s])
			s = next[0]
			if l := g.Label(s); l == "lane" || l == "charger" {
				lane++
			}
		}
		return steps, lane
	}
	if steps, lane := path(map[string]float64{"dock": 1}); steps != 12 || lane == 0 {
		t.Errorf("dock job: %d steps, %d lane cells; want the 12-step straight route through the lane", steps, lane)
	}
	if steps, lane := path(map[string]float64{"dock": 1, "lane": -1, "charger": -1}); steps != 16 || lane != 0 {
		t.Errorf("dock job keeping off the lane: %d steps, %d lane cells; want the 16-step top-aisle route", steps, lane)
	}
}

// FuzzParseGrid checks that ParseGrid never panics, that every accepted
// layout gives a valid MDP whose coordinates round-trip, and that errors
// wrap ErrConfig.
func FuzzParseGrid(f *testing.F) {
	f.Add(DepotLayout, 0.0, true)
	f.Add("S.#\n.DT", 0.1, false)
	f.Add("#x#", 0.0, false)
	f.Add("..\n.", 0.5, true)
	f.Add("\r\n  S.\t\r\n  ..\r\n", 1.0, false)
	labels := map[rune]string{'D': "dock", 'C': "charger", 'L': "lane", 'B': "bench", '1': "bay1", '2': "bay2"}
	f.Fuzz(func(t *testing.T, layout string, slip float64, stay bool) {
		if len(layout) > 4096 {
			return
		}
		g, err := ParseGrid(layout, &GridConfig{Labels: labels, Slip: slip, Stay: stay, Terminal: []string{"dock"}})
		if err != nil {
			if !errors.Is(err, ErrConfig) {
				t.Fatalf("error %v does not wrap ErrConfig", err)
			}
			return
		}
		if g.NumStates() == 0 || g.NumStates() > utf8.RuneCountInString(layout) {
			t.Fatalf("%d states from %d runes", g.NumStates(), utf8.RuneCountInString(layout))
		}
		m := g.MDP
		for s := 0; s < g.NumStates(); s++ {
			r, c := g.Cell(s)
			if back, ok := g.StateAt(r, c); !ok || back != s {
				t.Fatalf("state %d at (%d,%d) maps back to %d", s, r, c, back)
			}
			if l := g.LabelOf(s); l >= len(g.LabelNames()) {
				t.Fatalf("label %d", l)
			}
			for a := 0; a < m.NumActions(); a++ {
				next, p := m.Next(s, a)
				var sum float64
				for k, j := range next {
					sum += p[k]
					r2, c2 := g.Cell(j)
					if abs(r2-r)+abs(c2-c) > 1 {
						t.Fatalf("move from (%d,%d) to (%d,%d)", r, c, r2, c2)
					}
				}
				if math.Abs(sum-1) > 1e-12 {
					t.Fatalf("row sums to %v", sum)
				}
			}
		}
	})
}

func abs(x int) int {
	if x < 0 {
		return -x
	}
	return x
}
