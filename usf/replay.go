package usf

import (
	"fmt"
	"math/rand/v2"
)

// Transition is one step (s, a, phi, s', terminal, z) for a Replay. S and
// Next are integer states (any value, e.g. -1, if there are none); X and
// NextX are observation vectors (nil when the replay keeps no
// observations); NextA is the next action to bootstrap from, or -1 for the
// greedy action of the policy of z.
type Transition struct {
	S, A, Next, NextA int
	Terminal          bool
	X, NextX          []float64
	Phi, Z            []float64
}

// Replay is a fixed-capacity ring of transitions with uniform minibatch
// sampling. When full, Add overwrites the oldest transition. A Replay is
// not safe for concurrent use.
type Replay struct {
	capacity, obs, d int
	size, head       int // number stored; index of the next write
	added            int // total number added

	s, a, next, nextA []int
	term              []bool
	x, nx, phi, z     []float64
}

// NewReplay returns an empty replay of the given capacity for observations
// of dimension obs (0: the replay keeps integer states only) and features
// of dimension dim. Errors wrap ErrDimension.
func NewReplay(capacity, obs, dim int) (*Replay, error) {
	if capacity <= 0 || obs < 0 || dim <= 0 || capacity > 1<<30 {
		return nil, fmt.Errorf("usf: replay: capacity %d, obs %d, dim %d: %w", capacity, obs, dim, ErrDimension)
	}
	r := &Replay{capacity: capacity, obs: obs, d: dim}
	r.alloc()
	return r, nil
}

func (r *Replay) alloc() {
	c := r.capacity
	r.s, r.a, r.next, r.nextA = make([]int, c), make([]int, c), make([]int, c), make([]int, c)
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

// Shape returns the observation and feature dimensions.
func (r *Replay) Shape() (obs, dim int) { return r.obs, r.d }

// Add stores a copy of t, overwriting the oldest transition when full. It
// panics if a slice has the wrong length (X and NextX must be nil when the
// replay keeps no observations). It does not allocate.
func (r *Replay) Add(t *Transition) {
	checkLen("replay", "Phi", t.Phi, r.d)
	checkLen("replay", "Z", t.Z, r.d)
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
	copy(r.x[i*r.obs:(i+1)*r.obs], t.X)
	copy(r.nx[i*r.obs:(i+1)*r.obs], t.NextX)
	copy(r.phi[i*r.d:(i+1)*r.d], t.Phi)
	copy(r.z[i*r.d:(i+1)*r.d], t.Z)
	r.head = (i + 1) % r.capacity
	r.size = min(r.size+1, r.capacity)
	r.added++
}

// Sample fills dst with len(dst.A) transitions drawn uniformly with
// replacement (one rng.IntN per transition). It sets S, Next, A, NextA,
// Terminal, Phi and Z, and X and NextX when the replay keeps observations
// (then dst.X and dst.NextX must have the right length; otherwise they are
// left as they are, and should be nil). Make dst with NewBatch(n, obs,
// dim). It panics if the replay is empty or dst has wrong lengths. It does
// not allocate.
func (r *Replay) Sample(dst *Batch, rng *rand.Rand) {
	if r.size == 0 {
		panic("usf: replay: sample from an empty replay")
	}
	n := len(dst.A)
	if len(dst.S) != n || len(dst.Next) != n || len(dst.NextA) != n || len(dst.Terminal) != n ||
		len(dst.Phi) != n*r.d || len(dst.Z) != n*r.d ||
		(r.obs > 0 && (len(dst.X) != n*r.obs || len(dst.NextX) != n*r.obs)) {
		panic("usf: replay: batch has the wrong shape (use NewBatch)")
	}
	o, d := r.obs, r.d
	for k := 0; k < n; k++ {
		i := rng.IntN(r.size)
		dst.S[k], dst.A[k], dst.Next[k], dst.NextA[k], dst.Terminal[k] = r.s[i], r.a[i], r.next[i], r.nextA[i], r.term[i]
		copy(dst.Phi[k*d:(k+1)*d], r.phi[i*d:(i+1)*d])
		copy(dst.Z[k*d:(k+1)*d], r.z[i*d:(i+1)*d])
		if o > 0 {
			copy(dst.X[k*o:(k+1)*o], r.x[i*o:(i+1)*o])
			copy(dst.NextX[k*o:(k+1)*o], r.nx[i*o:(i+1)*o])
		}
	}
}
