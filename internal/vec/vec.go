package vec

import (
	"math"
	"math/rand/v2"
)

// Dot returns x . y over the len(x) entries of x, with four accumulators as
// described in the package documentation. It panics if len(y) < len(x).
// It does not allocate.
func Dot(x, y []float64) float64 {
	y = y[:len(x)]
	var s0, s1, s2, s3 float64
	i := 0
	for ; i <= len(x)-4; i += 4 {
		xx := x[i : i+4 : i+4]
		yy := y[i : i+4 : i+4]
		s0 += xx[0] * yy[0]
		s1 += xx[1] * yy[1]
		s2 += xx[2] * yy[2]
		s3 += xx[3] * yy[3]
	}
	for ; i < len(x); i++ {
		s0 += x[i] * y[i]
	}
	return (s0 + s1) + (s2 + s3)
}

// DotSeq returns x . y over the len(x) entries of x, summed left to right
// with one accumulator. It is for results that were defined with that order
// (the skills' features and rewards, the universal SFs' cached action
// values, the transfer agent's similarities and rewards): Dot sums in
// another order and would change their bits. It panics if len(y) < len(x).
// It does not allocate.
func DotSeq(x, y []float64) float64 {
	var s float64
	y = y[:len(x)]
	for i, v := range x {
		s += v * y[i]
	}
	return s
}

// Argmax returns the index of the largest entry of x, the lowest index
// among ties. Entries that are NaN are never larger than another entry, so
// they are passed over, except that 0 is returned when x[0] is NaN and no
// later entry is larger than it (none is). It panics if x is empty. It
// does not allocate.
func Argmax(x []float64) int {
	if len(x) == 0 {
		panic("vec: argmax of an empty slice")
	}
	best := 0
	for i, v := range x {
		if v > x[best] {
			best = i
		}
	}
	return best
}

// ArgmaxRandom returns an index of the largest entry of x drawn uniformly
// among the ties with rng, which it uses only when there is a tie (one
// IntN draw). NaN entries are treated as in Argmax. It panics if x is
// empty. It does not allocate.
func ArgmaxRandom(x []float64, rng *rand.Rand) int {
	best, ties := Argmax(x), 0
	for _, v := range x {
		if v == x[best] {
			ties++
		}
	}
	if ties <= 1 {
		return best
	}
	k := rng.IntN(ties)
	for i, v := range x {
		if v == x[best] {
			if k == 0 {
				return i
			}
			k--
		}
	}
	return best
}

// SampleSphere fills dst with a point drawn uniformly from the unit sphere
// in R^len(dst): len(dst) standard normal draws from rng, scaled to unit
// Euclidean length (the normal distribution is rotation invariant, so the
// direction is uniform). An all-zero draw, whose direction is undefined, is
// drawn again; every non-zero value of rand.Rand.NormFloat64 has magnitude
// at least about 1.3e-10 (an int32 times a float32 table entry, or a tail
// value above 3.4: from math/rand/v2's source), so the sum of squares is
// either 0 or at least about 1.6e-20, and the scaling cannot overflow. It
// panics if dst is empty. It does not allocate.
func SampleSphere(dst []float64, rng *rand.Rand) {
	if len(dst) == 0 {
		panic("vec: sample sphere: empty slice")
	}
	for {
		var ss float64
		for i := range dst {
			v := rng.NormFloat64()
			dst[i] = v
			ss += v * v
		}
		if ss > 0 {
			inv := 1 / math.Sqrt(ss)
			for i := range dst {
				dst[i] *= inv
			}
			return
		}
	}
}

// ArgmaxReservoir returns an index of the largest entry of x, ties broken
// uniformly at random by reservoir sampling in one pass: starting from
// -Inf, an entry above the best so far takes its place, and the j-th entry
// equal to the best so far (counting the one that set it) takes it when
// rng.IntN(j) == 0. So it draws once for every entry equal to the running
// best after the first, a different use of rng from ArgmaxRandom's (which
// draws once, only on a final tie); the learners whose runs were defined
// with this rule keep their bits. NaN entries are passed over; when no
// entry is above -Inf (all -Inf or NaN), -Inf entries count as ties. With
// a nil rng the lowest index among ties is returned and nothing is drawn.
// It returns 0 for an empty x. It does not allocate.
func ArgmaxReservoir(x []float64, rng *rand.Rand) int {
	best, arg, ties := math.Inf(-1), 0, 0
	for i, v := range x {
		switch {
		case v > best:
			best, arg, ties = v, i, 1
		case v == best && rng != nil:
			ties++
			if rng.IntN(ties) == 0 {
				arg = i
			}
		}
	}
	return arg
}
