package skills

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/successor-go/successor/internal/vec"
)

// Prior is a distribution p(z) over skill vectors z in R^Dim. A skill is
// drawn at the start of each episode; with a reward phi . w and w = z the
// successor features of the skill's policy are its universal successor
// features.
type Prior interface {
	// Dim returns the length of z.
	Dim() int
	// Sample draws z into dst (len Dim) using rng. It panics if
	// len(dst) != Dim().
	Sample(dst []float64, rng *rand.Rand)
	// LogProb returns log p(z). It panics if len(z) != Dim().
	LogProb(z []float64) float64
}

var (
	_ Prior = UniformSphere{}
	_ Prior = Categorical{}
)

// UniformSphere is the uniform distribution on the unit sphere
// S^{D-1} = {z in R^D : ||z|| = 1}, with density relative to the surface
// measure
//
//	p(z) = 1 / area(S^{D-1}),   area(S^{D-1}) = 2 pi^{D/2} / Gamma(D/2).
//
// D must be at least 2 (S^1 is the circle).
type UniformSphere struct {
	D int
}

// Dim returns D.
func (u UniformSphere) Dim() int { return u.D }

// Sample draws z by normalising a vector of D independent standard normal
// draws (the normal distribution is rotation invariant, so its direction is
// uniform; vec.SampleSphere). It panics if len(dst) != D or D < 2.
func (u UniformSphere) Sample(dst []float64, rng *rand.Rand) {
	if u.D < 2 {
		panic(fmt.Sprintf("skills: uniform sphere: dimension %d < 2", u.D))
	}
	if len(dst) != u.D {
		panic(fmt.Sprintf("skills: uniform sphere: len(dst) = %d, want %d", len(dst), u.D))
	}
	vec.SampleSphere(dst, rng)
}

// LogProb returns -log area(S^{D-1}) for every z; it does not check that
// ||z|| = 1. It panics if len(z) != D.
func (u UniformSphere) LogProb(z []float64) float64 {
	if len(z) != u.D {
		panic(fmt.Sprintf("skills: uniform sphere: len(z) = %d, want %d", len(z), u.D))
	}
	return -LogSphereArea(u.D)
}

// LogSphereArea returns log area(S^{d-1}) = log 2 + (d/2) log pi - lgamma(d/2),
// the log surface area of the unit sphere in R^d.
//
// Special cases are:
//
//	LogSphereArea(d) = NaN for d < 1
//	LogSphereArea(1) = log 2 (the two points -1 and +1)
func LogSphereArea(d int) float64 {
	if d < 1 {
		return math.NaN()
	}
	h := float64(d) / 2
	lg, _ := math.Lgamma(h)
	return math.Ln2 + h*math.Log(math.Pi) - lg
}

// Categorical is the uniform distribution over K skills, each a one-hot
// vector z = e_k in R^K, so log p(z) = -log K.
type Categorical struct {
	K int
}

// Dim returns K.
func (c Categorical) Dim() int { return c.K }

// Sample writes a one-hot vector e_k with k uniform in [0, K). It panics if
// len(dst) != K or K < 1.
func (c Categorical) Sample(dst []float64, rng *rand.Rand) {
	if c.K < 1 {
		panic(fmt.Sprintf("skills: categorical: K = %d < 1", c.K))
	}
	if len(dst) != c.K {
		panic(fmt.Sprintf("skills: categorical: len(dst) = %d, want %d", len(dst), c.K))
	}
	clear(dst)
	dst[rng.IntN(c.K)] = 1
}

// LogProb returns -log K if z is a one-hot vector and -Inf otherwise. It
// panics if len(z) != K.
func (c Categorical) LogProb(z []float64) float64 {
	if len(z) != c.K {
		panic(fmt.Sprintf("skills: categorical: len(z) = %d, want %d", len(z), c.K))
	}
	if _, ok := oneHotIndex(z); !ok {
		return math.Inf(-1)
	}
	return -math.Log(float64(c.K))
}

// Index returns k for the one-hot vector z = e_k, and -1 if z is not one-hot.
// It panics if len(z) != K.
func (c Categorical) Index(z []float64) int {
	if len(z) != c.K {
		panic(fmt.Sprintf("skills: categorical: len(z) = %d, want %d", len(z), c.K))
	}
	k, ok := oneHotIndex(z)
	if !ok {
		return -1
	}
	return k
}

// oneHotIndex returns the position of the single 1 in z, with ok false if z
// is not exactly a one-hot vector.
func oneHotIndex(z []float64) (k int, ok bool) {
	k = -1
	for i, v := range z {
		switch v {
		case 0:
		case 1:
			if k >= 0 {
				return -1, false
			}
			k = i
		default:
			return -1, false
		}
	}
	return k, k >= 0
}
