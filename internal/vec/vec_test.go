package vec

import (
	"math"
	"math/rand/v2"
	"testing"
)

func TestDot(t *testing.T) {
	t.Parallel()
	const big = 1 << 53 // 2^53: adding 1 to it rounds back to 2^53
	for _, tc := range []struct {
		name string
		x, y []float64
		want float64 // derived by hand, see each comment
	}{
		{"empty", nil, nil, 0},
		{"one", []float64{3}, []float64{-2}, -6},
		// 1*4 + 2*5 + 3*6 = 32.
		{"tail only", []float64{1, 2, 3}, []float64{4, 5, 6}, 32},
		// 1 + 4 + 9 + ... + 49 = 140 (sum of squares 1..7).
		{"block and tail", []float64{1, 2, 3, 4, 5, 6, 7}, []float64{1, 2, 3, 4, 5, 6, 7}, 140},
		// y longer than x: only len(x) entries count.
		{"y longer", []float64{1, 1}, []float64{2, 3, 100}, 5},
		// The order is visible: s0 = 2^53, s1 = 1, s2 = 1, s3 = -2^53, so
		// (s0 + s1) + (s2 + s3) = 2^53 + (1 - 2^53) = 1 (2^53 + 1 rounds to
		// 2^53, 1 - 2^53 is exact), where a left-to-right sum gives
		// ((2^53 + 1) + 1) - 2^53 = 0.
		{"fixed order", []float64{big, 1, 1, -big}, []float64{1, 1, 1, 1}, 1},
		// The tail goes to s0: s0 = 2^53 + 1, which rounds to 2^53, and
		// s1 = -2^53, so the result is 0 (left to right it is 1).
		{"tail into s0", []float64{big, -big, 0, 0, 1}, []float64{1, 1, 1, 1, 1}, 0},
	} {
		if got := Dot(tc.x, tc.y); math.Float64bits(got) != math.Float64bits(tc.want) {
			t.Errorf("%s: Dot = %v, want %v", tc.name, got, tc.want)
		}
	}
}

// TestDotClose compares Dot with a plain left-to-right sum on seeded
// random vectors: they may differ only by rounding (relative 1e-13 of
// sum |x_i y_i| for n <= 200, common practice for a sum of n terms).
func TestDotClose(t *testing.T) {
	t.Parallel()
	rng := rand.New(rand.NewPCG(3, 4))
	for trial := 0; trial < 200; trial++ {
		n := rng.IntN(200)
		x, y := make([]float64, n), make([]float64, n)
		var plain, abs float64
		for i := range x {
			x[i], y[i] = rng.NormFloat64(), rng.NormFloat64()
			plain += x[i] * y[i]
			abs += math.Abs(x[i] * y[i])
		}
		if got := Dot(x, y); math.Abs(got-plain) > 1e-13*abs {
			t.Fatalf("n = %d: Dot = %v, plain sum %v", n, got, plain)
		}
	}
}

func TestDotPanics(t *testing.T) {
	t.Parallel()
	defer func() {
		if recover() == nil {
			t.Error("Dot with len(y) < len(x) did not panic")
		}
	}()
	Dot([]float64{1, 2}, []float64{1})
}

func TestDotAllocs(t *testing.T) {
	x, y := make([]float64, 64), make([]float64, 64)
	if n := testing.AllocsPerRun(100, func() { Dot(x, y) }); n != 0 {
		t.Errorf("Dot allocates %v times per call", n)
	}
	if n := testing.AllocsPerRun(100, func() { DotSeq(x, y) }); n != 0 {
		t.Errorf("DotSeq allocates %v times per call", n)
	}
	rng := rand.New(rand.NewPCG(1, 1))
	if n := testing.AllocsPerRun(100, func() { ArgmaxReservoir(x, rng) }); n != 0 {
		t.Errorf("ArgmaxReservoir allocates %v times per call", n)
	}
}

func BenchmarkDot(b *testing.B) {
	x, y := make([]float64, 64), make([]float64, 64)
	for i := range x {
		x[i], y[i] = float64(i), 1/float64(i+1)
	}
	b.ReportAllocs()
	var s float64
	for b.Loop() {
		s += Dot(x, y)
	}
	_ = s
}

func TestArgmax(t *testing.T) {
	t.Parallel()
	nan := math.NaN()
	for _, tc := range []struct {
		name string
		x    []float64
		want int // derived by hand: the first index of the largest value
	}{
		{"one", []float64{-3}, 0},
		{"last", []float64{1, 2, 3}, 2},
		{"first", []float64{3, 2, 1}, 0},
		{"tie to the lowest", []float64{0, 5, 1, 5, 5}, 1},
		{"all equal", []float64{2, 2, 2}, 0},
		{"infinities", []float64{math.Inf(-1), math.Inf(1), 0}, 1},
		// NaN compares false: it is passed over, and wins only at index 0.
		{"nan passed over", []float64{1, nan, 3, nan}, 2},
		{"nan first", []float64{nan, 1, 2}, 0},
	} {
		if got := Argmax(tc.x); got != tc.want {
			t.Errorf("%s: Argmax(%v) = %d, want %d", tc.name, tc.x, got, tc.want)
		}
		rng := rand.New(rand.NewPCG(1, 2))
		if n := countTies(tc.x); n <= 1 {
			if got := ArgmaxRandom(tc.x, rng); got != tc.want {
				t.Errorf("%s: ArgmaxRandom(%v) = %d, want %d", tc.name, tc.x, got, tc.want)
			}
		}
	}
	defer func() {
		if recover() == nil {
			t.Error("Argmax of an empty slice did not panic")
		}
	}()
	Argmax(nil)
}

func countTies(x []float64) int {
	var n int
	for _, v := range x {
		if v == x[Argmax(x)] {
			n++
		}
	}
	return n
}

// TestArgmaxRandom checks that ArgmaxRandom picks only tied maxima, each
// about equally often, and draws from rng only on a tie.
func TestArgmaxRandom(t *testing.T) {
	t.Parallel()
	rng := rand.New(rand.NewPCG(5, 6))
	x := []float64{1, 4, 0, 4, 4, -1}
	const n = 30000
	counts := make([]int, len(x))
	for range n {
		counts[ArgmaxRandom(x, rng)]++
	}
	// Each of the three tied indices is drawn with probability 1/3: the
	// count is binomial with mean n/3 and standard deviation
	// sqrt(n (1/3)(2/3)) = 81.6 (derived by hand); allow 4 of them.
	for i, c := range counts {
		want := 0.0
		if x[i] == 4 {
			want = n / 3.0
		}
		if math.Abs(float64(c)-want) > 4*math.Sqrt(n*(1.0/3)*(2.0/3)) {
			t.Errorf("index %d drawn %d times of %d, want about %.0f", i, c, n, want)
		}
	}
	// Without a tie the generator is not used: the next draws match a
	// generator with the same seed that was never touched.
	a, b := rand.New(rand.NewPCG(7, 8)), rand.New(rand.NewPCG(7, 8))
	if got := ArgmaxRandom([]float64{0, 2, 1}, a); got != 1 {
		t.Errorf("ArgmaxRandom without a tie = %d, want 1", got)
	}
	if a.Uint64() != b.Uint64() {
		t.Error("ArgmaxRandom drew from the generator without a tie")
	}
}

// TestSampleSphere checks unit length and the first two moments of the
// uniform distribution on the sphere in R^d: E z = 0 and E z z^T = I/d
// (derived by hand: by symmetry the mean vanishes, the off-diagonal
// moments vanish and the d equal diagonal ones sum to E|z|^2 = 1), each
// within 4 standard errors (var z_i = 1/d, and var z_i z_j <= E z_i^2 = 1/d
// since z_j^2 <= 1).
func TestSampleSphere(t *testing.T) {
	t.Parallel()
	rng := rand.New(rand.NewPCG(9, 10))
	for _, d := range []int{1, 2, 3, 7} {
		const n = 20000
		z := make([]float64, d)
		mean := make([]float64, d)
		second := make([]float64, d*d)
		for range n {
			SampleSphere(z, rng)
			if nrm := math.Sqrt(Dot(z, z)); math.Abs(nrm-1) > 1e-15 {
				t.Fatalf("d = %d: |z| = %v", d, nrm)
			}
			for i := range z {
				mean[i] += z[i] / n
				for j := range z {
					second[i*d+j] += z[i] * z[j] / n
				}
			}
		}
		se := 4 / math.Sqrt(n*float64(d))
		for i := range z {
			if math.Abs(mean[i]) > se {
				t.Errorf("d = %d: mean[%d] = %v", d, i, mean[i])
			}
			for j := range z {
				want := 0.0
				if i == j {
					want = 1 / float64(d)
				}
				if math.Abs(second[i*d+j]-want) > se+1e-12 {
					t.Errorf("d = %d: E z_%d z_%d = %v, want %v", d, i, j, second[i*d+j], want)
				}
			}
		}
	}
}

// TestDotSeq checks the left-to-right order on the cases where it differs
// from Dot's (derived by hand, see each comment).
func TestDotSeq(t *testing.T) {
	t.Parallel()
	const big = 1 << 53
	for _, tc := range []struct {
		name string
		x, y []float64
		want float64
	}{
		{"empty", nil, nil, 0},
		// 1*4 + 2*5 + 3*6 = 32.
		{"three", []float64{1, 2, 3}, []float64{4, 5, 6}, 32},
		{"y longer", []float64{1, 1}, []float64{2, 3, 100}, 5},
		// ((2^53 + 1) + 1) - 2^53: each 2^53 + 1 rounds back to 2^53, so 0
		// (Dot gives 1 on the same vectors).
		{"left to right", []float64{big, 1, 1, -big}, []float64{1, 1, 1, 1}, 0},
		// (2^53 - 2^53) + 1 = 1 (Dot gives 0).
		{"tail", []float64{big, -big, 0, 0, 1}, []float64{1, 1, 1, 1, 1}, 1},
	} {
		if got := DotSeq(tc.x, tc.y); math.Float64bits(got) != math.Float64bits(tc.want) {
			t.Errorf("%s: DotSeq = %v, want %v", tc.name, got, tc.want)
		}
	}
}

// TestArgmaxReservoir checks the lowest index with a nil rng, uniform
// choice among tied maxima, and the draws it makes: one rng.IntN(j) for
// the j-th entry equal to the running best (j >= 2), none otherwise.
func TestArgmaxReservoir(t *testing.T) {
	t.Parallel()
	nan, inf := math.NaN(), math.Inf(-1)
	for _, tc := range []struct {
		name string
		x    []float64
		want int // derived by hand: the first index of the largest value
	}{
		{"empty", nil, 0},
		{"last", []float64{1, 2, 3}, 2},
		{"tie to the lowest", []float64{0, 5, 1, 5, 5}, 1},
		{"nan passed over", []float64{nan, 1, nan, 3}, 3},
		{"all -Inf", []float64{inf, inf}, 0},
	} {
		if got := ArgmaxReservoir(tc.x, nil); got != tc.want {
			t.Errorf("%s: ArgmaxReservoir(%v, nil) = %d, want %d", tc.name, tc.x, got, tc.want)
		}
	}
	rng := rand.New(rand.NewPCG(5, 6))
	x := []float64{1, 4, 0, 4, 4, -1}
	const n = 30000
	counts := make([]int, len(x))
	for range n {
		counts[ArgmaxReservoir(x, rng)]++
	}
	// As in TestArgmaxRandom: binomial counts with mean n/3 and standard
	// deviation 81.6 (derived by hand); allow 4 of them.
	for i, c := range counts {
		want := 0.0
		if x[i] == 4 {
			want = n / 3.0
		}
		if math.Abs(float64(c)-want) > 4*math.Sqrt(n*(1.0/3)*(2.0/3)) {
			t.Errorf("index %d drawn %d times of %d, want about %.0f", i, c, n, want)
		}
	}
	// The draws: {3, 3, 1, 3} ties at index 1 (IntN(2)) and index 3
	// (IntN(3)); replaying them on a twin generator gives the same choice
	// and leaves both generators at the same point.
	a, b := rand.New(rand.NewPCG(7, 8)), rand.New(rand.NewPCG(7, 8))
	got := ArgmaxReservoir([]float64{3, 3, 1, 3}, a)
	want := 0
	if b.IntN(2) == 0 {
		want = 1
	}
	if b.IntN(3) == 0 {
		want = 3
	}
	if got != want || a.Uint64() != b.Uint64() {
		t.Errorf("ArgmaxReservoir = %d, want %d with two draws", got, want)
	}
}
