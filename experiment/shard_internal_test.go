package experiment

import (
	"math/rand/v2"
	"slices"
	"testing"
)

// makespan returns the largest total cost of a bin.
func makespan(costs, bin []int, n int) int {
	load := make([]int, n)
	worst := 0
	for i, c := range costs {
		load[bin[i]] += c
		worst = max(worst, load[bin[i]])
	}
	return worst
}

// bestMakespan returns the smallest makespan of any assignment of the
// costs to n bins, by enumerating all n^len(costs) of them.
func bestMakespan(costs []int, n int) int {
	bin := make([]int, len(costs))
	best := -1
	for {
		if m := makespan(costs, bin, n); best < 0 || m < best {
			best = m
		}
		i := 0
		for ; i < len(bin); i++ {
			if bin[i]++; bin[i] < n {
				break
			}
			bin[i] = 0
		}
		if i == len(bin) {
			return best
		}
	}
}

// TestAssignGraham checks the longest-processing-time rule against the
// best assignment found by enumeration: its makespan is at most
// (4/3 - 1/(3n)) times the best (Graham 1969, "Bounds on multiprocessing
// timing anomalies", SIAM J. Appl. Math. 17(2), 1969), on seeded
// random costs, and reaches the bound on Graham's tight example.
func TestAssignGraham(t *testing.T) {
	// Tight example, derived by hand: costs 3, 3, 2, 2, 2 on 2 bins. LPT
	// places 3 | 3, then 2 on bin 0 (5 | 3), 2 on bin 1 (5 | 5), 2 on
	// bin 0: makespan 7. The best is 3+3 | 2+2+2 = 6, and
	// (4/3 - 1/6) x 6 = 7.
	costs := []int{3, 3, 2, 2, 2}
	order, bin := assign(costs, 2)
	if m := makespan(costs, bin, 2); m != 7 || bestMakespan(costs, 2) != 6 {
		t.Errorf("tight example: makespan %d (want 7), best %d (want 6)", m, bestMakespan(costs, 2))
	}
	if want := []int{0, 1, 2, 3, 4}; !slices.Equal(order, want) {
		t.Errorf("order %v, want %v", order, want)
	}
	if want := []int{0, 1, 0, 1, 0}; !slices.Equal(bin, want) {
		t.Errorf("bins %v, want %v", bin, want)
	}

	rng := rand.New(rand.NewPCG(1, 2))
	for trial := range 300 {
		n := 2 + trial%3
		k := 2 + rng.IntN(6)
		costs := make([]int, k)
		for i := range costs {
			costs[i] = 1 + rng.IntN(20)
		}
		_, bin := assign(costs, n)
		got, best := makespan(costs, bin, n), bestMakespan(costs, n)
		if 3*n*got > (4*n-1)*best {
			t.Fatalf("costs %v on %d bins: makespan %d above (4/3 - 1/(3n)) x %d", costs, n, got, best)
		}
	}
}
