package linalg_test

import (
	"errors"
	"fmt"
	"math/rand/v2"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/successor-go/successor/linalg"
)

func TestCannotReach(t *testing.T) {
	t.Parallel()
	// Hand-made chains; each expected row is derived by hand from the
	// drawing in the comment.
	for _, tc := range []struct {
		name   string
		p      *linalg.CSR
		target []bool
		want   int
	}{
		{
			// 0 -> 1 -> 2 -> 3, target {3}: every row reaches 3.
			name: "path",
			p: mustCSR(mat.NewDense(4, 4, []float64{
				0, 1, 0, 0,
				0, 0, 1, 0,
				0, 0, 0, 1,
				0, 0, 0, 0.5,
			})),
			target: []bool{false, false, false, true},
			want:   -1,
		},
		{
			// Drunkard's Walk transient block (Grinstead & Snell, Example
			// 11.13): rows 0 and 2 leak, row 1 reaches both.
			name:   "drunkard",
			p:      mustCSR(drunkQ),
			target: []bool{true, false, true},
			want:   -1,
		},
		{
			// 0 leaks and moves to 1; 1 <-> 2 is a closed class, so 1 and 2
			// cannot reach 0; the lowest is 1.
			name: "closed class",
			p: mustCSR(mat.NewDense(3, 3, []float64{
				0, 0.5, 0,
				0, 0, 1,
				0, 1, 0,
			})),
			target: []bool{true, false, false},
			want:   1,
		},
		{
			// 2 is a trap (self-loop); 0 and 1 flow into it, 3 leaks
			// alone: 0 is the lowest row that cannot reach 3.
			name: "trap",
			p: mustCSR(mat.NewDense(4, 4, []float64{
				0, 1, 0, 0,
				0, 0, 1, 0,
				0, 0, 1, 0,
				0, 0, 0, 0,
			})),
			target: []bool{false, false, false, true},
			want:   0,
		},
		{
			// A row with an edge to the target and one into a trap still
			// reaches the target.
			name: "branch",
			p: mustCSR(mat.NewDense(3, 3, []float64{
				0, 0.5, 0.5,
				0, 1, 0,
				0, 0, 0,
			})),
			target: []bool{false, false, true},
			want:   1,
		},
		{
			name:   "no target",
			p:      mustCSR(drunkQ),
			target: []bool{false, false, false},
			want:   0,
		},
		{
			name:   "empty",
			p:      mustCSRTriplets(0, nil),
			target: nil,
			want:   -1,
		},
		{
			// An explicitly stored zero is not an edge: 0 -> 1 has value 0.
			name:   "explicit zero",
			p:      mustCSRTriplets(2, []linalg.Triplet{{Row: 0, Col: 1, Val: 0}, {Row: 0, Col: 0, Val: 1}}),
			target: []bool{false, true},
			want:   0,
		},
		{
			// A negative entry is not an edge either.
			name:   "negative entry",
			p:      mustCSRTriplets(2, []linalg.Triplet{{Row: 0, Col: 1, Val: -0.5}}),
			target: []bool{false, true},
			want:   0,
		},
	} {
		t.Run(tc.name, func(t *testing.T) {
			target := append([]bool(nil), tc.target...)
			if got := linalg.CannotReach(tc.p, target); got != tc.want {
				t.Errorf("CannotReach = %d, want %d", got, tc.want)
			}
			for i := range target {
				if target[i] != tc.target[i] {
					t.Fatalf("CannotReach modified target[%d]", i)
				}
			}
		})
	}
}

func TestCannotReachPanics(t *testing.T) {
	t.Parallel()
	for _, tc := range []struct {
		name   string
		p      *linalg.CSR
		target []bool
	}{
		{"not square", mustCSR(mat.NewDense(2, 3, []float64{0, 1, 0, 0, 0, 1})), []bool{true, false}},
		{"target length", mustCSR(drunkQ), []bool{true, false}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			defer func() {
				r := recover()
				if s, ok := r.(string); !ok || !strings.HasPrefix(s, "linalg: cannot reach: ") {
					t.Errorf("recovered %v, want a linalg panic", r)
				}
			}()
			linalg.CannotReach(tc.p, tc.target)
		})
	}
}

// TestCannotReachRandom compares CannotReach on seeded random sparse
// sub-stochastic matrices with three independent references: the boolean
// transitive closure (Warshall's algorithm), the limit p^t -> 0 that holds
// exactly when every row reaches a leaking row (Grinstead & Snell,
// Introduction to Probability, ch. 11, Theorem 11.3), and Fundamental's
// ErrNotAbsorbing check.
func TestCannotReachRandom(t *testing.T) {
	t.Parallel()
	rnd := rand.New(rand.NewPCG(11, 3))
	var found, none int
	for trial := 0; trial < 400; trial++ {
		n := 1 + rnd.IntN(8)
		a := mat.NewDense(n, n, nil)
		target := make([]bool, n)
		for i := 0; i < n; i++ {
			// 1 to 3 successors with weights in [0.5, 1]; a row leaks (sum
			// 0.8) with probability 0.15, so closed classes are common.
			k := 1 + rnd.IntN(3)
			var sum float64
			for range k {
				j := rnd.IntN(n)
				w := 0.5 + 0.5*rnd.Float64()
				a.Set(i, j, a.At(i, j)+w)
				sum += w
			}
			mass := 1.0
			if rnd.Float64() < 0.15 {
				mass, target[i] = 0.8, true
			}
			for j := 0; j < n; j++ {
				a.Set(i, j, a.At(i, j)*mass/sum)
			}
		}
		p := mustCSR(a)
		got := linalg.CannotReach(p, target)

		// Warshall: reach[i][j] if j is reachable from i in zero or more steps.
		reach := make([][]bool, n)
		for i := range reach {
			reach[i] = make([]bool, n)
			reach[i][i] = true
			for j := 0; j < n; j++ {
				if a.At(i, j) > 0 {
					reach[i][j] = true
				}
			}
		}
		for k := 0; k < n; k++ {
			for i := 0; i < n; i++ {
				for j := 0; j < n; j++ {
					reach[i][j] = reach[i][j] || reach[i][k] && reach[k][j]
				}
			}
		}
		want := -1
		for i := n - 1; i >= 0; i-- {
			ok := false
			for j := 0; j < n; j++ {
				ok = ok || reach[i][j] && target[j]
			}
			if !ok {
				want = i
			}
		}
		if got != want {
			t.Fatalf("trial %d: CannotReach = %d, transitive closure says %d\n%v", trial, got, want, mat.Formatted(a))
		}

		// Theorem 11.3: p^t -> 0 iff every row reaches a leaking row. With
		// n <= 8, entries >= 0.8 * 0.5/3 and a leak of 0.2, a transient p
		// loses at least 0.2 (0.8 * 0.5/3)^7 > 1e-7 of the mass left in
		// every 8 steps (derived by hand), so after 2^32 steps less than
		// exp(-50) is left; a row in or leading only into a closed class
		// keeps mass 1, up to the rounding of 32 squarings (about
		// 2^32 * n * eps < 1e-5).
		pow := mat.DenseCopyOf(a)
		for range 32 {
			pow.Mul(pow, pow)
		}
		var maxMass float64
		for i := 0; i < n; i++ {
			maxMass = max(maxMass, mat.Sum(pow.RowView(i)))
		}
		if (got < 0) != (maxMass < 1e-6) {
			t.Fatalf("trial %d: CannotReach = %d but max row mass of p^(2^32) = %v", trial, got, maxMass)
		}
		if got >= 0 {
			if m := mat.Sum(pow.RowView(got)); m < 1-1e-5 {
				t.Fatalf("trial %d: row %d cannot reach a leak but p^(2^32) keeps only mass %v", trial, got, m)
			}
		}

		// Fundamental's check (leaking rows: sum below 1 - 1e-12 n, which
		// are exactly the target rows here).
		err := linalg.Fundamental(&mat.Dense{}, p)
		if got < 0 {
			if err != nil {
				t.Fatalf("trial %d: Fundamental: %v, but every row reaches a leak", trial, err)
			}
			none++
			continue
		}
		found++
		if !errors.Is(err, linalg.ErrNotAbsorbing) {
			t.Fatalf("trial %d: Fundamental error %v, want ErrNotAbsorbing", trial, err)
		}
		if s := fmt.Sprintf("transient state %d ", got); !strings.Contains(err.Error(), s) {
			t.Errorf("trial %d: Fundamental error %q does not name state %d", trial, err, got)
		}
	}
	// Both outcomes must be exercised for the comparison to mean anything.
	if found < 20 || none < 20 {
		t.Errorf("only %d non-absorbing and %d absorbing trials", found, none)
	}
}

func mustCSRTriplets(n int, tr []linalg.Triplet) *linalg.CSR {
	c, err := linalg.CSRFromTriplets(n, n, tr)
	if err != nil {
		panic(err)
	}
	return c
}
