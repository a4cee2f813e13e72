package usf

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/successor-go/successor/internal/vec"
	"github.com/successor-go/successor/sf"
)

// TabularConfig configures a Tabular approximator. A nil *TabularConfig
// means the zero value.
type TabularConfig struct {
	// Schedule is the step-size schedule, with the meaning of
	// sf.StepSchedule (alpha_n = StepSize/(1+n)^Power after n earlier
	// updates of the same
	// (z, s, a)); the zero value is the constant step 0.1.
	Schedule sf.StepSchedule
}

// Tabular is a universal SF over a finite set of vectors z_1..z_K: one
// sf.Table per z, psi(s, a, z_k) = Tables[k] at (s, a). Observations are
// one-hot states. A z passed to Psi or in a Batch must equal one of the set
// exactly: the same float64 values, compared with == (so 0 and -0 match).
// A z is found by a hash table built from Z by NewTabular and
// UnmarshalBinary, in O(d) expected time whatever the size K of the set;
// a Batch may instead give the index k of each z in K.
//
// Z and Tables are exported for reading; the set is fixed, so Z must not
// be modified (the hash table would not see the change), and the tables
// are written only by Update and UpdateRelabel (the cache of action values
// would not see another write).
//
// A Tabular also keeps, once Values, Greedy or UpdateRelabel first needs
// it, a cache of the action values Q(s, a, z_k) = psi(s, a, z_k) . z_k of
// every z_k of the set, kept current by Update and UpdateRelabel, so that
// the policy of z_k costs O(A) per state rather than O(A d). The cache is
// not saved: after UnmarshalBinary it is rebuilt, exactly, from the loaded
// tables on first use.
type Tabular struct {
	Z      [][]float64 // the set (copied at construction); read only
	Tables []*sf.Table // Tables[k] holds psi(., ., Z[k])

	// slots is an open-addressing (linear probing) hash table of the set:
	// entry k+1 for Z[k], 0 for empty; len a power of two >= 2K. hashes
	// holds hashZ of the entry in each slot.
	slots  []int32
	hashes []uint64
	keys   []int // the positions of z that the hash reads

	gamma  float64
	alpha  float64
	power  float64
	visits []float64 // per (k, s, a) when power > 0
	steps  int
	err    error

	// q caches Q(s, a, z_k) = psi(s, a, z_k) . z_k at (k*S + s)*A + a, or
	// is nil until first needed (see values).
	q []float64
}

// NewTabular returns a zeroed tabular USF for the given number of states
// and actions over the set zs (each of the same length d >= 1), with
// discount gamma in [0, 1]. Errors wrap ErrDimension, ErrDiscount,
// ErrNonFinite or ErrConfig.
func NewTabular(states, actions int, zs [][]float64, gamma float64, cfg *TabularConfig) (*Tabular, error) {
	if err := checkGamma("tabular", gamma); err != nil {
		return nil, err
	}
	if len(zs) == 0 {
		return nil, fmt.Errorf("usf: tabular: empty z set: %w", ErrDimension)
	}
	var c TabularConfig
	if cfg != nil {
		c = *cfg
	}
	alpha, power, err := resolveStep(c.Schedule)
	if err != nil {
		return nil, fmt.Errorf("usf: tabular: %w", err)
	}
	d := len(zs[0])
	t := &Tabular{gamma: gamma, alpha: alpha, power: power}
	for k, z := range zs {
		if len(z) != d || d == 0 {
			return nil, fmt.Errorf("usf: tabular: z[%d] has length %d, want %d: %w", k, len(z), d, ErrDimension)
		}
		for _, v := range z {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, fmt.Errorf("usf: tabular: z[%d]: %w", k, ErrNonFinite)
			}
		}
		tab, err := sf.NewTable(states, actions, d)
		if err != nil {
			return nil, fmt.Errorf("usf: tabular: %w", err)
		}
		t.Z = append(t.Z, append([]float64(nil), z...))
		t.Tables = append(t.Tables, tab)
	}
	if power > 0 {
		t.visits = make([]float64, len(zs)*states*actions)
	}
	t.buildIndex()
	return t, nil
}

// buildIndex fills the hash table of the set. A duplicate z is entered
// once, as its lowest k, so that Index returns the first match in Z.
//
// The hash reads only the key positions of z: scanning the positions in
// order, a position is kept if it separates more vectors of the set (more
// distinct partial hashes), until the partial hashes are as many as the
// distinct vectors (of the full hashes). For vectors in general position
// that is one position; for the standard basis, d-1. The key positions
// only decide the speed: Index compares every component of a candidate.
func (t *Tabular) buildIndex() {
	d := len(t.Z[0])
	seen := make(map[uint64]struct{}, len(t.Z))
	distinct := func(hs []uint64) int {
		clear(seen)
		for _, h := range hs {
			seen[h] = struct{}{}
		}
		return len(seen)
	}
	part := make([]uint64, len(t.Z))
	cand := make([]uint64, len(t.Z))
	for k, z := range t.Z {
		h := uint64(fnvOffset)
		for _, v := range z {
			h = fnvStep(h, v)
		}
		cand[k] = h
		part[k] = fnvOffset
	}
	target := distinct(cand)
	t.keys = nil
	for j, have := 0, 1; j < d && have < target; j++ {
		for k, z := range t.Z {
			cand[k] = fnvStep(part[k], z[j])
		}
		if n := distinct(cand); n > have {
			have = n
			t.keys = append(t.keys, j)
			copy(part, cand)
		}
	}

	n := 2
	for n < 2*len(t.Z) {
		n *= 2
	}
	t.slots, t.hashes = make([]int32, n), make([]uint64, n)
	mask := uint64(n - 1)
	for k, z := range t.Z {
		if t.Index(z) >= 0 {
			continue
		}
		h := t.hashZ(z)
		i := h & mask
		for t.slots[i] != 0 {
			i = (i + 1) & mask
		}
		t.slots[i], t.hashes[i] = int32(k+1), h
	}
}

const (
	fnvOffset = 14695981039346656037 // FNV-1a 64-bit offset basis
	fnvPrime  = 1099511628211        // FNV 64-bit prime
)

// fnvStep is one word-wise FNV-1a step on the bits of v, with -0 read as 0
// (v+0 is +0 for v = -0; the two compare equal, so they must hash alike).
func fnvStep(h uint64, v float64) uint64 {
	return (h ^ math.Float64bits(v+0)) * fnvPrime
}

// hashZ hashes the key positions of z (see buildIndex) by fnvStep and
// finishes with the 64-bit finaliser of MurmurHash3 (fmix64), so that the
// low bits used for the slot depend on every input bit.
func (t *Tabular) hashZ(z []float64) uint64 {
	h := uint64(fnvOffset)
	for _, j := range t.keys {
		h = fnvStep(h, z[j])
	}
	h ^= h >> 33
	h *= 0xff51afd7ed558ccd
	h ^= h >> 33
	h *= 0xc4ceb9fe1a85ec53
	h ^= h >> 33
	return h
}

// resolveStep applies the defaults of sf.StepSchedule.
func resolveStep(st sf.StepSchedule) (alpha, power float64, err error) {
	if !(st.Power >= 0 && st.Power <= 1) {
		return 0, 0, fmt.Errorf("step power %v outside [0, 1]: %w", st.Power, ErrConfig)
	}
	if !(st.StepSize >= 0 && st.StepSize <= 1) {
		return 0, 0, fmt.Errorf("step %v outside [0, 1]: %w", st.StepSize, ErrConfig)
	}
	alpha = st.StepSize
	if alpha == 0 {
		alpha = 0.1
		if st.Power > 0 {
			alpha = 1
		}
	}
	return alpha, st.Power, nil
}

// ObsDim returns the number of states, the dimension of the one-hot
// observations.
func (t *Tabular) ObsDim() int { return t.Tables[0].S }

// Shape returns the number of actions and the feature dimension, the shape
// of psi(s, ., z) (as sf.Table.Shape).
func (t *Tabular) Shape() (actions, dim int) {
	tab := t.Tables[0]
	return tab.A, tab.D
}

// Index returns the lowest k with Z[k] equal to z (every component ==),
// or -1. It looks z up in a hash table: O(d) expected time for a z of
// length d, whatever the size of the set. It does not allocate.
func (t *Tabular) Index(z []float64) int {
	if len(t.slots) == 0 || len(z) != len(t.Z[0]) {
		return -1
	}
	h := t.hashZ(z)
	mask := uint64(len(t.slots) - 1)
	for i := h & mask; t.slots[i] != 0; i = (i + 1) & mask {
		if t.hashes[i] != h {
			continue
		}
		k := int(t.slots[i] - 1)
		if equalVec(t.Z[k], z) {
			return k
		}
	}
	return -1
}

// equalVec reports whether a and b have the same length and equal
// components.
func equalVec(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for j, v := range a {
		if v != b[j] {
			return false
		}
	}
	return true
}

func (t *Tabular) mustIndex(z []float64) int {
	k := t.Index(z)
	if k < 0 {
		panic("usf: tabular: z is not in the set")
	}
	return k
}

// Psi writes psi(s, ., z) for the state s of the one-hot x. It panics if x
// is not one-hot, z is not in the set or len(dst) != A*d.
func (t *Tabular) Psi(dst, x, z []float64) {
	s := t.ObsDim()
	checkLen("tabular", "observation", x, s)
	t.PsiState(dst, hotIndex("tabular", x), z)
}

// PsiState writes psi(s, ., z) into dst. It panics if z is not in the set,
// s is out of range or len(dst) != A*d. It does not allocate.
func (t *Tabular) PsiState(dst []float64, s int, z []float64) {
	t.Tables[t.mustIndex(z)].Psi(dst, s)
}

// Steps returns the number of transitions learned from.
func (t *Tabular) Steps() int { return t.steps }

// Err returns the divergence error of an earlier update, or nil.
func (t *Tabular) Err() error { return t.err }

// Update applies online TD(0) to the transitions of b in order:
//
//	psi(s,a,z) += alpha (phi + gamma (1-terminal) psi(s',a',z) - psi(s,a,z))
//
// with a' the given next action or argmax_a' psi(s',a',z) . z. It reads S
// and Next if set, else the one-hot X and NextX; and the set indices K if
// set, else Z (looked up as by Index). The returned loss is
// (1/(2n)) sum ||delta||^2 of the deltas as they were applied. It keeps
// the cache of action values (Values) current once it is built. It panics
// if b is malformed, a z is not in the set or an index of K is outside
// [0, len(Z)). It does not allocate.
func (t *Tabular) Update(b *Batch) (float64, error) {
	if t.err != nil {
		return 0, t.err
	}
	ns := t.ObsDim()
	na, d := t.Shape()
	n := b.Len()
	indexed := b.S != nil && b.Next != nil
	byIndex := b.K != nil
	if indexed {
		if len(b.S) != n || len(b.Next) != n {
			panic("usf: tabular: batch S and Next must have one entry per transition")
		}
		bb := *b
		bb.X, bb.NextX = nil, nil
		bb.check("tabular", ns, na, d, byIndex)
	} else {
		b.check("tabular", ns, na, d, byIndex)
	}
	for _, k := range b.K {
		if uint(k) >= uint(len(t.Z)) {
			panic(fmt.Sprintf("usf: tabular: set index %d out of range [0, %d)", k, len(t.Z)))
		}
	}
	var loss float64
	for i := 0; i < n; i++ {
		var s, next int
		if indexed {
			s, next = b.S[i], b.Next[i]
		} else {
			s = hotIndex("tabular", b.X[i*ns:(i+1)*ns])
			next = hotIndex("tabular", b.NextX[i*ns:(i+1)*ns])
		}
		if uint(s) >= uint(ns) || uint(next) >= uint(ns) {
			panic(fmt.Sprintf("usf: tabular: state %d or %d out of range [0, %d)", s, next, ns))
		}
		var k int
		var z []float64
		if byIndex {
			k = b.K[i]
			z = t.Z[k]
		} else {
			z = b.Z[i*d : (i+1)*d]
			k = t.mustIndex(z)
		}
		tab := t.Tables[k]
		a := b.A[i]
		phi := b.Phi[i*d : (i+1)*d]
		row := tab.Row(s, a)
		step := t.alpha
		if t.visits != nil {
			j := (k*ns+s)*na + a
			t.visits[j]++
			step = t.alpha * math.Pow(t.visits[j], -t.power)
		}
		t.steps++
		var nrow []float64
		if !b.Terminal[i] {
			an := b.nextAction(i)
			if an < 0 {
				an = greedy(tab.State(next), z, na)
			}
			nrow = tab.Row(next, an)
		}
		var sq, chk float64
		for j := range row {
			y := phi[j]
			if nrow != nil {
				y += t.gamma * nrow[j]
			}
			delta := y - row[j]
			sq += delta * delta
			v := row[j] + step*delta
			row[j] = v
			chk += v - v // 0 for a finite v, NaN otherwise
		}
		// Both the deltas and the values written are checked: a finite
		// delta times an infinite step (a visit count of -1 from a file
		// gives 0^-power) writes Inf or NaN with sq finite.
		if math.IsNaN(sq) || math.IsInf(sq, 0) || chk != 0 {
			t.err = &sf.DivergenceError{Learner: "usf tabular", Step: t.steps, State: s, Action: a}
			return 0, t.err
		}
		if t.q != nil {
			t.q[(k*ns+s)*na+a] = vec.DotSeq(row, z)
		}
		loss += sq
	}
	if n == 0 {
		return 0, nil
	}
	return loss / (2 * float64(n)), nil
}

// values returns the cache of action values, building it from the tables
// if it is not there (after NewTabular or UnmarshalBinary).
func (t *Tabular) values() []float64 {
	if t.q != nil {
		return t.q
	}
	ns := t.ObsDim()
	na, _ := t.Shape()
	q := make([]float64, len(t.Z)*ns*na)
	for k, z := range t.Z {
		tab := t.Tables[k]
		for s := range ns {
			for a := range na {
				q[(k*ns+s)*na+a] = vec.DotSeq(tab.Row(s, a), z)
			}
		}
	}
	t.q = q
	return q
}

// Values returns a view of the action values Q(s, ., z_k) =
// psi(s, ., z_k) . z_k of the policy of z_k in state s (len A, the dot
// products summed left to right), from the cache. It must not be
// modified. The first call of Values, Greedy or UpdateRelabel builds the
// cache, O(K S A d); it must not be concurrent with another call, after
// which Values and Greedy may be called concurrently (but not with an
// update). It panics if k or s is out of range.
func (t *Tabular) Values(k, s int) []float64 {
	ns := t.ObsDim()
	na, _ := t.Shape()
	if uint(k) >= uint(len(t.Z)) || uint(s) >= uint(ns) {
		panic(fmt.Sprintf("usf: tabular: values of z %d in state %d out of range", k, s))
	}
	i := (k*ns + s) * na
	return t.values()[i : i+na : i+na]
}

// Greedy returns the action of the policy of z_k in state s,
// argmax_a Q(s, a, z_k) from the cache (see Values), ties to the lowest
// action. It panics if k or s is out of range. It does not allocate once
// the cache is built.
func (t *Tabular) Greedy(k, s int) int {
	return vec.Argmax(t.Values(k, s))
}

// TDStats accumulates the squared TD errors of updates: SumSq is the sum
// over updates of ||delta||^2 / d (the mean over the d features of the
// squared error of one update) and N the number of updates.
type TDStats struct {
	SumSq float64
	N     int
}

// Mean returns SumSq / N, the mean squared TD error per feature, or 0 if
// N is 0.
func (st TDStats) Mean() float64 {
	if st.N == 0 {
		return 0
	}
	return st.SumSq / float64(st.N)
}

// UpdateRelabel applies online TD(0) with the greedy target to the
// transitions of b in order, for the z that acted and extra more z of the
// set drawn uniformly at random (off-policy relabelling: with phi the
// features of s', the reward phi . z_j of every z_j of the set is known).
// For transition i and each of its z_j, in turn,
//
//	a*    = argmax_a psi(s', a, z_j) . z_j   (from the cache, ties to the lowest action),
//	psi(s, a, z_j) += alpha [phi + gamma (1 - terminal) psi(s', a*, z_j) - psi(s, a, z_j)],
//
// then Q(s, a, z_j) is refreshed in the cache. The row is computed as sf.TD
// computes it, (1-alpha) (psi + (alpha gamma/(1-alpha)) psi') + alpha phi
// (alpha psi' gamma + (1-alpha) psi + alpha phi when alpha = 1), so one
// update equals sf.TD.UpdateFeatures with the Sampled target at a* bit for
// bit. This is the update of pretraining in Hansen et al. 2020
// (Algorithm 1), where every z_j is a skill and phi the current features.
//
// It reads S, Next, A, Phi (the features of every s', len n*d), Terminal,
// and the set indices K of the z that acted (Z, looked up as by Index, if
// K is nil); X, NextX and NextA are not read. The extra z of transition i
// are drawn after its own update, by extra calls rng.IntN(K) (rng may be
// nil if extra is 0). Every update adds to st, if it is not nil, the
// squared TD error per feature, recovered from the change of the row as
// ||change||^2 / (alpha^2 d). The step alpha follows the schedule of
// TabularConfig.Schedule; each update counts as one step (Steps).
//
// It returns an error wrapping a *sf.DivergenceError (ErrDiverged) if a
// row becomes non-finite, naming the set index; the Tabular is then
// unusable. It panics if b is malformed (S or Next nil), extra < 0, a
// state, action or index is out of range, a z is not in the set, or rng
// is nil with extra > 0. It does not allocate once the cache is built.
func (t *Tabular) UpdateRelabel(b *Batch, extra int, st *TDStats, rng *rand.Rand) error {
	if t.err != nil {
		return t.err
	}
	ns := t.ObsDim()
	na, d := t.Shape()
	n := b.Len()
	if b.S == nil || b.Next == nil || len(b.S) != n || len(b.Next) != n {
		panic("usf: tabular: relabel: batch needs S and Next, one entry per transition")
	}
	if len(b.Phi) != n*d || len(b.Terminal) != n || b.K != nil && len(b.K) != n || b.K == nil && len(b.Z) != n*d {
		panic("usf: tabular: relabel: batch Phi, Terminal, K or Z of the wrong length")
	}
	if extra < 0 || extra > 0 && rng == nil {
		panic("usf: tabular: relabel: negative extra, or extra without rng")
	}
	q := t.values()
	nz := len(t.Z)
	for i := range n {
		s, a, next := b.S[i], b.A[i], b.Next[i]
		if uint(s) >= uint(ns) || uint(next) >= uint(ns) || uint(a) >= uint(na) {
			panic(fmt.Sprintf("usf: tabular: relabel: transition (%d, %d, %d) out of range", s, a, next))
		}
		var k int
		if b.K != nil {
			k = b.K[i]
			if uint(k) >= uint(nz) {
				panic(fmt.Sprintf("usf: tabular: set index %d out of range [0, %d)", k, nz))
			}
		} else {
			k = t.mustIndex(b.Z[i*d : (i+1)*d])
		}
		phi := b.Phi[i*d : (i+1)*d : (i+1)*d]
		term := b.Terminal[i]
		for j := 0; j <= extra; j++ {
			if j > 0 {
				k = rng.IntN(nz)
			}
			tab := t.Tables[k]
			row := tab.Row(s, a)
			var nrow []float64
			if !term {
				nrow = tab.Row(next, vec.Argmax(q[(k*ns+next)*na:(k*ns+next+1)*na]))
			}
			step := t.alpha
			if t.visits != nil {
				v := (k*ns+s)*na + a
				t.visits[v]++
				step = t.alpha * math.Pow(t.visits[v], -t.power)
			}
			t.steps++
			sq := tdRow(row, nrow, phi, step, t.gamma)
			if math.IsNaN(sq) || math.IsInf(sq, 0) {
				t.err = &sf.DivergenceError{Learner: "usf tabular", Step: t.steps, State: s, Action: a}
				return fmt.Errorf("usf: tabular: relabel: z %d: %w", k, t.err)
			}
			q[(k*ns+s)*na+a] = vec.DotSeq(row, t.Z[k])
			if st != nil {
				st.SumSq += sq * (1 / (step * step)) / float64(d)
				st.N++
			}
		}
	}
	return nil
}

// tdRow sets cur to the TD(0) update toward phi + gamma nxt (phi alone
// for nxt == nil, a terminal next state) with step alpha, in the
// arithmetic of sf.TD (see UpdateRelabel), and returns the squared norm of
// the change of cur. cur and nxt may be the same row.
func tdRow(cur, nxt, phi []float64, alpha, gamma float64) float64 {
	phi = phi[:len(cur)]
	om, ag := 1-alpha, alpha*gamma
	var sq float64
	switch {
	case nxt == nil:
		for k, c := range cur {
			v := om*c + alpha*phi[k]
			e := v - c
			sq += e * e
			cur[k] = v
		}
	case om != 0:
		nxt = nxt[:len(cur)]
		h := ag / om
		for k, c := range cur {
			v := om*(c+h*nxt[k]) + alpha*phi[k]
			e := v - c
			sq += e * e
			cur[k] = v
		}
	default:
		nxt = nxt[:len(cur)]
		for k, c := range cur {
			v := om*c + ag*nxt[k] + alpha*phi[k]
			e := v - c
			sq += e * e
			cur[k] = v
		}
	}
	return sq
}
