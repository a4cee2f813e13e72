package skills

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/internal/vec"
)

// TestVonMisesFisherMean checks the mean of mu . x under Wood's sampler
// against the closed form for the sphere S^2 (d = 3):
// E[mu . x] = coth(kappa) - 1/kappa (Mardia & Jupp 2000, Directional
// Statistics, section 9.3.2, A_3(kappa)), and for kappa = 0 the uniform
// mean 0; and for d = 2 against A_2(kappa) = I_1(kappa)/I_0(kappa) with
// I_1(2)/I_0(2) = 1.590636854637329/2.279585302336067 (Abramowitz &
// Stegun, Table 9.8, from memory). 20000 draws; tolerance 4 standard
// errors of the sample mean (the variance of mu . x is at most 1).
func TestVonMisesFisherMean(t *testing.T) {
	coth := func(k float64) float64 { return math.Cosh(k) / math.Sinh(k) }
	for _, tc := range []struct {
		d     int
		kappa float64
		want  float64
	}{
		{3, 0, 0},
		{3, 2, coth(2) - 0.5},
		{3, 20, coth(20) - 1.0/20},
		{2, 2, 1.590636854637329 / 2.279585302336067},
		{1, 1, math.Tanh(1)}, // two points: (e - 1/e)/(e + 1/e)
	} {
		rng := rand.New(rand.NewPCG(uint64(tc.d), uint64(tc.kappa*10)))
		mu := randomUnit(rng, tc.d)
		x := make([]float64, tc.d)
		const n = 20000
		var sum, sumSq float64
		for range n {
			VonMisesFisher(x, mu, tc.kappa, rng)
			if math.Abs(vec.Dot(x, x)-1) > 1e-12 {
				t.Fatalf("d %d: draw has norm^2 %v", tc.d, vec.Dot(x, x))
			}
			c := vec.Dot(mu, x)
			sum += c
			sumSq += c * c
		}
		mean := sum / n
		se := math.Sqrt((sumSq/n - mean*mean) / n)
		if math.Abs(mean-tc.want) > 4*se+1e-12 {
			t.Errorf("d %d kappa %v: mean %v, want %v (se %.2g)", tc.d, tc.kappa, mean, tc.want, se)
		}
	}
}

// randomUnit returns a uniformly random unit vector of length d (a
// normalised standard normal vector, common practice).
func randomUnit(rng *rand.Rand, d int) []float64 {
	z := make([]float64, d)
	var ss float64
	for j := range z {
		z[j] = rng.NormFloat64()
		ss += z[j] * z[j]
	}
	for j := range z {
		z[j] /= math.Sqrt(ss)
	}
	return z
}

// TestVonMisesFisherAllocs checks that a draw allocates nothing.
func TestVonMisesFisherAllocs(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	mu := randomUnit(rng, 16)
	x := make([]float64, 16)
	if n := testing.AllocsPerRun(100, func() { VonMisesFisher(x, mu, 10, rng) }); n != 0 {
		t.Errorf("VonMisesFisher allocates %v times per draw, want 0", n)
	}
}

// TestVonMisesFisherPanics checks the documented panics.
func TestVonMisesFisherPanics(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 3))
	for _, tc := range []struct {
		name    string
		dst, mu []float64
		kappa   float64
	}{
		{"length", make([]float64, 2), []float64{1, 0, 0}, 1},
		{"empty", nil, nil, 1},
		{"negative kappa", make([]float64, 2), []float64{1, 0}, -1},
		{"zero mean", make([]float64, 2), []float64{0, 0}, 1},
	} {
		func() {
			defer func() {
				if recover() == nil {
					t.Errorf("%s: no panic", tc.name)
				}
			}()
			VonMisesFisher(tc.dst, tc.mu, tc.kappa, rng)
		}()
	}
}
