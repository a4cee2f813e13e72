package usf

import (
	"fmt"
	"math/rand/v2"
)

// Entry is one stored transition (s, a, phi, s', terminal, z) of a
// Replay. S and Next are integer states (any value, e.g. -1, if there are
// none); X and NextX are observation vectors (nil when the replay keeps no
// observations); NextA is the next action to bootstrap from, or -1 for the
// greedy action of the policy of z. K is the index of z in a set the
// caller holds (such as Tabular.Z); a replay of feature dimension 0 keeps
// K in place of Phi and Z (which must then be nil), other replays ignore
// it.
type Entry struct {
	S, A, Next, NextA int
	Terminal          bool
	X, NextX          []float64
	Phi, Z            []float64
	K                 int
}

// Replay is a fixed-capacity ring of transitions with uniform minibatch
// sampling. When full, Add overwrites the oldest transition. A Replay is
// not safe for concurrent use.
//
// A replay of feature dimension d > 0 keeps phi and z of every
// transition; one of dimension 0 keeps instead the index K of z in a set
// the caller holds, and the caller recomputes phi (for instance from s')
// and z (from K) after Sample. Memory per transition, with obs the
// observation dimension: 33 + 16 obs + 16 d bytes for d > 0 (four ints,
// a flag, two observations, phi and z), and 41 + 16 obs bytes for d = 0.
// With obs = 0 and d = 64 that is 1057 bytes (106 MB for 100 000
// transitions) against 41 bytes (4.1 MB).
type Replay struct {
	capacity, obs, d int
	size, head       int // number stored; index of the next write
	added            int // total number added

	s, a, next, nextA []int
	k                 []int // set indices when d == 0, else nil
	term              []bool
	x, nx, phi, z     []float64
}

// MaxReplayWords bounds the buffers of a Replay: capacity x (6 + 2 obs +
// 2 dim) words of 8 bytes (the whole capacity is allocated up front),
// 2^32 words or 32 GiB.
const MaxReplayWords = 1 << 32

// NewReplay returns an empty replay of the given capacity for observations
// of dimension obs (0: the replay keeps integer states only) and features
// of dimension dim (0: the replay keeps the set index K of each transition
// instead of its features and z). Errors wrap ErrDimension: a capacity
// outside 1..2^30, a negative obs or dim, or buffers of more than
// MaxReplayWords words.
func NewReplay(capacity, obs, dim int) (*Replay, error) {
	if capacity <= 0 || obs < 0 || dim < 0 || capacity > 1<<30 || obs > 1<<28 || dim > 1<<28 ||
		uint64(capacity)*uint64(6+2*obs+2*dim) > MaxReplayWords {
		return nil, fmt.Errorf("usf: replay: capacity %d, obs %d, dim %d (at most %d words): %w", capacity, obs, dim, uint64(MaxReplayWords), ErrDimension)
	}
	r := &Replay{capacity: capacity, obs: obs, d: dim}
	r.alloc()
	return r, nil
}

func (r *Replay) alloc() {
	c := r.capacity
	r.s, r.a, r.next, r.nextA = make([]int, c), make([]int, c), make([]int, c), make([]int, c)
	if r.d == 0 {
		r.k = make([]int, c)
	}
	r.term = make([]bool, c)
	r.x, r.nx = make([]float64, c*r.obs), make([]float64, c*r.obs)
	r.phi, r.z = make([]float64, c*r.d), make([]float64, c*r.d)
}

// Len returns the number of transitions stored.
func (r *Replay) Len() int { return r.size }

// Cap returns the capacity.
func (r *Replay) Cap() int { return r.capacity }

// Added returns the number of transitions ever added.
func (r *Replay) Added() int { return r.added }

// ObsDim returns the observation dimension (0 when the replay keeps
// states instead of observation vectors).
func (r *Replay) ObsDim() int { return r.obs }

// Dim returns the feature dimension (0 when the replay keeps set indices
// instead of phi and z).
func (r *Replay) Dim() int { return r.d }

// Add stores a copy of t, overwriting the oldest transition when full. It
// panics if a slice has the wrong length (X and NextX must be nil when the
// replay keeps no observations, Phi and Z when its dimension is 0). It
// does not allocate.
func (r *Replay) Add(t *Entry) {
	if r.d == 0 {
		if t.Phi != nil || t.Z != nil {
			panic("usf: replay: features or z given to a replay that keeps set indices")
		}
	} else {
		checkLen("replay", "Phi", t.Phi, r.d)
		checkLen("replay", "Z", t.Z, r.d)
	}
	if r.obs == 0 {
		if t.X != nil || t.NextX != nil {
			panic("usf: replay: observations given to a replay that keeps none")
		}
	} else {
		checkLen("replay", "X", t.X, r.obs)
		checkLen("replay", "NextX", t.NextX, r.obs)
	}
	i := r.head
	r.s[i], r.a[i], r.next[i], r.nextA[i], r.term[i] = t.S, t.A, t.Next, t.NextA, t.Terminal
	if r.d == 0 {
		r.k[i] = t.K
	}
	copy(r.x[i*r.obs:(i+1)*r.obs], t.X)
	copy(r.nx[i*r.obs:(i+1)*r.obs], t.NextX)
	copy(r.phi[i*r.d:(i+1)*r.d], t.Phi)
	copy(r.z[i*r.d:(i+1)*r.d], t.Z)
	r.head = (i + 1) % r.capacity
	r.size = min(r.size+1, r.capacity)
	r.added++
}

// slot returns the storage slot of the i-th stored transition, oldest
// first.
func (r *Replay) slot(i int) int {
	j := r.head - r.size + i
	if j < 0 {
		j += r.capacity
	}
	return j
}

// Entry copies the i-th stored transition, oldest first (i = 0 is the
// oldest, Len()-1 the newest), into dst. It sets S, A, Next, NextA and
// Terminal, and K when the replay keeps set indices; it copies the
// observations, features and z the replay keeps into dst.X, dst.NextX,
// dst.Phi and dst.Z if those are not nil (they must then have the
// replay's lengths). Fields the replay does not keep are left as they are.
// It panics if i is outside [0, Len()) or a slice has the wrong length. It
// does not allocate.
func (r *Replay) Entry(dst *Entry, i int) {
	if uint(i) >= uint(r.size) {
		panic(fmt.Sprintf("usf: replay: transition %d out of range [0, %d)", i, r.size))
	}
	j := r.slot(i)
	dst.S, dst.A, dst.Next, dst.NextA, dst.Terminal = r.s[j], r.a[j], r.next[j], r.nextA[j], r.term[j]
	if r.d == 0 {
		dst.K = r.k[j]
	} else {
		if dst.Phi != nil {
			checkLen("replay", "Phi", dst.Phi, r.d)
			copy(dst.Phi, r.phi[j*r.d:(j+1)*r.d])
		}
		if dst.Z != nil {
			checkLen("replay", "Z", dst.Z, r.d)
			copy(dst.Z, r.z[j*r.d:(j+1)*r.d])
		}
	}
	if r.obs > 0 {
		if dst.X != nil {
			checkLen("replay", "X", dst.X, r.obs)
			copy(dst.X, r.x[j*r.obs:(j+1)*r.obs])
		}
		if dst.NextX != nil {
			checkLen("replay", "NextX", dst.NextX, r.obs)
			copy(dst.NextX, r.nx[j*r.obs:(j+1)*r.obs])
		}
	}
}

// Validate checks every stored transition against the bounds of the
// caller's problem: states S and Next in [0, states), actions A in
// [0, actions) and next actions NextA below actions (a negative NextA
// means greedy), and, for a replay of dimension 0, set indices K in
// [0, indices). A bound <= 0 is not checked. It also checks that the
// observations, features and z are finite. It returns nil or an error
// naming the first bad transition (oldest first), wrapping ErrDimension
// for a value out of range and ErrNonFinite for a NaN or infinity. Use it
// after loading a replay to check that it belongs to the problem.
func (r *Replay) Validate(states, actions, indices int) error {
	for i := 0; i < r.size; i++ {
		j := r.slot(i)
		if states > 0 && (uint(r.s[j]) >= uint(states) || uint(r.next[j]) >= uint(states)) {
			return fmt.Errorf("usf: replay: transition %d: state %d or next state %d outside [0, %d): %w",
				i, r.s[j], r.next[j], states, ErrDimension)
		}
		if actions > 0 && (uint(r.a[j]) >= uint(actions) || r.nextA[j] >= actions) {
			return fmt.Errorf("usf: replay: transition %d: action %d or next action %d outside [0, %d): %w",
				i, r.a[j], r.nextA[j], actions, ErrDimension)
		}
		if indices > 0 && r.d == 0 && uint(r.k[j]) >= uint(indices) {
			return fmt.Errorf("usf: replay: transition %d: set index %d outside [0, %d): %w",
				i, r.k[j], indices, ErrDimension)
		}
		if !finite(r.x[j*r.obs:(j+1)*r.obs]...) || !finite(r.nx[j*r.obs:(j+1)*r.obs]...) ||
			!finite(r.phi[j*r.d:(j+1)*r.d]...) || !finite(r.z[j*r.d:(j+1)*r.d]...) {
			return fmt.Errorf("usf: replay: transition %d: %w", i, ErrNonFinite)
		}
	}
	return nil
}

// Sample fills dst with len(dst.A) transitions drawn uniformly with
// replacement (one rng.IntN per transition). It sets S, Next, A, NextA and
// Terminal; Phi and Z when the replay keeps them (dimension d > 0), or
// else the set indices K (dst.K must then have length len(dst.A), and
// Phi and Z are left as they are for the caller to fill); and X and NextX
// when the replay keeps observations (then dst.X and dst.NextX must have
// the right length; otherwise they are left as they are, and should be
// nil). Make dst with NewBatch(n, obs, dim). It panics if the replay is
// empty or dst has wrong lengths, or if dst.K is not nil for a replay
// with d > 0 (a Tabular would read those indices instead of the sampled
// z). It does not allocate.
func (r *Replay) Sample(dst *Batch, rng *rand.Rand) {
	if r.size == 0 {
		panic("usf: replay: sample from an empty replay")
	}
	n := len(dst.A)
	if len(dst.S) != n || len(dst.Next) != n || len(dst.NextA) != n || len(dst.Terminal) != n ||
		(r.d > 0 && (len(dst.Phi) != n*r.d || len(dst.Z) != n*r.d)) ||
		(r.d == 0 && len(dst.K) != n) ||
		(r.obs > 0 && (len(dst.X) != n*r.obs || len(dst.NextX) != n*r.obs)) {
		panic("usf: replay: batch has the wrong shape (use NewBatch, and set K for a replay of dimension 0)")
	}
	if r.d > 0 && dst.K != nil {
		panic("usf: replay: batch has set indices K, but this replay keeps z vectors")
	}
	o, d := r.obs, r.d
	for k := 0; k < n; k++ {
		i := rng.IntN(r.size)
		dst.S[k], dst.A[k], dst.Next[k], dst.NextA[k], dst.Terminal[k] = r.s[i], r.a[i], r.next[i], r.nextA[i], r.term[i]
		if d > 0 {
			copy(dst.Phi[k*d:(k+1)*d], r.phi[i*d:(i+1)*d])
			copy(dst.Z[k*d:(k+1)*d], r.z[i*d:(i+1)*d])
		} else {
			dst.K[k] = r.k[i]
		}
		if o > 0 {
			copy(dst.X[k*o:(k+1)*o], r.x[i*o:(i+1)*o])
			copy(dst.NextX[k*o:(k+1)*o], r.nx[i*o:(i+1)*o])
		}
	}
}
