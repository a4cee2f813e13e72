package usf

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/successor-go/successor/internal/vec"
)

// VonMisesFisher writes into dst a draw from the von Mises-Fisher
// distribution on the unit sphere S^{d-1} with unit mean direction mu and
// concentration kappa >= 0 (density proportional to exp(kappa mu . x)),
// by Wood's rejection sampler (A. T. A. Wood 1994, "Simulation of the von
// Mises Fisher distribution", Communications in Statistics - Simulation
// and Computation 23(1)):
//
//	b  = (d-1) / (2 kappa + sqrt(4 kappa^2 + (d-1)^2))
//	x0 = (1-b)/(1+b),  c = kappa x0 + (d-1) log(1 - x0^2)
//	repeat: Z ~ Beta((d-1)/2, (d-1)/2), U ~ U(0,1),
//	        W = (1 - (1+b) Z) / (1 - (1-b) Z)
//	until kappa W + (d-1) log(1 - x0 W) - c >= log U
//	x = W mu + sqrt(1 - W^2) v,  v uniform on the unit vectors orthogonal to mu.
//
// (b is written in the form that does not cancel for large kappa.) The Beta
// variate is S1/(S1+S2) with S1, S2 sums of d-1 squared standard normals.
// For d = 1 it returns mu with probability e^kappa/(e^kappa + e^-kappa),
// else -mu. kappa = 0 gives the uniform distribution. It panics if
// len(dst) != len(mu), kappa < 0 or mu has zero length; mu need not be
// exactly unit (it is normalised). It does not allocate.
func VonMisesFisher(dst, mu []float64, kappa float64, rng *rand.Rand) {
	d := len(mu)
	if len(dst) != d || d == 0 {
		panic("usf: von mises-fisher: length mismatch")
	}
	if !(kappa >= 0) || math.IsInf(kappa, 0) {
		panic("usf: von mises-fisher: kappa must be finite and >= 0")
	}
	nrm := math.Sqrt(vec.Dot(mu, mu))
	if nrm == 0 || math.IsNaN(nrm) || math.IsInf(nrm, 0) {
		panic("usf: von mises-fisher: mean direction has zero or non-finite length")
	}
	if d == 1 {
		p := 1 / (1 + math.Exp(-2*kappa))
		sign := 1.0
		if rng.Float64() >= p {
			sign = -1
		}
		dst[0] = sign * mu[0] / nrm
		return
	}
	m1 := float64(d - 1)
	b := m1 / (2*kappa + math.Sqrt(4*kappa*kappa+m1*m1))
	x0 := (1 - b) / (1 + b)
	c := kappa*x0 + m1*math.Log(1-x0*x0)
	var w float64
	for {
		var s1, s2 float64
		for range d - 1 {
			g := rng.NormFloat64()
			s1 += g * g
			g = rng.NormFloat64()
			s2 += g * g
		}
		z := s1 / (s1 + s2)
		w = (1 - (1+b)*z) / (1 - (1-b)*z)
		u := rng.Float64()
		if kappa*w+m1*math.Log(1-x0*w)-c >= math.Log(u) {
			break
		}
	}
	// v: a standard normal vector with its component along mu removed,
	// normalised (uniform on the unit sphere of the orthogonal complement).
	for {
		var along float64
		for i := range dst {
			dst[i] = rng.NormFloat64()
			along += dst[i] * mu[i]
		}
		along /= nrm * nrm
		var vv float64
		for i := range dst {
			dst[i] -= along * mu[i]
			vv += dst[i] * dst[i]
		}
		if vv > 1e-300 {
			r := math.Sqrt(math.Max(0, 1-w*w)) / math.Sqrt(vv)
			for i := range dst {
				dst[i] = w*mu[i]/nrm + r*dst[i]
			}
			return
		}
	}
}

// CandidateConfig configures Candidates. A nil *CandidateConfig means the
// zero value.
type CandidateConfig struct {
	// N is the number of vectors drawn around w (the set has N+1). 0 means
	// none: the set is {w}.
	N int
	// Kappa is the von Mises-Fisher concentration (larger is closer to
	// w; 0 is uniform on the sphere). Used unless Sigma > 0.
	Kappa float64
	// Sigma > 0 selects normal-then-normalise: each vector is
	// (w/||w|| + Sigma g)/||w/||w|| + Sigma g|| with g standard normal.
	Sigma float64
}

// Candidates returns a GPI candidate set around the task vector w: w itself
// (copied, first) and cfg.N unit vectors drawn around the direction
// w/||w||, by von Mises-Fisher sampling with concentration cfg.Kappa or,
// with cfg.Sigma > 0, by normal-then-normalise. The drawn vectors lie on
// the unit sphere, where the policy of z is scale-free anyway (pi_z is
// greedy in psi(s, ., z) . z). Errors wrap ErrDimension (empty w),
// ErrNonFinite, ErrConfig (negative N, Kappa or Sigma) or ErrZeroVector
// (w = 0 with N > 0).
func Candidates(w []float64, cfg *CandidateConfig, rng *rand.Rand) ([][]float64, error) {
	var c CandidateConfig
	if cfg != nil {
		c = *cfg
	}
	if len(w) == 0 {
		return nil, fmt.Errorf("usf: candidates: empty w: %w", ErrDimension)
	}
	for _, v := range w {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("usf: candidates: w: %w", ErrNonFinite)
		}
	}
	if c.N < 0 || !(c.Kappa >= 0) || !(c.Sigma >= 0) || math.IsInf(c.Kappa, 0) || math.IsInf(c.Sigma, 0) {
		return nil, fmt.Errorf("usf: candidates: config %+v: %w", c, ErrConfig)
	}
	out := make([][]float64, 0, c.N+1)
	out = append(out, append([]float64(nil), w...))
	if c.N == 0 {
		return out, nil
	}
	nrm := math.Sqrt(vec.Dot(w, w))
	if nrm == 0 {
		return nil, fmt.Errorf("usf: candidates: w = 0 has no direction: %w", ErrZeroVector)
	}
	if rng == nil {
		return nil, fmt.Errorf("usf: candidates: nil rng: %w", ErrConfig)
	}
	for range c.N {
		z := make([]float64, len(w))
		if c.Sigma > 0 {
			for {
				var ss float64
				for i := range z {
					z[i] = w[i]/nrm + c.Sigma*rng.NormFloat64()
					ss += z[i] * z[i]
				}
				if ss > 1e-300 {
					r := 1 / math.Sqrt(ss)
					for i := range z {
						z[i] *= r
					}
					break
				}
			}
		} else {
			VonMisesFisher(z, w, c.Kappa, rng)
		}
		out = append(out, z)
	}
	return out, nil
}
