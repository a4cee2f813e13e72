package usf

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/gpi"
	"github.com/successor-go/successor/internal/testtol"
	"github.com/successor-go/successor/internal/vec"
)

// The GPI adapter is a gpi.Source.
var _ gpi.Source = (*Source)(nil)

// TestSourceFastAndGeneric checks that the one-hot fast path (PsiState)
// and the generic path (an Observer writing e_s, then Psi) give the same
// bits, for the tabular USF, and that GPI over sources picks the best z.
func TestSourceFastAndGeneric(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 8))
	z, z2 := []float64{0.6, -0.8}, []float64{1, 0}
	l, _ := NewTabular(5, 3, [][]float64{z, z2}, 0.9, nil)
	for _, tab := range l.Tables {
		for i := range tab.Data {
			tab.Data[i] = rng.NormFloat64()
		}
	}
	fast, err := NewSource(l, z, nil)
	if err != nil {
		t.Fatal(err)
	}
	slow, err := NewSource(l, z, ObserverFunc{D: 5, F: func(dst []float64, s int) { OneHot{N: 5}.Observe(dst, s) }})
	if err != nil {
		t.Fatal(err)
	}
	if fast.fast == nil || slow.fast != nil {
		t.Fatal("fast path not chosen as documented")
	}
	a, c := make([]float64, 6), make([]float64, 6)
	for s := 0; s < 5; s++ {
		fast.Psi(a, s)
		slow.Psi(c, s)
		for i := range a {
			if a[i] != c[i] {
				t.Fatalf("state %d: fast %v, generic %v", s, a, c)
			}
		}
	}
	if n := testing.AllocsPerRun(10, func() { fast.Psi(a, 2); slow.Psi(c, 2) }); n != 0 {
		t.Fatalf("%v allocs, want 0", n)
	}
	// GPI over two sources: the action and source must maximise psi . w
	// over both (checked by brute force here).
	src2, _ := NewSource(l, z2, nil)
	w := []float64{0.3, 0.7}
	act, which, val := gpi.Act(w, 3, fast, src2)
	best, bi, ba := math.Inf(-1), -1, -1
	for i, src := range []*Source{fast, src2} {
		src.Psi(a, 3)
		for k := 0; k < 3; k++ {
			if q := vec.Dot(a[k*2:k*2+2], w); q > best {
				best, bi, ba = q, i, k
			}
		}
	}
	if act != ba || which != bi || math.Abs(val-best) > testtol.Exact {
		t.Fatalf("gpi.Act = (%d, %d, %v), brute force (%d, %d, %v)", act, which, val, ba, bi, best)
	}
	if _, err := NewSource(l, []float64{1}, nil); !errors.Is(err, ErrDimension) {
		t.Errorf("short z: err %v", err)
	}
	if _, err := NewSource(l, z, OneHot{N: 4}); !errors.Is(err, ErrDimension) {
		t.Errorf("observer size: err %v", err)
	}
	if _, err := NewSource(l, []float64{math.NaN(), 0}, nil); !errors.Is(err, ErrNonFinite) {
		t.Errorf("NaN z: err %v", err)
	}
	srcs, err := Sources(l, [][]float64{z, z2}, nil)
	if err != nil || len(srcs) != 2 {
		t.Fatalf("Sources: %v", err)
	}
}

func TestCandidates(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 9))
	w := []float64{3, 0, 4}
	for _, cfg := range []*CandidateConfig{{N: 50, Kappa: 50}, {N: 50, Sigma: 0.1}} {
		c, err := Candidates(w, cfg, rng)
		if err != nil {
			t.Fatal(err)
		}
		if len(c) != 51 {
			t.Fatalf("%d candidates, want 51", len(c))
		}
		for i, v := range w {
			if c[0][i] != v {
				t.Fatal("w is not the first candidate, unchanged")
			}
		}
		var mean, sumSq float64
		for _, z := range c[1:] {
			if math.Abs(vec.Dot(z, z)-1) > testtol.Exact {
				t.Fatal("candidate not on the unit sphere")
			}
			cos := vec.Dot(z, []float64{0.6, 0, 0.8})
			mean += cos / 50
			sumSq += cos * cos / 50
		}
		// Expected mean cosine to w/||w||: kappa 50 in d 3, E[mu.x] =
		// coth 50 - 1/50 = 0.98 (Mardia & Jupp 2000, section 9.3.2, as in
		// skills.TestVonMisesFisherMean); sigma 0.1, E[cos] = 1 - sigma^2 (d-1)/2
		// + O(sigma^4) = 0.99 (derived by hand: expand (1 + sigma g_1) /
		// ||e_1 + sigma g|| to second order; a 2e6-draw simulation gives
		// 0.99000, so the remainder is far below the 1e-3 allowed).
		// Tolerance 4 standard errors of the mean of 50 draws, plus 1e-3.
		want := 1 - cfg.Sigma*cfg.Sigma
		if cfg.Sigma == 0 {
			want = 1/math.Tanh(cfg.Kappa) - 1/cfg.Kappa
		}
		se := math.Sqrt(max(sumSq-mean*mean, 0) / 50)
		if math.Abs(mean-want) > 4*se+1e-3 {
			t.Errorf("config %+v: mean cosine to w %v, want %v (se %.2g)", cfg, mean, want, se)
		}
	}
	if c, err := Candidates(w, nil, nil); err != nil || len(c) != 1 {
		t.Errorf("nil config: %v, %d", err, len(c))
	}
	for _, tc := range []struct {
		w   []float64
		cfg *CandidateConfig
		err error
	}{
		{nil, nil, ErrDimension},
		{[]float64{0, 0}, &CandidateConfig{N: 1}, ErrZeroVector},
		{[]float64{1, math.Inf(1)}, nil, ErrNonFinite},
		{w, &CandidateConfig{N: -1}, ErrConfig},
		{w, &CandidateConfig{N: 1, Kappa: -1}, ErrConfig},
	} {
		if _, err := Candidates(tc.w, tc.cfg, rng); !errors.Is(err, tc.err) {
			t.Errorf("w %v cfg %+v: err %v, want %v", tc.w, tc.cfg, err, tc.err)
		}
	}
}
