package mdp

import (
	"bufio"
	"bytes"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"hash/crc32"
	"io"
	"math"
	"os"
	"slices"
	"strconv"

	"github.com/successor-go/successor/internal/fileio"
	"github.com/successor-go/successor/linalg"
)

// File format identification.
const (
	FileFormat  = "successor/mdp" // value of the "format" field
	FileVersion = 1               // value of the "version" field
)

// File is a finite MDP or Markov chain with the optional metadata of the
// JSON file format (see the package documentation): a name, a
// description, per-state labels, action names and a sparse reward
// r(s, a, s').
type File struct {
	MDP         *Finite
	Name        string        // optional short name
	Description string        // optional free text, e.g. the source of the model
	Labels      []string      // optional, one per state ("" for none)
	ActionNames []string      // optional, one per action
	Rewards     []RewardEntry // optional sparse r(s, a, s'); absent entries are 0
}

// RewardEntry is one entry r(State, Action, Next) = Value of a sparse
// reward.
type RewardEntry struct {
	State, Action, Next int
	Value               float64
}

// Reward returns the reward function of f.Rewards (0 for transitions not
// listed).
func (f *File) Reward() Reward {
	na := f.MDP.NumActions()
	n := f.MDP.NumStates()
	tab := make(map[int64]float64, len(f.Rewards))
	for _, e := range f.Rewards {
		tab[(int64(e.State)*int64(na)+int64(e.Action))*int64(n)+int64(e.Next)] = e.Value
	}
	return func(s, a, next int) float64 {
		return tab[(int64(s)*int64(na)+int64(a))*int64(n)+int64(next)]
	}
}

// fileJSON is the on-disk layout.
type fileJSON struct {
	Format      string          `json:"format"`
	Version     int             `json:"version"`
	Name        string          `json:"name,omitempty"`
	Description string          `json:"description,omitempty"`
	States      int             `json:"states"`
	Actions     int             `json:"actions"`
	Terminal    []int           `json:"terminal,omitempty"`
	Start       [][]json.Number `json:"start"`
	Labels      []string        `json:"labels,omitempty"`
	ActionNames []string        `json:"actionNames,omitempty"`
	Transitions [][]json.Number `json:"transitions"`
	Rewards     [][]json.Number `json:"rewards,omitempty"`
	Checksum    string          `json:"checksum,omitempty"`
}

// Load reads an MDP file (see the package documentation) and validates it
// as strictly as New: unknown fields, trailing data, a wrong format or
// version, non-integer indices, indices out of range, unsorted or repeated
// terminal or start states, rows not summing to 1, terminal states with
// outgoing mass, label or action-name lists of the wrong length, duplicate
// rewards or rewards on transitions that do not exist, and a checksum that
// does not match are all errors. They wrap ErrCorrupt, ErrConfig or the
// sentinels New uses.
//
// What Load allocates is proportional to the size of the file: a file
// declares at most as many states as it lists terminal states and
// transitions (every action of a non-terminal state needs one), and the
// self-loop rows of its terminal states are bounded by New's
// ImpliedRowRatio; the sizes are checked before anything of their size is
// allocated, and a header declaring more is an error wrapping
// linalg.ErrNotStochastic or ErrDimension.
func Load(r io.Reader) (*File, error) {
	dec := json.NewDecoder(r)
	dec.DisallowUnknownFields()
	dec.UseNumber()
	var fj fileJSON
	if err := dec.Decode(&fj); err != nil {
		return nil, fmt.Errorf("mdp: load: %v: %w", err, ErrCorrupt)
	}
	if _, err := dec.Token(); err != io.EOF {
		return nil, fmt.Errorf("mdp: load: data after the JSON object: %w", ErrCorrupt)
	}
	f, err := fj.build()
	if err != nil {
		return nil, fmt.Errorf("mdp: load: %w", err)
	}
	if fj.Checksum != "" {
		if want := checksumString(f); fj.Checksum != want {
			return nil, fmt.Errorf("mdp: load: checksum %q, content gives %q: %w", fj.Checksum, want, ErrCorrupt)
		}
	}
	return f, nil
}

// LoadFile reads an MDP file with Load.
func LoadFile(path string) (*File, error) {
	fh, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("mdp: load: %w", err)
	}
	defer fh.Close()
	return Load(bufio.NewReader(fh))
}

func parseInt(v json.Number) (int, error) {
	i, err := strconv.Atoi(string(v))
	if err != nil {
		return 0, fmt.Errorf("index %q is not an integer: %w", v, ErrCorrupt)
	}
	return i, nil
}

func parseFloat(v json.Number) (float64, error) {
	x, err := strconv.ParseFloat(string(v), 64)
	if err != nil || math.IsInf(x, 0) {
		return 0, fmt.Errorf("number %q out of range: %w", v, ErrNonFinite)
	}
	return x, nil
}

// entry decodes [i0, i1, ..., value] with len(ints) integers.
func entry(e []json.Number, ints []int) (float64, error) {
	if len(e) != len(ints)+1 {
		return 0, fmt.Errorf("entry %v has %d numbers, want %d: %w", e, len(e), len(ints)+1, ErrCorrupt)
	}
	for i := range ints {
		v, err := parseInt(e[i])
		if err != nil {
			return 0, err
		}
		ints[i] = v
	}
	return parseFloat(e[len(ints)])
}

func (fj *fileJSON) build() (*File, error) {
	if fj.Format != FileFormat {
		return nil, fmt.Errorf("format %q, want %q: %w", fj.Format, FileFormat, ErrCorrupt)
	}
	if fj.Version != FileVersion {
		return nil, fmt.Errorf("version %d, want %d: %w", fj.Version, FileVersion, ErrCorrupt)
	}
	n, na := fj.States, fj.Actions
	if n <= 0 || na <= 0 || n > MaxRows/na {
		return nil, fmt.Errorf("%d states, %d actions: %w", n, na, ErrDimension)
	}
	// Every (s, a) of a non-terminal state needs a transition, so a valid
	// file is at least as long as its state count; check before allocating.
	if int64(n-len(fj.Terminal))*int64(na) > int64(len(fj.Transitions)) {
		return nil, fmt.Errorf("%d transitions cannot cover %d states x %d actions: %w", len(fj.Transitions), n-len(fj.Terminal), na, linalg.ErrNotStochastic)
	}
	term := make([]bool, n)
	for i, s := range fj.Terminal {
		if s < 0 || s >= n || (i > 0 && s <= fj.Terminal[i-1]) {
			return nil, fmt.Errorf("terminal states must be increasing indices in [0, %d): %w", n, ErrConfig)
		}
		term[s] = true
	}
	start := make([]float64, n)
	prev := -1
	idx := make([]int, 3)
	for _, e := range fj.Start {
		p, err := entry(e, idx[:1])
		if err != nil {
			return nil, fmt.Errorf("start: %w", err)
		}
		s := idx[0]
		if s <= prev || s >= n {
			return nil, fmt.Errorf("start states must be increasing indices in [0, %d): %w", n, ErrConfig)
		}
		prev = s
		start[s] = p
	}
	tr := make([]ProbEntry, len(fj.Transitions))
	for i, e := range fj.Transitions {
		var p float64
		var err error
		if na == 1 {
			p, err = entry(e, idx[:2])
			idx[2], idx[1] = idx[1], 0
		} else {
			p, err = entry(e, idx)
		}
		if err != nil {
			return nil, fmt.Errorf("transition %d: %w", i, err)
		}
		tr[i] = ProbEntry{State: idx[0], Action: idx[1], Next: idx[2], Prob: p}
	}
	m, err := New(n, na, tr, term, start)
	if err != nil {
		return nil, err
	}
	f := &File{MDP: m, Name: fj.Name, Description: fj.Description, Labels: fj.Labels, ActionNames: fj.ActionNames}
	for i, e := range fj.Rewards {
		var v float64
		var err error
		if na == 1 {
			v, err = entry(e, idx[:2])
			idx[2], idx[1] = idx[1], 0
		} else {
			v, err = entry(e, idx)
		}
		if err != nil {
			return nil, fmt.Errorf("reward %d: %w", i, err)
		}
		f.Rewards = append(f.Rewards, RewardEntry{State: idx[0], Action: idx[1], Next: idx[2], Value: v})
	}
	if err := f.check(); err != nil {
		return nil, err
	}
	return f, nil
}

// check validates the metadata of f against f.MDP and sorts f.Rewards.
func (f *File) check() error {
	if f.MDP == nil {
		return fmt.Errorf("nil mdp: %w", ErrConfig)
	}
	m := f.MDP
	if f.Labels != nil && len(f.Labels) != m.n {
		return fmt.Errorf("%d labels for %d states: %w", len(f.Labels), m.n, ErrDimension)
	}
	if f.ActionNames != nil && len(f.ActionNames) != m.a {
		return fmt.Errorf("%d action names for %d actions: %w", len(f.ActionNames), m.a, ErrDimension)
	}
	slices.SortFunc(f.Rewards, func(x, y RewardEntry) int {
		if x.State != y.State {
			return x.State - y.State
		}
		if x.Action != y.Action {
			return x.Action - y.Action
		}
		return x.Next - y.Next
	})
	for i, e := range f.Rewards {
		if e.State < 0 || e.State >= m.n || e.Action < 0 || e.Action >= m.a || e.Next < 0 || e.Next >= m.n {
			return fmt.Errorf("reward r(%d,%d,%d): index out of range: %w", e.State, e.Action, e.Next, ErrConfig)
		}
		if math.IsNaN(e.Value) || math.IsInf(e.Value, 0) {
			return fmt.Errorf("reward r(%d,%d,%d): %w", e.State, e.Action, e.Next, ErrNonFinite)
		}
		if i > 0 && f.Rewards[i-1].State == e.State && f.Rewards[i-1].Action == e.Action && f.Rewards[i-1].Next == e.Next {
			return fmt.Errorf("reward r(%d,%d,%d) given twice: %w", e.State, e.Action, e.Next, ErrConfig)
		}
		next, _ := m.Next(e.State, e.Action)
		if m.terminal[e.State] {
			return fmt.Errorf("reward r(%d,%d,%d) from a terminal state: %w", e.State, e.Action, e.Next, ErrConfig)
		}
		if _, ok := slices.BinarySearch(next, e.Next); !ok {
			return fmt.Errorf("reward r(%d,%d,%d) on a transition that does not exist: %w", e.State, e.Action, e.Next, ErrConfig)
		}
	}
	return nil
}

// Write writes f in the JSON file format, with a checksum. The output is
// canonical (the same File always gives the same bytes) and Load reads it
// back to an identical File (probabilities and rewards bit for bit).
// Entries are written in CSR order (state, action, next) and rewards
// sorted the same way; f.Rewards is sorted in place. The error wraps
// ErrConfig or ErrDimension for inconsistent metadata, or is the
// writer's error.
func Write(w io.Writer, f *File) error {
	if f == nil {
		return fmt.Errorf("mdp: write: nil file: %w", ErrConfig)
	}
	if err := f.check(); err != nil {
		return fmt.Errorf("mdp: write: %w", err)
	}
	m := f.MDP
	var b bytes.Buffer
	enc := json.NewEncoder(&b)
	enc.SetEscapeHTML(false)
	str := func(s string) {
		enc.Encode(s)           // cannot fail for a string
		b.Truncate(b.Len() - 1) // drop Encode's newline
	}
	num := func(x float64) { b.Write(strconv.AppendFloat(nil, x, 'g', -1, 64)) }
	fmt.Fprintf(&b, "{\n  \"format\": %q,\n  \"version\": %d,\n", FileFormat, FileVersion)
	if f.Name != "" {
		b.WriteString("  \"name\": ")
		str(f.Name)
		b.WriteString(",\n")
	}
	if f.Description != "" {
		b.WriteString("  \"description\": ")
		str(f.Description)
		b.WriteString(",\n")
	}
	fmt.Fprintf(&b, "  \"states\": %d,\n  \"actions\": %d,\n", m.n, m.a)
	var term []int
	for s, t := range m.terminal {
		if t {
			term = append(term, s)
		}
	}
	if len(term) > 0 {
		b.WriteString("  \"terminal\": [")
		for i, s := range term {
			if i > 0 {
				b.WriteString(", ")
			}
			b.WriteString(strconv.Itoa(s))
		}
		b.WriteString("],\n")
	}
	b.WriteString("  \"start\": [")
	first := true
	for s, p := range m.start {
		if p == 0 {
			continue
		}
		if !first {
			b.WriteString(", ")
		}
		first = false
		fmt.Fprintf(&b, "[%d, ", s)
		num(p)
		b.WriteByte(']')
	}
	b.WriteString("],\n")
	strList := func(key string, xs []string) {
		if xs == nil {
			return
		}
		fmt.Fprintf(&b, "  %q: [", key)
		for i, x := range xs {
			if i > 0 {
				b.WriteString(", ")
			}
			str(x)
		}
		b.WriteString("],\n")
	}
	strList("labels", f.Labels)
	strList("actionNames", f.ActionNames)
	ids := func(s, a, next int) {
		if m.a == 1 {
			fmt.Fprintf(&b, "[%d, %d, ", s, next)
		} else {
			fmt.Fprintf(&b, "[%d, %d, %d, ", s, a, next)
		}
	}
	b.WriteString("  \"transitions\": [")
	first = true
	for s := 0; s < m.n; s++ {
		if m.terminal[s] {
			continue // implied self-loops
		}
		for a := 0; a < m.a; a++ {
			next, prob := m.Next(s, a)
			for k, j := range next {
				if !first {
					b.WriteByte(',')
				}
				first = false
				b.WriteString("\n    ")
				ids(s, a, j)
				num(prob[k])
				b.WriteByte(']')
			}
		}
	}
	b.WriteString("\n  ],\n")
	if len(f.Rewards) > 0 {
		b.WriteString("  \"rewards\": [")
		for i, e := range f.Rewards {
			if i > 0 {
				b.WriteByte(',')
			}
			b.WriteString("\n    ")
			ids(e.State, e.Action, e.Next)
			num(e.Value)
			b.WriteByte(']')
		}
		b.WriteString("\n  ],\n")
	}
	fmt.Fprintf(&b, "  \"checksum\": %q\n}\n", checksumString(f))
	_, err := w.Write(b.Bytes())
	return err
}

// WriteFile writes f to path atomically: it writes a temporary file in the
// same directory, syncs it, and renames it over path (mode 0644), so a
// reader never sees a partial file and a failed write leaves the old file
// intact.
func WriteFile(path string, f *File) error {
	var werr error
	err := fileio.WriteAtomicFunc(path, fileio.FileMode, func(w io.Writer) error {
		werr = Write(w, f)
		return werr
	})
	if err != nil && err != werr {
		return fmt.Errorf("mdp: write file: %w", err)
	}
	return err
}

// checksumString returns "crc32:" and eight hex digits of the CRC-32
// (IEEE) of the canonical encoding of f described in the package
// documentation.
func checksumString(f *File) string {
	h := crc32.NewIEEE()
	var buf [8]byte
	u := func(x uint64) {
		binary.LittleEndian.PutUint64(buf[:], x)
		h.Write(buf[:])
	}
	fl := func(x float64) { u(math.Float64bits(x)) }
	str := func(s string) {
		u(uint64(len(s)))
		io.WriteString(h, s)
	}
	m := f.MDP
	io.WriteString(h, FileFormat)
	u(FileVersion)
	str(f.Name)
	str(f.Description)
	u(uint64(m.n))
	u(uint64(m.a))
	for s := 0; s < m.n; s++ {
		if m.terminal[s] {
			u(1)
		} else {
			u(0)
		}
		fl(m.start[s])
	}
	for s := 0; s < m.n; s++ {
		if m.terminal[s] {
			continue
		}
		for a := 0; a < m.a; a++ {
			next, prob := m.Next(s, a)
			u(uint64(len(next)))
			for k, j := range next {
				u(uint64(j))
				fl(prob[k])
			}
		}
	}
	u(uint64(len(f.Labels)))
	for _, l := range f.Labels {
		str(l)
	}
	u(uint64(len(f.ActionNames)))
	for _, l := range f.ActionNames {
		str(l)
	}
	u(uint64(len(f.Rewards)))
	for _, e := range f.Rewards {
		u(uint64(e.State))
		u(uint64(e.Action))
		u(uint64(e.Next))
		fl(e.Value)
	}
	return fmt.Sprintf("crc32:%08x", h.Sum32())
}
