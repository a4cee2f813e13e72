package sf

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/successor-go/successor/internal/vec"
)

// bruteCV returns the mean squared leave-one-group-out error of ridge
// regression with penalty lam by refitting without each group: the groups
// are expanded into counts[c] samples each (features row c, rewards summing
// to sums[c]) and fitted by InferTask (Householder QR of the augmented
// system, another solver than RidgeCV's Cholesky).
func bruteCV(t *testing.T, x *mat.Dense, counts []int, rewards [][]float64, lam float64) float64 {
	t.Helper()
	m, d := x.Dims()
	var total float64
	for out := range m {
		var rows []float64
		var ys []float64
		for c := range m {
			if c == out {
				continue
			}
			for k := range counts[c] {
				rows = append(rows, x.RawRowView(c)...)
				ys = append(ys, rewards[c][k])
			}
		}
		w := make([]float64, d)
		if _, err := InferTask(w, mat.NewDense(len(ys), d, rows), ys, lam, nil); err != nil {
			t.Fatal(err)
		}
		var mean float64
		for _, y := range rewards[out] {
			mean += y
		}
		mean /= float64(counts[out])
		e := mean - vec.Dot(x.RawRowView(out), w)
		total += e * e
	}
	return total / float64(m)
}

// TestRidgeCV compares the closed-form leave-one-group-out error of
// RidgeCV (Sherman-Morrison; Hastie, Tibshirani & Friedman, The Elements
// of Statistical Learning, 2nd ed., section 7.10) with refitting without
// each group, for one penalty at a time, and checks that on a grid it
// returns the penalty of the smallest refitted error. Tolerance 1e-9
// relative (two exact solves of well-conditioned systems).
func TestRidgeCV(t *testing.T) {
	grid := []float64{1e-3, 1e-2, 0.1, 0.3, 1, 3, 10, 30, 100}
	for seed := uint64(1); seed <= 4; seed++ {
		rng := rand.New(rand.NewPCG(seed, 7))
		m, d := 12+int(seed)*3, 3+int(seed)
		x := randomDesign(rng, m, d)
		w := make([]float64, d)
		for k := range w {
			w[k] = rng.NormFloat64()
		}
		noise := 0.2 * float64(seed*seed)
		counts := make([]int, m)
		countsF := make([]float64, m)
		sums := make([]float64, m)
		rewards := make([][]float64, m)
		for c := range m {
			counts[c] = 1 + rng.IntN(5)
			countsF[c] = float64(counts[c])
			for range counts[c] {
				r := vec.Dot(x.RawRowView(c), w) + noise*rng.NormFloat64()
				rewards[c] = append(rewards[c], r)
				sums[c] += r
			}
		}
		bestBrute, argBrute := math.Inf(1), 0.0
		for _, lam := range grid {
			got, cv, err := RidgeCV(x, countsF, sums, []float64{lam})
			if err != nil {
				t.Fatal(err)
			}
			want := bruteCV(t, x, counts, rewards, lam)
			if got != lam || math.Abs(cv-want) > 1e-9*(1+want) {
				t.Errorf("seed %d lambda %v: closed form %v (lambda %v), refitted %v", seed, lam, cv, got, want)
			}
			if want <= bestBrute {
				bestBrute, argBrute = want, lam
			}
		}
		lam, cv, err := RidgeCV(x, countsF, sums, grid)
		if err != nil {
			t.Fatal(err)
		}
		if lam != argBrute || math.Abs(cv-bestBrute) > 1e-9*(1+bestBrute) {
			t.Errorf("seed %d: chose lambda %v (CV %v), refitting chooses %v (CV %v)", seed, lam, cv, argBrute, bestBrute)
		}
	}
}

// TestRidgeCVTies checks the documented tie rule: with every group's
// reward equal to 0, w = 0 for every penalty and every CV is 0, so the
// last grid entry wins (derived by hand: A w = 0 gives w = 0).
func TestRidgeCVTies(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 3))
	x := randomDesign(rng, 8, 3)
	ones := []float64{1, 1, 1, 1, 1, 1, 1, 1}
	lam, cv, err := RidgeCV(x, ones, make([]float64, 8), []float64{0.1, 1, 10})
	if err != nil {
		t.Fatal(err)
	}
	if lam != 10 || cv != 0 {
		t.Errorf("lambda %v, CV %v; want 10 and 0", lam, cv)
	}
}

func TestRidgeCVErrors(t *testing.T) {
	x := mat.NewDense(2, 2, []float64{1, 0, 0, 1})
	one := []float64{1, 1}
	grid := []float64{1}
	for _, tc := range []struct {
		name               string
		x                  mat.Matrix
		counts, sums, grid []float64
		want               error
	}{
		{"counts length", x, []float64{1}, one, grid, ErrDimension},
		{"sums length", x, one, []float64{1}, grid, ErrDimension},
		{"empty grid", x, one, one, nil, ErrDimension},
		{"zero penalty", x, one, one, []float64{0}, ErrConfig},
		{"infinite penalty", x, one, one, []float64{math.Inf(1)}, ErrConfig},
		{"zero count", x, []float64{1, 0}, one, grid, ErrConfig},
		{"NaN sum", x, one, []float64{1, math.NaN()}, grid, ErrNonFinite},
		{"NaN feature", mat.NewDense(2, 2, []float64{1, math.NaN(), 0, 1}), one, one, grid, ErrNonFinite},
	} {
		if _, _, err := RidgeCV(tc.x, tc.counts, tc.sums, tc.grid); !errors.Is(err, tc.want) {
			t.Errorf("%s: error %v, want %v", tc.name, err, tc.want)
		}
	}
}
