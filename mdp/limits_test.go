package mdp

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/successor-go/successor/linalg"
)

// giantHeaders are MDP files of a hundred-odd bytes whose headers ask for
// far more state-action rows than they describe. Load used to allocate
// them: the first asked for about 51.5 GB (2^31 - 1 self-loops of its one
// terminal state) and killed the process, the second took 4 s and 144 MB.
// FuzzLoad carries them in its seed corpus.
var giantHeaders = []struct {
	name, in string
	want     error
}{
	{"terminal state with 2^31-1 actions",
		`{"format":"successor/mdp","version":1,"states":1,"actions":2147483647,"terminal":[0],"start":[[0,1]],"transitions":[]}`,
		ErrDimension},
	{"terminal state with 2e6 actions",
		`{"format":"successor/mdp","version":1,"states":1,"actions":2000000,"terminal":[0],"start":[[0,1]],"transitions":[]}`,
		ErrDimension},
	{"2^31-1 states, one listed",
		`{"format":"successor/mdp","version":1,"states":2147483647,"actions":1,"terminal":[0],"start":[[0,1]],"transitions":[]}`,
		linalg.ErrNotStochastic},
	{"non-terminal state with 2^30 actions",
		`{"format":"successor/mdp","version":1,"states":2,"actions":1073741823,"terminal":[1],"start":[[0,1]],"transitions":[[0,0,1,1]]}`,
		linalg.ErrNotStochastic},
	{"65 terminal actions per listed item",
		`{"format":"successor/mdp","version":1,"states":1,"actions":65,"terminal":[0],"start":[[0,1]],"transitions":[]}`,
		ErrDimension},
}

// TestLoadGiantHeader checks that a file cannot make Load allocate more
// than a constant times its own size: each header above is refused with
// an error before anything of its declared size is allocated (a failure
// of this test is an out-of-memory crash or a multi-second run).
func TestLoadGiantHeader(t *testing.T) {
	for _, tc := range giantHeaders {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Load(strings.NewReader(tc.in))
			if !errors.Is(err, tc.want) {
				t.Fatalf("error %v, want %v", err, tc.want)
			}
		})
	}
	// The bound is ImpliedRowRatio (64) terminal rows per state and
	// transition: one terminal state with 64 actions still loads.
	ok := `{"format":"successor/mdp","version":1,"states":1,"actions":64,"terminal":[0],"start":[[0,1]],"transitions":[]}`
	f, err := Load(strings.NewReader(ok))
	if err != nil {
		t.Fatalf("64 actions: %v", err)
	}
	if f.MDP.NumActions() != 64 || !f.MDP.Terminal(0) {
		t.Errorf("loaded %d actions, terminal %v", f.MDP.NumActions(), f.MDP.Terminal(0))
	}
}

// TestNewBounds checks New's own bounds on what it allocates: the same
// giant cases through the constructor, each an error instead of a request
// for gigabytes (New(1, 2^31-1, ...) used to ask for 51.5 GB).
func TestNewBounds(t *testing.T) {
	one := []float64{1}
	for _, tc := range []struct {
		name    string
		n, a    int
		tr      []ProbEntry
		term    []bool
		start   []float64
		want    error
		wantMsg string
	}{
		{"terminal state, 2^31-1 actions", 1, MaxRows, nil, []bool{true}, one, ErrDimension, "implied self-loops"},
		{"terminal state, 65 actions", 1, 65, nil, []bool{true}, one, ErrDimension, "implied self-loops"},
		{"non-terminal, 2^30-1 actions, one transition", 2, 1<<30 - 1, []ProbEntry{{0, 0, 1, 1}}, []bool{false, true}, []float64{1, 0}, linalg.ErrNotStochastic, "cannot give"},
		{"more than MaxRows pairs", 1 << 16, 1 << 16, nil, nil, make([]float64, 1<<16), ErrDimension, "exceeds"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := New(tc.n, tc.a, tc.tr, tc.term, tc.start)
			if !errors.Is(err, tc.want) || !strings.Contains(fmt.Sprint(err), tc.wantMsg) {
				t.Fatalf("error %v, want %v saying %q", err, tc.want, tc.wantMsg)
			}
		})
	}
	// Within the bound: one terminal state with ImpliedRowRatio actions,
	// and a chain whose terminal rows are many but paid for by its
	// transitions (16 terminal states of 64 actions each beside 1
	// non-terminal state of 64 transitions: 1024 <= 64 (17 + 64)).
	if _, err := New(1, ImpliedRowRatio, nil, []bool{true}, one); err != nil {
		t.Errorf("1 terminal state x %d actions: %v", ImpliedRowRatio, err)
	}
	var tr []ProbEntry
	for a := range 64 {
		tr = append(tr, ProbEntry{0, a, 1 + a%16, 1})
	}
	term := make([]bool, 17)
	for s := 1; s < 17; s++ {
		term[s] = true
	}
	start := make([]float64, 17)
	start[0] = 1
	m, err := New(17, 64, tr, term, start)
	if err != nil {
		t.Fatalf("16 terminal states x 64 actions: %v", err)
	}
	if next, _ := m.Next(5, 63); len(next) != 1 || next[0] != 5 {
		t.Errorf("terminal state 5 action 63: successors %v, want the self-loop [5]", next)
	}
}

// TestPolicyWrongSize checks that the oracles return an error, not a
// panic, for a policy of this package that does not fit the MDP (each
// used to panic inside Probs: an index out of range or "wrong length").
func TestPolicyWrongSize(t *testing.T) {
	m := walkChain(t).MDP // 7 states, 1 action
	r := func(s, a, next int) float64 { return 1 }
	q7 := make([]float64, 7)
	nan := make([]float64, 7)
	nan[3] = math.NaN()
	inf := make([]float64, 7)
	inf[2] = math.Inf(1)
	tab2, err := NewTable(7, 2, []float64{.5, .5, .5, .5, .5, .5, .5, .5, .5, .5, .5, .5, .5, .5})
	if err != nil {
		t.Fatal(err)
	}
	tab6, err := NewTable(6, 1, []float64{1, 1, 1, 1, 1, 1})
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name string
		pi   Policy
		want error
	}{
		{"deterministic too short", Deterministic{0, 0, 0}, ErrDimension},
		{"deterministic too long", make(Deterministic, 8), ErrDimension},
		{"deterministic action out of range", Deterministic{0, 0, 0, 1, 0, 0, 0}, ErrDimension},
		{"deterministic negative action", Deterministic{0, 0, 0, -1, 0, 0, 0}, ErrDimension},
		{"uniform of 2 actions", Uniform{N: 2}, ErrDimension},
		{"table of 2 actions", tab2, ErrDimension},
		{"table of 6 states", tab6, ErrDimension},
		{"greedy of 2 actions", Greedy{Q: make([]float64, 14), A: 2}, ErrDimension},
		{"greedy short table", Greedy{Q: q7[:5], A: 1}, ErrDimension},
		{"greedy NaN value", Greedy{Q: nan, A: 1}, ErrNonFinite},
		{"epsilon-greedy short table", EpsilonGreedy{Q: q7[:6], A: 1, Epsilon: 0.1}, ErrDimension},
		{"epsilon-greedy epsilon 2", EpsilonGreedy{Q: q7, A: 1, Epsilon: 2}, ErrConfig},
		{"softmax zero temperature", Softmax{Q: q7, A: 1}, ErrConfig},
		{"softmax infinite value", Softmax{Q: inf, A: 1, Temperature: 1}, ErrNonFinite},
		{"softmax of 3 actions", Softmax{Q: q7, A: 3, Temperature: 1}, ErrDimension},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if _, err := Evaluate(m, tc.pi, r, 0.9); !errors.Is(err, tc.want) {
				t.Errorf("Evaluate: error %v, want %v", err, tc.want)
			}
			if _, err := m.StateActionChainOf(tc.pi); !errors.Is(err, tc.want) {
				t.Errorf("StateActionChainOf: error %v, want %v", err, tc.want)
			}
			if _, err := m.ChainOf(tc.pi); !errors.Is(err, tc.want) {
				t.Errorf("ChainOf: error %v, want %v", err, tc.want)
			}
		})
	}
	// The same policies of the right size pass their Check.
	for _, c := range []Checker{Deterministic(make([]int, 7)), Uniform{N: 1}, Greedy{Q: q7, A: 1},
		EpsilonGreedy{Q: q7, A: 1, Epsilon: 1}, Softmax{Q: q7, A: 1, Temperature: 0.5}} {
		if err := c.Check(7, 1); err != nil {
			t.Errorf("%T.Check(7, 1): %v", c, err)
		}
	}
}

func TestRandomFiniteBounds(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	// 2^20 states x 2^10 actions is within MaxRows, but with 2^20
	// successors each the entries would overflow a slice length (it used
	// to panic in makeslice).
	if _, err := RandomFinite(&RandomConfig{States: 1 << 20, Actions: 1 << 10, Branching: 1 << 20}, rng); !errors.Is(err, ErrDimension) {
		t.Errorf("2^50 entries: error %v, want ErrDimension", err)
	}
	if _, err := RandomFinite(nil, nil); !errors.Is(err, ErrConfig) {
		t.Errorf("nil rng: error %v, want ErrConfig", err)
	}
}

// TestNewTableOverflow checks that sizes whose product overflows to the
// length given are refused (NewTable(2^32, 2^32, nil) used to pass the
// length check, 2^64 wrapping to 0, and panic).
func TestNewTableOverflow(t *testing.T) {
	for _, n := range []int{1 << 32, 1 << 40} {
		if _, err := NewTable(n, n, nil); !errors.Is(err, ErrDimension) {
			t.Errorf("NewTable(%d, %d, nil): error %v, want ErrDimension", n, n, err)
		}
	}
	if _, err := NewTable(2, 3, make([]float64, 5)); !errors.Is(err, ErrDimension) {
		t.Errorf("5 probabilities for 2 x 3: error %v", err)
	}
}
