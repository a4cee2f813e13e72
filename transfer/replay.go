package transfer

import "math/rand/v2"

// replay is a fixed-capacity ring of transitions (s, a, s', terminal, k),
// k the index of the skill that acted, sampled uniformly with replacement.
type replay struct {
	cap           int
	s, a, next, k []int32
	term          []bool
	pos, count    int
}

func newReplay(capacity int) replay {
	return replay{
		cap: capacity,
		s:   make([]int32, capacity), a: make([]int32, capacity), next: make([]int32, capacity),
		k: make([]int32, capacity), term: make([]bool, capacity),
	}
}

func (r *replay) add(s, a, next int, term bool, k int) {
	i := r.pos
	r.s[i], r.a[i], r.next[i], r.term[i], r.k[i] = int32(s), int32(a), int32(next), term, int32(k)
	r.pos++
	if r.pos == r.cap {
		r.pos = 0
	}
	if r.count < r.cap {
		r.count++
	}
}

// sample returns a uniformly drawn index of a stored transition. The buffer
// must not be empty.
func (r *replay) sample(rng *rand.Rand) int { return rng.IntN(r.count) }
