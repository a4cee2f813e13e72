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
