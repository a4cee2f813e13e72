package mdp

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/linalg"
)

// TestSamplerFrequencies checks empirical next-state frequencies against
// P(. | s, a) with a 5-sigma binomial tolerance (common practice).
func TestSamplerFrequencies(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 9))
	m, err := RandomFinite(&RandomConfig{States: 6, Actions: 2, Branching: 4}, rng)
	if err != nil {
		t.Fatal(err)
	}
	e := NewSampler(m, 0)
	const draws = 20000
	for s := 0; s < m.NumStates(); s++ {
		for a := 0; a < m.NumActions(); a++ {
			counts := make([]int, m.NumStates())
			for range draws {
				e.state, e.started, e.done = s, true, false
				out := e.Step(a, rng)
				if out.Done() {
					t.Fatal("unexpected end")
				}
				counts[out.Next]++
			}
			next, p := m.Next(s, a)
			seen := 0
			for k, j := range next {
				seen += counts[j]
				sd := math.Sqrt(draws * p[k] * (1 - p[k]))
				if d := math.Abs(float64(counts[j]) - draws*p[k]); d > 5*sd+1 {
					t.Errorf("(%d,%d)->%d: %d draws, want %.0f +- %.0f", s, a, j, counts[j], draws*p[k], sd)
				}
			}
			if seen != draws {
				t.Errorf("(%d,%d): %d draws outside the support", s, a, draws-seen)
			}
		}
	}
}

// TestSamplerEpisodes checks termination and truncation on the random walk
// of Sutton & Barto 2nd ed., Example 6.2: episodes start in C, end only
// at the exits, and a time limit truncates without terminating.
func TestSamplerEpisodes(t *testing.T) {
	m, _ := randomWalk(t)
	rng := rand.New(rand.NewPCG(1, 2))
	e := NewSampler(m, 0)
	if e.NumActions() != 2 || e.MDP() != m {
		t.Fatal("accessors")
	}
	pi := Uniform{2}
	probs := make([]float64, 2)
	var rightExits, episodes int
	for range 4000 {
		s := e.Reset(rng)
		if s != 3 || e.Steps() != 0 || e.Done() {
			t.Fatalf("reset to %d", s)
		}
		for {
			pi.Probs(probs, s)
			out := e.Step(SampleIndex(probs, rng), rng)
			if out.End == TimeLimit {
				t.Fatal("truncated without a time limit")
			}
			if out.Next != e.State() {
				t.Fatal("State disagrees with Step")
			}
			if out.Done() != e.Done() || out.Terminal() != (out.End == Terminal) || out.Bootstraps() == out.Terminal() {
				t.Fatalf("outcome %+v: Done %v, Terminal %v, Bootstraps %v; sampler Done %v", out, out.Done(), out.Terminal(), out.Bootstraps(), e.Done())
			}
			s = out.Next
			if out.End == Terminal {
				if s != 0 && s != 6 {
					t.Fatalf("terminal at %d", s)
				}
				if s == 6 {
					rightExits++
				}
				break
			}
		}
		episodes++
	}
	// From C the right exit is reached with probability 1/2 (Example 6.2:
	// V(C) = 1/2); 5 sigma of a binomial with 4000 draws is 0.04.
	if f := float64(rightExits) / float64(episodes); math.Abs(f-0.5) > 0.04 {
		t.Errorf("right-exit frequency %v, want 0.5", f)
	}
	if !panics(func() { e.Step(0, rng) }) {
		t.Error("Step after the end does not panic")
	}

	lim := NewSampler(m, 1)
	lim.Reset(rng)
	out := lim.Step(1, rng) // C -> D, not terminal
	if out.End != TimeLimit || !out.Done() || !out.Bootstraps() || !lim.Done() {
		t.Errorf("time limit 1: end %v, done %v, bootstraps %v", out.End, out.Done(), out.Bootstraps())
	}
	// Reaching a terminal state on the last allowed step is termination.
	short, err := New(2, 1, []ProbEntry{{0, 0, 1, 1}}, []bool{false, true}, []float64{1, 0})
	if err != nil {
		t.Fatal(err)
	}
	lim = NewSampler(short, 1)
	lim.Reset(rng)
	if out := lim.Step(0, rng); out.End != Terminal || out.Bootstraps() {
		t.Errorf("terminal on the last step: end %v, bootstraps %v", out.End, out.Bootstraps())
	}
	if !panics(func() { NewSampler(short, 0).Step(0, rng) }) {
		t.Error("Step before Reset does not panic")
	}
	if !panics(func() { e.Reset(rng); e.Step(2, rng) }) {
		t.Error("bad action does not panic")
	}
}

func TestSamplerAllocs(t *testing.T) {
	g, err := Depot()
	if err != nil {
		t.Fatal(err)
	}
	e := NewSampler(g.MDP, DepotTimeLimit)
	rng := rand.New(rand.NewPCG(1, 1))
	e.Reset(rng)
	allocs := testing.AllocsPerRun(1000, func() {
		if e.Step(rng.IntN(5), rng).Done() {
			e.Reset(rng)
		}
	})
	if allocs != 0 {
		t.Errorf("%v allocs per step", allocs)
	}
}

func TestPolicies(t *testing.T) {
	q := []float64{
		1, 3, 3, // state 0: tie between 1 and 2 -> 1
		-5, -7, -6, // state 1: action 0
	}
	dst := make([]float64, 3)
	for _, tc := range []struct {
		name string
		pi   Policy
		s    int
		want []float64
	}{
		{"deterministic", Deterministic{2, 0}, 0, []float64{0, 0, 1}},
		{"uniform", Uniform{3}, 1, []float64{1. / 3, 1. / 3, 1. / 3}},
		{"greedy tie lowest", Greedy{Q: q, A: 3}, 0, []float64{0, 1, 0}},
		{"greedy negative", Greedy{Q: q, A: 3}, 1, []float64{1, 0, 0}},
		{"epsilon-greedy", EpsilonGreedy{Q: q, A: 3, Epsilon: 0.3}, 0, []float64{0.1, 0.8, 0.1}},
		{"epsilon 0", EpsilonGreedy{Q: q, A: 3}, 1, []float64{1, 0, 0}},
		// Softmax by hand: exp(0), exp(-2), exp(-1) over their sum at T = 1.
		{"softmax", Softmax{Q: q, A: 3, Temperature: 1}, 1, softmaxHand(0, -2, -1)},
		{"softmax T=2", Softmax{Q: q, A: 3, Temperature: 2}, 0, softmaxHand(-1, 0, 0)},
		{"table", mustTable(t, 2, 3, []float64{0.2, 0.3, 0.5, 1, 0, 0}), 0, []float64{0.2, 0.3, 0.5}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			tc.pi.Probs(dst, tc.s)
			if d := maxDiff(dst, tc.want); d > 1e-15 {
				t.Errorf("Probs = %v, want %v", dst, tc.want)
			}
			if a := testing.AllocsPerRun(100, func() { tc.pi.Probs(dst, tc.s) }); a != 0 {
				t.Errorf("%v allocs", a)
			}
		})
	}
	if (Greedy{Q: q, A: 3}).Action(0) != 1 {
		t.Error("Greedy.Action")
	}
	for name, f := range map[string]func(){
		"uniform length":   func() { Uniform{2}.Probs(dst, 0) },
		"greedy length":    func() { Greedy{Q: q, A: 2}.Probs(dst, 0) },
		"greedy NaN":       func() { Greedy{Q: []float64{0, math.NaN(), 1}, A: 3}.Probs(dst, 0) },
		"epsilon range":    func() { EpsilonGreedy{Q: q, A: 3, Epsilon: 1.5}.Probs(dst, 0) },
		"softmax T=0":      func() { Softmax{Q: q, A: 3}.Probs(dst, 0) },
		"softmax Inf":      func() { Softmax{Q: []float64{math.Inf(1), 0, 0}, A: 3, Temperature: 1}.Probs(dst, 0) },
		"table length":     func() { mustTable(t, 2, 3, []float64{0.2, 0.3, 0.5, 1, 0, 0}).Probs(dst[:2], 0) },
		"sample empty":     func() { SampleIndex([]float64{0, 0}, rand.New(rand.NewPCG(1, 1))) },
		"deterministic ix": func() { Deterministic{5}.Probs(dst, 0) },
	} {
		if !panics(f) {
			t.Errorf("%s: no panic", name)
		}
	}
	for _, tc := range []struct {
		name  string
		n, na int
		p     []float64
		want  error
	}{
		{"length", 2, 2, []float64{1, 0, 1}, linalg.ErrDimension},
		{"zero states", 0, 2, nil, linalg.ErrDimension},
		{"sum", 1, 2, []float64{0.5, 0.6}, linalg.ErrNotStochastic},
		{"negative", 1, 2, []float64{1.5, -0.5}, linalg.ErrNotStochastic},
		{"NaN", 1, 2, []float64{math.NaN(), 1}, linalg.ErrNonFinite},
	} {
		if _, err := NewTable(tc.n, tc.na, tc.p); !errors.Is(err, tc.want) {
			t.Errorf("NewTable %s: %v, want %v", tc.name, err, tc.want)
		}
	}
}

func softmaxHand(x ...float64) []float64 {
	var z float64
	out := make([]float64, len(x))
	for i, v := range x {
		out[i] = math.Exp(v)
		z += out[i]
	}
	for i := range out {
		out[i] /= z
	}
	return out
}

func mustTable(t *testing.T, n, na int, p []float64) *Table {
	tab, err := NewTable(n, na, p)
	if err != nil {
		t.Fatal(err)
	}
	return tab
}

func TestNewErrors(t *testing.T) {
	ok := []ProbEntry{{0, 0, 1, 1}}
	for _, tc := range []struct {
		name  string
		n, na int
		tr    []ProbEntry
		term  []bool
		start []float64
		want  error
	}{
		{"no states", 0, 1, nil, nil, nil, linalg.ErrDimension},
		{"no actions", 2, 0, ok, nil, []float64{1, 0}, linalg.ErrDimension},
		{"too many rows", 1 << 40, 1 << 30, ok, nil, nil, linalg.ErrDimension},
		{"terminal length", 2, 1, ok, []bool{true}, []float64{1, 0}, linalg.ErrDimension},
		{"start length", 2, 1, ok, []bool{false, true}, []float64{1}, linalg.ErrDimension},
		{"start NaN", 2, 1, ok, []bool{false, true}, []float64{math.NaN(), 0}, linalg.ErrNonFinite},
		{"start negative", 2, 1, ok, []bool{false, true}, []float64{1.5, -0.5}, linalg.ErrNotStochastic},
		{"start empty", 2, 1, ok, []bool{false, true}, []float64{0, 0}, ErrConfig},
		{"start sum", 2, 1, ok, []bool{false, true}, []float64{0.5, 0}, linalg.ErrNotStochastic},
		{"state range", 2, 1, []ProbEntry{{0, 0, 2, 1}}, []bool{false, true}, []float64{1, 0}, ErrConfig},
		{"negative state", 2, 1, []ProbEntry{{-1, 0, 1, 1}}, []bool{false, true}, []float64{1, 0}, ErrConfig},
		{"action range", 2, 1, []ProbEntry{{0, 1, 1, 1}}, []bool{false, true}, []float64{1, 0}, ErrConfig},
		{"prob NaN", 2, 1, []ProbEntry{{0, 0, 1, math.NaN()}}, []bool{false, true}, []float64{1, 0}, linalg.ErrNonFinite},
		{"prob negative", 2, 1, []ProbEntry{{0, 0, 1, 1.5}, {0, 0, 0, -0.5}}, []bool{false, true}, []float64{1, 0}, linalg.ErrNotStochastic},
		{"row sum", 2, 1, []ProbEntry{{0, 0, 1, 0.5}}, []bool{false, true}, []float64{1, 0}, linalg.ErrNotStochastic},
		{"missing row", 2, 2, ok, []bool{false, true}, []float64{1, 0}, linalg.ErrNotStochastic},
		{"terminal mass", 2, 1, []ProbEntry{{0, 0, 1, 1}, {1, 0, 0, 1}}, []bool{false, true}, []float64{1, 0}, ErrConfig},
		{"terminal half loop", 2, 1, []ProbEntry{{0, 0, 1, 1}, {1, 0, 1, 0.5}}, []bool{false, true}, []float64{1, 0}, ErrConfig},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := New(tc.n, tc.na, tc.tr, tc.term, tc.start)
			if !errors.Is(err, tc.want) {
				t.Fatalf("error %v, want %v", err, tc.want)
			}
		})
	}
	// Accepted: terminal self-loops given explicitly, zero-probability
	// entries, duplicates summed.
	m, err := New(2, 1, []ProbEntry{{0, 0, 1, 0.25}, {0, 0, 1, 0.75}, {0, 0, 0, 0}, {1, 0, 1, 1}, {1, 0, 0, 0}}, []bool{false, true}, []float64{1, 0})
	if err != nil {
		t.Fatal(err)
	}
	if next, p := m.Next(0, 0); len(next) != 1 || next[0] != 1 || p[0] != 1 {
		t.Errorf("Next(0,0) = %v %v", next, p)
	}
	var rs *linalg.RowSumError
	if _, err := New(1, 1, []ProbEntry{{0, 0, 0, 0.5}}, nil, []float64{1}); !errors.As(err, &rs) || rs.Sum != 0.5 {
		t.Errorf("row sum error %v", err)
	}
}

func TestRandomConfig(t *testing.T) {
	rng := rand.New(rand.NewPCG(4, 4))
	for _, cfg := range []RandomConfig{{States: -1}, {TerminalFraction: 1}, {TerminalFraction: math.NaN()}, {Actions: -2}} {
		if _, err := RandomFinite(&cfg, rng); !errors.Is(err, linalg.ErrDimension) {
			t.Errorf("%+v: %v", cfg, err)
		}
	}
	// Defaults, determinism, branching and the self-loop rule.
	a, err := RandomFinite(&RandomConfig{}, rand.New(rand.NewPCG(1, 1)))
	if err != nil {
		t.Fatal(err)
	}
	b, _ := RandomFinite(nil, rand.New(rand.NewPCG(1, 1))) // nil means the zero value
	if a.NumStates() != 10 || a.NumActions() != 2 {
		t.Errorf("defaults: %d states %d actions", a.NumStates(), a.NumActions())
	}
	pa, pb := a.Transitions(), b.Transitions()
	if len(pa.Val) != len(pb.Val) || maxDiff(pa.Val, pb.Val) != 0 {
		t.Error("same seed, different MDPs")
	}
	for _, cfg := range []RandomConfig{{States: 50, Branching: 3, TerminalFraction: 0.5}, {States: 5, Branching: 9, SelfLoops: true}} {
		m, err := RandomFinite(&cfg, rng)
		if err != nil {
			t.Fatal(err)
		}
		nt := 0
		for s := 0; s < m.NumStates(); s++ {
			if m.Terminal(s) {
				nt++
				continue
			}
			for a := 0; a < m.NumActions(); a++ {
				next, _ := m.Next(s, a)
				if want := min(cfg.Branching, m.NumStates()); len(next) != want && !(len(next) == want-1 && !cfg.SelfLoops) {
					t.Errorf("%d successors", len(next))
				}
				for _, j := range next {
					if j == s && !cfg.SelfLoops {
						t.Error("self-loop")
					}
				}
			}
		}
		if want := int(cfg.TerminalFraction * float64(cfg.States)); nt != want {
			t.Errorf("%d terminal states, want %d", nt, want)
		}
	}
}

// TestSamplerNumStates: a sampler reports the size of the MDP it samples,
// and every state it returns lies in [0, NumStates).
func TestSamplerNumStates(t *testing.T) {
	for _, tc := range []struct{ states, actions int }{{1, 1}, {3, 2}, {17, 4}} {
		m, err := RandomFinite(&RandomConfig{States: tc.states, Actions: tc.actions, Branching: 2, SelfLoops: true}, rand.New(rand.NewPCG(uint64(tc.states), 1)))
		if err != nil {
			t.Fatal(err)
		}
		e := NewSampler(m, 10)
		if e.NumStates() != tc.states || e.NumActions() != tc.actions {
			t.Errorf("sizes %d x %d, want %d x %d", e.NumStates(), e.NumActions(), tc.states, tc.actions)
		}
		rng := rand.New(rand.NewPCG(1, 2))
		for range 20 {
			s := e.Reset(rng)
			for !e.Done() {
				if s < 0 || s >= e.NumStates() {
					t.Fatalf("state %d outside [0, %d)", s, e.NumStates())
				}
				s = e.Step(rng.IntN(tc.actions), rng).Next
			}
		}
	}
}

// TestEnd checks the two questions an End answers, for each kind (the
// convention of the package doc: a terminal state stops bootstrapping, a
// time limit does not), and its names.
func TestEnd(t *testing.T) {
	for _, tc := range []struct {
		end              End
		done, bootstraps bool
		name             string
	}{
		{Continuing, false, true, "continuing"},
		{Terminal, true, false, "terminal"},
		{TimeLimit, true, true, "time limit"},
		{End(7), true, true, "end(7)"},
	} {
		o := Outcome{Next: 3, End: tc.end}
		if tc.end.Done() != tc.done || o.Done() != tc.done {
			t.Errorf("%v: Done %v, want %v", tc.end, tc.end.Done(), tc.done)
		}
		if tc.end.Bootstraps() != tc.bootstraps || o.Bootstraps() != tc.bootstraps {
			t.Errorf("%v: Bootstraps %v, want %v", tc.end, tc.end.Bootstraps(), tc.bootstraps)
		}
		if o.Terminal() != (tc.end == Terminal) {
			t.Errorf("%v: Terminal %v", tc.end, o.Terminal())
		}
		if got := tc.end.String(); got != tc.name {
			t.Errorf("String %q, want %q", got, tc.name)
		}
	}
}
