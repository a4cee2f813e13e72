package mdp

import (
	"bytes"
	"errors"
	"flag"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/successor-go/successor/internal/testtol"
	"github.com/successor-go/successor/linalg"
)

var update = flag.Bool("update", false, "rewrite the textbook files in ../testdata")

const testdataDir = "../testdata"

// walkChain is the random walk of Sutton & Barto 2nd ed., Example 6.2 as a
// Markov chain (one action; each neighbour with probability 1/2).
func walkChain(t testing.TB) *File {
	t.Helper()
	var tr []ProbEntry
	for s := 1; s <= 5; s++ {
		tr = append(tr, ProbEntry{s, 0, s - 1, 0.5}, ProbEntry{s, 0, s + 1, 0.5})
	}
	m, err := New(7, 1, tr, []bool{true, false, false, false, false, false, true}, []float64{0, 0, 0, 1, 0, 0, 0})
	if err != nil {
		t.Fatal(err)
	}
	return &File{
		MDP:         m,
		Name:        "random walk",
		Description: "Sutton & Barto, Reinforcement Learning: An Introduction, 2nd ed., Example 6.2: five non-terminal states A..E, start in C, +1 on the right exit; true values 1/6..5/6 at gamma 1.",
		Labels:      []string{"left exit", "A", "B", "C", "D", "E", "right exit"},
		Rewards:     []RewardEntry{{5, 0, 6, 1}},
	}
}

// rewardEntries lists r(s,a,s') of a reward function on every transition
// where it is non-zero.
func rewardEntries(m *Finite, r Reward) []RewardEntry {
	var out []RewardEntry
	for s := 0; s < m.NumStates(); s++ {
		if m.Terminal(s) {
			continue
		}
		for a := 0; a < m.NumActions(); a++ {
			next, _ := m.Next(s, a)
			for _, j := range next {
				if v := r(s, a, j); v != 0 {
					out = append(out, RewardEntry{s, a, j, v})
				}
			}
		}
	}
	return out
}

// textbookFiles are the files of ../testdata with their sources.
func textbookFiles(t testing.TB) map[string]*File {
	grid, gridR := bookGrid(t)
	corner, cornerR := cornerGrid(t)
	moves := []string{"north", "east", "south", "west"}
	return map[string]*File{
		"random_walk.json": walkChain(t),
		"gridworld_3_5.json": {
			MDP:         grid,
			Name:        "5x5 grid world",
			Description: "Sutton & Barto, Reinforcement Learning: An Introduction, 2nd ed., Example 3.5 (Figure 3.2) and Example 3.8 (Figure 3.5): state = 5*row + col; from A = 1 every action goes to A' = 21 with +10, from B = 3 to B' = 13 with +5, off-grid moves stay with -1. gamma = 0.9.",
			ActionNames: moves,
			Rewards:     rewardEntries(grid, gridR),
		},
		"gridworld_4_1.json": {
			MDP:         corner,
			Name:        "4x4 grid world with terminal corners",
			Description: "Sutton & Barto, Reinforcement Learning: An Introduction, 2nd ed., Example 4.1 (Figure 4.1): state = 4*row + col, terminal states 0 and 15, -1 on every transition, off-grid moves stay. gamma = 1.",
			ActionNames: moves,
			Rewards:     rewardEntries(corner, cornerR),
		},
	}
}

func TestTextbookFiles(t *testing.T) {
	files := textbookFiles(t)
	if *update {
		for name, f := range files {
			if err := WriteFile(filepath.Join(testdataDir, name), f); err != nil {
				t.Fatal(err)
			}
		}
	}
	for _, tc := range []struct {
		file  string
		gamma float64
		want  []float64 // V of the uniform policy
		tol   float64
	}{
		// Sutton & Barto 2nd ed., Example 6.2: 1/6 .. 5/6.
		{"random_walk.json", 1, []float64{0, 1. / 6, 2. / 6, 3. / 6, 4. / 6, 5. / 6, 0}, testtol.Exact},
		// Sutton & Barto 2nd ed., Figure 3.2, the whole table as printed
		// (rows 2-4 from memory, as in TestEvaluateTextbook).
		{"gridworld_3_5.json", 0.9, []float64{
			3.3, 8.8, 4.4, 5.3, 1.5,
			1.5, 3.0, 2.3, 1.9, 0.5,
			0.1, 0.7, 0.7, 0.4, -0.4,
			-1.0, -0.4, -0.4, -0.6, -1.2,
			-1.9, -1.3, -1.2, -1.4, -2.0,
		}, tolBook},
		// Sutton & Barto 2nd ed., Figure 4.1, the k = infinity table.
		{"gridworld_4_1.json", 1, []float64{
			0, -14, -20, -22,
			-14, -18, -20, -20,
			-20, -20, -18, -14,
			-22, -20, -14, 0,
		}, 1e-9},
	} {
		t.Run(tc.file, func(t *testing.T) {
			f, err := LoadFile(filepath.Join(testdataDir, tc.file))
			if err != nil {
				t.Fatal(err)
			}
			if !filesEqual(f, files[tc.file]) {
				t.Errorf("testdata differs from the builder in this test (run go test -update)")
			}
			v, err := Evaluate(f.MDP, Uniform{f.MDP.NumActions()}, f.Reward(), tc.gamma)
			if err != nil {
				t.Fatal(err)
			}
			if len(v.V) != len(tc.want) {
				t.Fatalf("%d states, want %d", len(v.V), len(tc.want))
			}
			if d := maxDiff(v.V, tc.want); d > tc.tol {
				t.Errorf("max |V - book| = %g > %g", d, tc.tol)
			}
		})
	}
}

// filesEqual reports whether two files are identical, floats bit for bit.
func filesEqual(a, b *File) bool {
	ma, mb := a.MDP, b.MDP
	if ma.n != mb.n || ma.a != mb.a || !slices.Equal(ma.terminal, mb.terminal) {
		return false
	}
	bits := func(x, y []float64) bool {
		if len(x) != len(y) {
			return false
		}
		for i := range x {
			if math.Float64bits(x[i]) != math.Float64bits(y[i]) {
				return false
			}
		}
		return true
	}
	pa, pb := ma.Transitions(), mb.Transitions()
	return bits(ma.start, mb.start) && slices.Equal(pa.Ptr, pb.Ptr) && slices.Equal(pa.Ind, pb.Ind) &&
		bits(pa.Val, pb.Val) && a.Name == b.Name && a.Description == b.Description &&
		slices.Equal(a.Labels, b.Labels) && slices.Equal(a.ActionNames, b.ActionNames) &&
		slices.EqualFunc(a.Rewards, b.Rewards, func(x, y RewardEntry) bool {
			return x.State == y.State && x.Action == y.Action && x.Next == y.Next &&
				math.Float64bits(x.Value) == math.Float64bits(y.Value)
		})
}

func TestFileRoundTrip(t *testing.T) {
	for seed := uint64(1); seed <= 20; seed++ {
		rng := rand.New(rand.NewPCG(seed, 7))
		m, err := RandomFinite(&RandomConfig{States: 1 + rng.IntN(12), Actions: 1 + rng.IntN(3), Branching: 1 + rng.IntN(4), TerminalFraction: 0.3}, rng)
		if err != nil {
			t.Fatal(err)
		}
		f := &File{MDP: m, Name: "random \"quoted\" \u00e9", Rewards: rewardEntries(m, func(s, a, n int) float64 { return rng.NormFloat64() })}
		if seed%2 == 0 {
			f.Labels = make([]string, m.NumStates())
			f.Labels[0] = "first\nline"
		}
		var b1 bytes.Buffer
		if err := Write(&b1, f); err != nil {
			t.Fatal(err)
		}
		g, err := Load(bytes.NewReader(b1.Bytes()))
		if err != nil {
			t.Fatalf("seed %d: %v\n%s", seed, err, b1.String())
		}
		if !filesEqual(f, g) {
			t.Fatalf("seed %d: round trip differs", seed)
		}
		var b2 bytes.Buffer
		if err := Write(&b2, g); err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(b1.Bytes(), b2.Bytes()) {
			t.Fatalf("seed %d: second write differs", seed)
		}
	}
}

func TestWriteFileAtomic(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "walk.json")
	f := walkChain(t)
	if err := WriteFile(path, f); err != nil {
		t.Fatal(err)
	}
	// Overwrite, then check no temporary files are left behind.
	if err := WriteFile(path, f); err != nil {
		t.Fatal(err)
	}
	ents, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	if len(ents) != 1 {
		t.Errorf("directory holds %d entries, want 1", len(ents))
	}
	g, err := LoadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if !filesEqual(f, g) {
		t.Error("file round trip differs")
	}
	if err := WriteFile(filepath.Join(dir, "no", "such", "dir.json"), f); err == nil {
		t.Error("write into a missing directory succeeded")
	}
	if _, err := LoadFile(filepath.Join(dir, "missing.json")); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("missing file: %v", err)
	}
	bad := &File{MDP: f.MDP, Labels: []string{"x"}}
	if err := WriteFile(path, bad); !errors.Is(err, linalg.ErrDimension) {
		t.Errorf("bad labels: %v", err)
	}
	if _, err := LoadFile(path); err != nil {
		t.Errorf("failed write damaged the old file: %v", err)
	}
}

const goodChain = `{"format": "successor/mdp", "version": 1, "states": 2, "actions": 1,
 "terminal": [1], "start": [[0, 1]], "transitions": [[0, 1, 1]]}`

func TestLoadErrors(t *testing.T) {
	if _, err := Load(strings.NewReader(goodChain)); err != nil {
		t.Fatalf("good chain: %v", err)
	}
	rep := func(old, new string) string {
		s := strings.Replace(goodChain, old, new, 1)
		if s == goodChain {
			t.Fatalf("replacement %q not found", old)
		}
		return s
	}
	for _, tc := range []struct {
		name, in string
		want     error
	}{
		{"empty", "", ErrCorrupt},
		{"not json", "hello", ErrCorrupt},
		{"trailing", goodChain + "{}", ErrCorrupt},
		{"unknown field", rep(`"version": 1`, `"version": 1, "extra": 2`), ErrCorrupt},
		{"format", rep(`successor/mdp`, `other`), ErrCorrupt},
		{"version", rep(`"version": 1`, `"version": 2`), ErrCorrupt},
		{"states 0", rep(`"states": 2`, `"states": 0`), linalg.ErrDimension},
		{"huge states", rep(`"states": 2`, `"states": 1000000000`), linalg.ErrNotStochastic},
		{"actions 0", rep(`"actions": 1`, `"actions": 0`), linalg.ErrDimension},
		{"terminal range", rep(`"terminal": [1]`, `"terminal": [2]`), ErrConfig},
		{"terminal repeated", rep(`"terminal": [1]`, `"terminal": [1, 1]`), ErrConfig},
		{"start range", rep(`[[0, 1]]`, `[[5, 1]]`), ErrConfig},
		{"start repeated", rep(`[[0, 1]]`, `[[0, 0.5], [0, 0.5]]`), ErrConfig},
		{"start sum", rep(`[[0, 1]]`, `[[0, 0.5]]`), linalg.ErrNotStochastic},
		{"start empty", rep(`[[0, 1]]`, `[]`), ErrConfig},
		{"start float index", rep(`[[0, 1]]`, `[[0.0, 1]]`), ErrCorrupt},
		{"start short entry", rep(`[[0, 1]]`, `[[0]]`), ErrCorrupt},
		{"transition long entry", rep(`[[0, 1, 1]]`, `[[0, 0, 1, 1]]`), ErrCorrupt},
		{"transition index", rep(`[[0, 1, 1]]`, `[[0, 7, 1]]`), ErrConfig},
		{"transition prob", rep(`[[0, 1, 1]]`, `[[0, 1, 0.9]]`), linalg.ErrNotStochastic},
		{"transition negative", rep(`[[0, 1, 1]]`, `[[0, 1, 1.5], [0, 0, -0.5]]`), linalg.ErrNotStochastic},
		{"transition overflow", rep(`[[0, 1, 1]]`, `[[0, 1, 1e999]]`), linalg.ErrNonFinite},
		{"terminal mass", rep(`[[0, 1, 1]]`, `[[0, 1, 1], [1, 0, 1]]`), ErrConfig},
		{"missing row", rep(`"terminal": [1], `, ``), linalg.ErrNotStochastic},
		{"labels length", rep(`"actions": 1`, `"actions": 1, "labels": ["a"]`), linalg.ErrDimension},
		{"action names length", rep(`"actions": 1`, `"actions": 1, "actionNames": ["a", "b"]`), linalg.ErrDimension},
		{"reward missing transition", rep(`[[0, 1, 1]]`, `[[0, 1, 1]], "rewards": [[0, 0, 1]]`), ErrConfig},
		{"reward twice", rep(`[[0, 1, 1]]`, `[[0, 1, 1]], "rewards": [[0, 1, 1], [0, 1, 2]]`), ErrConfig},
		{"reward terminal", rep(`[[0, 1, 1]]`, `[[0, 1, 1]], "rewards": [[1, 1, 1]]`), ErrConfig},
		{"reward range", rep(`[[0, 1, 1]]`, `[[0, 1, 1]], "rewards": [[0, 9, 1]]`), ErrConfig},
		{"checksum", rep(`"actions": 1`, `"actions": 1, "checksum": "crc32:00000000"`), ErrCorrupt},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Load(strings.NewReader(tc.in))
			if !errors.Is(err, tc.want) {
				t.Fatalf("error %v, want %v", err, tc.want)
			}
		})
	}
	if err := Write(&bytes.Buffer{}, nil); !errors.Is(err, ErrConfig) {
		t.Errorf("write nil: %v", err)
	}
	if err := Write(&bytes.Buffer{}, &File{}); !errors.Is(err, ErrConfig) {
		t.Errorf("write without mdp: %v", err)
	}
}

// FuzzLoad checks that Load never panics, and that whatever it accepts
// writes back canonically and reloads identically.
func FuzzLoad(f *testing.F) {
	f.Add(goodChain)
	for _, file := range []string{"random_walk.json", "gridworld_4_1.json"} {
		b, err := os.ReadFile(filepath.Join(testdataDir, file))
		if err != nil {
			f.Fatal(err)
		}
		f.Add(string(b))
	}
	f.Add(`{"format": "successor/mdp", "version": 1, "states": 1, "actions": 2, "start": [[0, 1]], "transitions": [[0, 0, 0, 1], [0, 1, 0, 1]], "rewards": [[0, 1, 0, -2.5]]}`)
	for _, g := range giantHeaders {
		f.Add(g.in)
	}
	f.Fuzz(func(t *testing.T, in string) {
		g, err := Load(strings.NewReader(in))
		if err != nil {
			return
		}
		var b1 bytes.Buffer
		if err := Write(&b1, g); err != nil {
			t.Fatalf("write of a loaded file: %v", err)
		}
		h, err := Load(bytes.NewReader(b1.Bytes()))
		if err != nil {
			t.Fatalf("reload: %v\n%s", err, b1.String())
		}
		if !filesEqual(g, h) {
			t.Fatal("round trip differs")
		}
		var b2 bytes.Buffer
		if err := Write(&b2, h); err != nil || !bytes.Equal(b1.Bytes(), b2.Bytes()) {
			t.Fatal("write is not canonical")
		}
	})
}
