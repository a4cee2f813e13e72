package usf

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/successor-go/successor/internal/vec"
	"github.com/successor-go/successor/skills"
)

// MaxCandidates bounds CandidateConfig.N.
const MaxCandidates = 1 << 20

// CandidateConfig configures Candidates. A nil *CandidateConfig means the
// zero value.
type CandidateConfig struct {
	// N is the number of vectors drawn around w (the set has N+1), at
	// most MaxCandidates. 0 means none: the set is {w}.
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
// w/||w||, by von Mises-Fisher sampling (skills.VonMisesFisher, Wood 1994)
// with concentration cfg.Kappa or,
// with cfg.Sigma > 0, by normal-then-normalise. The drawn vectors lie on
// the unit sphere, where the policy of z is scale-free anyway (pi_z is
// greedy in psi(s, ., z) . z). Errors wrap ErrDimension (empty w),
// ErrNonFinite, ErrConfig (N negative or above MaxCandidates, negative
// Kappa or Sigma) or ErrZeroVector
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
	if c.N < 0 || c.N > MaxCandidates || !(c.Kappa >= 0) || !(c.Sigma >= 0) || math.IsInf(c.Kappa, 0) || math.IsInf(c.Sigma, 0) {
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
			skills.VonMisesFisher(z, w, c.Kappa, rng)
		}
		out = append(out, z)
	}
	return out, nil
}
