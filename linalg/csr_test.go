package linalg_test

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/successor-go/successor/linalg"
)

func TestCSRFromTriplets(t *testing.T) {
	c, err := linalg.CSRFromTriplets(3, 4, []linalg.Triplet{
		{2, 3, 1}, {0, 1, 2}, {2, 3, 0.5}, {1, 0, 0}, {0, 0, -1},
	})
	if err != nil {
		t.Fatal(err)
	}
	// Derived by hand: duplicates (2,3) summed to 1.5, the explicit zero kept.
	want := mat.NewDense(3, 4, []float64{-1, 2, 0, 0, 0, 0, 0, 0, 0, 0, 0, 1.5})
	if !mat.Equal(c.ToDense(), want) || !mat.Equal(c, want) {
		t.Errorf("got %v", mat.Formatted(c.ToDense()))
	}
	if c.NNZ() != 4 {
		t.Errorf("NNZ = %d, want 4", c.NNZ())
	}
	if ind, val := c.Row(2); len(ind) != 1 || ind[0] != 3 || val[0] != 1.5 {
		t.Errorf("Row(2) = %v %v", ind, val)
	}
	if !mat.Equal(c.T(), want.T()) {
		t.Error("T differs")
	}
	x := []float64{1, 2, 3, 4}
	y := make([]float64, 3)
	c.MulVecTo(y, x)
	var ref mat.VecDense
	ref.MulVec(want, mat.NewVecDense(4, x))
	if !floatsEqual(y, ref.RawVector().Data) {
		t.Errorf("MulVecTo = %v, want %v", y, ref.RawVector().Data)
	}
	for _, tc := range []struct {
		name string
		r, c int
		t    []linalg.Triplet
		want error
	}{
		{"row out of range", 2, 2, []linalg.Triplet{{2, 0, 1}}, linalg.ErrDimension},
		{"negative col", 2, 2, []linalg.Triplet{{0, -1, 1}}, linalg.ErrDimension},
		{"negative size", -1, 2, nil, linalg.ErrDimension},
		{"NaN", 2, 2, []linalg.Triplet{{0, 0, math.NaN()}}, linalg.ErrNonFinite},
		{"overflowing sum", 2, 2, []linalg.Triplet{{0, 0, math.MaxFloat64}, {0, 0, math.MaxFloat64}}, linalg.ErrNonFinite},
	} {
		if _, err := linalg.CSRFromTriplets(tc.r, tc.c, tc.t); !errors.Is(err, tc.want) {
			t.Errorf("%s: got %v, want %v", tc.name, err, tc.want)
		}
	}
}

func TestNewCSR(t *testing.T) {
	if _, err := linalg.NewCSR(2, 2, []int{0, 1, 2}, []int{1, 0}, []float64{1, 1}); err != nil {
		t.Errorf("valid: %v", err)
	}
	for _, tc := range []struct {
		name string
		r, c int
		ptr  []int
		ind  []int
		val  []float64
		want error
	}{
		{"ptr length", 2, 2, []int{0, 1}, []int{0}, []float64{1}, linalg.ErrDimension},
		{"ptr start", 1, 2, []int{1, 1}, []int{0}, []float64{1}, linalg.ErrDimension},
		{"ptr decreasing", 2, 2, []int{0, 2, 1}, []int{0, 1}, []float64{1, 1}, linalg.ErrDimension},
		{"ptr beyond", 2, 2, []int{0, 3, 2}, []int{0, 1}, []float64{1, 1}, linalg.ErrDimension},
		{"unsorted", 1, 3, []int{0, 2}, []int{2, 1}, []float64{1, 1}, linalg.ErrDimension},
		{"duplicate", 1, 3, []int{0, 2}, []int{1, 1}, []float64{1, 1}, linalg.ErrDimension},
		{"col range", 1, 3, []int{0, 1}, []int{3}, []float64{1}, linalg.ErrDimension},
		{"ind/val length", 1, 3, []int{0, 1}, []int{0}, []float64{1, 2}, linalg.ErrDimension},
		{"Inf", 1, 3, []int{0, 1}, []int{0}, []float64{math.Inf(1)}, linalg.ErrNonFinite},
		{"negative rows", -1, 3, []int{0}, nil, nil, linalg.ErrDimension},
		{"huge rows", math.MaxInt, 3, []int{0}, nil, nil, linalg.ErrDimension},
	} {
		if _, err := linalg.NewCSR(tc.r, tc.c, tc.ptr, tc.ind, tc.val); !errors.Is(err, tc.want) {
			t.Errorf("%s: got %v, want %v", tc.name, err, tc.want)
		}
	}
}

func TestCSRPanics(t *testing.T) {
	c := linalg.GridWalk(2, 2)
	buf := make([]float64, 8)
	for name, f := range map[string]func(){
		"At out of range": func() { c.At(4, 0) },
		"MulVecTo short":  func() { c.MulVecTo(make([]float64, 3), make([]float64, 4)) },
		"MulVecTo alias":  func() { c.MulVecTo(buf[:4], buf[2:6]) },
	} {
		func() {
			defer func() {
				if recover() == nil {
					t.Errorf("%s: no panic", name)
				}
			}()
			f()
		}()
	}
	// Disjoint halves of one array are fine.
	c.MulVecTo(buf[:4], buf[4:])
}

func TestMulVecToAllocs(t *testing.T) {
	c := linalg.GridWalk(20, 20)
	x, y := make([]float64, 400), make([]float64, 400)
	if a := testing.AllocsPerRun(10, func() { c.MulVecTo(y, x) }); a != 0 {
		t.Errorf("MulVecTo allocates %v times", a)
	}
}

// TestGridWalk checks the documented structure: stochastic, symmetric,
// bandwidth cols, and the hand-derived corner and edge self-loops.
func TestGridWalk(t *testing.T) {
	for _, sz := range [][2]int{{1, 1}, {1, 5}, {4, 1}, {3, 4}, {6, 6}} {
		p := linalg.GridWalk(sz[0], sz[1])
		if err := linalg.CheckStochastic(p, 1e-15); err != nil {
			t.Errorf("%v: %v", sz, err)
		}
		d := p.ToDense()
		if !mat.Equal(d, d.T()) {
			t.Errorf("%v: not symmetric", sz)
		}
		n, _ := p.Dims()
		for i := 0; i < n; i++ {
			ind, _ := p.Row(i)
			for _, j := range ind {
				if j-i > sz[1] || i-j > sz[1] {
					t.Errorf("%v: entry (%d,%d) outside the band", sz, i, j)
				}
			}
		}
		round, err := linalg.CSRFromDense(d)
		if err != nil || !mat.Equal(round, p) {
			t.Errorf("%v: dense round trip: %v", sz, err)
		}
	}
	p := linalg.GridWalk(3, 4)
	// Derived by hand: corner keeps 1/2, edge 1/4, interior 0; 1x1 keeps 1.
	for _, c := range []struct {
		s    int
		want float64
	}{{0, 0.5}, {1, 0.25}, {5, 0}, {11, 0.5}} {
		if got := p.At(c.s, c.s); got != c.want {
			t.Errorf("P[%d][%d] = %v, want %v", c.s, c.s, got, c.want)
		}
	}
	if linalg.GridWalk(1, 1).At(0, 0) != 1 {
		t.Error("1x1 grid does not stay")
	}
}

// checkCSR verifies the CSR invariants and the dense round trip.
func checkCSR(t *testing.T, c *linalg.CSR, rows, cols int) {
	t.Helper()
	r, cc := c.Dims()
	if r != rows || cc != cols || len(c.Ptr) != rows+1 || c.Ptr[0] != 0 || c.Ptr[rows] != c.NNZ() {
		t.Fatalf("bad shape %dx%d ptr %v", r, cc, c.Ptr)
	}
	for i := 0; i < rows; i++ {
		ind, val := c.Row(i)
		for k, j := range ind {
			if j < 0 || j >= cols || (k > 0 && j <= ind[k-1]) || math.IsNaN(val[k]) || math.IsInf(val[k], 0) {
				t.Fatalf("row %d invalid: %v %v", i, ind, val)
			}
		}
	}
	if rows == 0 || cols == 0 {
		return
	}
	d := c.ToDense()
	back, err := linalg.CSRFromDense(d)
	if err != nil {
		t.Fatal(err)
	}
	if !mat.Equal(back, c) || !mat.Equal(back.ToDense(), d) {
		t.Fatal("dense round trip differs")
	}
	// Rebuilding through NewCSR accepts the arrays.
	if _, err := linalg.NewCSR(rows, cols, c.Ptr, c.Ind, c.Val); err != nil {
		t.Fatalf("NewCSR rejects a valid CSR: %v", err)
	}
}

func FuzzCSRFromTriplets(f *testing.F) {
	f.Add(uint8(3), uint8(3), []byte{0, 0, 1, 1, 1, 2, 2, 2, 3, 0, 0, 4})
	f.Add(uint8(0), uint8(5), []byte{})
	f.Add(uint8(2), uint8(2), []byte{5, 5, 5})
	f.Fuzz(func(t *testing.T, rows, cols uint8, data []byte) {
		r, c := int(rows%40), int(cols%40)
		var tr []linalg.Triplet
		for k := 0; k+2 < len(data); k += 3 {
			// Indices may fall out of range on purpose; values include
			// negative and zero entries and, for byte 255, a NaN.
			v := float64(int(data[k+2])-128) / 16
			if data[k+2] == 255 {
				v = math.NaN()
			}
			tr = append(tr, linalg.Triplet{Row: int(data[k]) - 2, Col: int(data[k+1]) - 2, Val: v})
		}
		m, err := linalg.CSRFromTriplets(r, c, tr)
		if err != nil {
			if !errors.Is(err, linalg.ErrDimension) && !errors.Is(err, linalg.ErrNonFinite) {
				t.Fatalf("unexpected error %v", err)
			}
			return
		}
		checkCSR(t, m, r, c)
		// Every entry equals the sum of its triplets.
		if r > 0 && c > 0 {
			want := mat.NewDense(r, c, nil)
			for _, e := range tr {
				want.Set(e.Row, e.Col, want.At(e.Row, e.Col)+e.Val)
			}
			if !mat.Equal(m, want) {
				t.Fatal("entries differ from summed triplets")
			}
		}
	})
}

func FuzzNewCSR(f *testing.F) {
	f.Add(uint8(2), uint8(2), []byte{0, 1, 2}, []byte{1, 0}, []byte{10, 20})
	f.Add(uint8(1), uint8(3), []byte{0, 2}, []byte{2, 1}, []byte{1, 1})
	f.Fuzz(func(t *testing.T, rows, cols uint8, ptrB, indB, valB []byte) {
		r, c := int(rows%20), int(cols%20)
		ptr := make([]int, len(ptrB))
		for i, b := range ptrB {
			ptr[i] = int(b) - 1
		}
		ind := make([]int, len(indB))
		for i, b := range indB {
			ind[i] = int(b) - 1
		}
		val := make([]float64, len(valB))
		for i, b := range valB {
			val[i] = float64(b) - 100
			if b == 255 {
				val[i] = math.Inf(1)
			}
		}
		m, err := linalg.NewCSR(r, c, ptr, ind, val)
		if err != nil {
			if !errors.Is(err, linalg.ErrDimension) && !errors.Is(err, linalg.ErrNonFinite) {
				t.Fatalf("unexpected error %v", err)
			}
			return
		}
		checkCSR(t, m, r, c)
		// MulVecTo agrees with the dense product.
		if r > 0 && c > 0 {
			x := make([]float64, c)
			for j := range x {
				x[j] = float64(j + 1)
			}
			y := make([]float64, r)
			m.MulVecTo(y, x)
			var ref mat.VecDense
			ref.MulVec(m.ToDense(), mat.NewVecDense(c, x))
			if !floatsEqual(y, ref.RawVector().Data) {
				t.Fatal("MulVecTo differs from dense")
			}
		}
	})
}

// TestCSRDenseRoundTripRandom round-trips seeded random sparse matrices.
func TestCSRDenseRoundTripRandom(t *testing.T) {
	for seed := uint64(0); seed < 20; seed++ {
		rnd := rand.New(rand.NewPCG(seed, 31))
		r, c := 1+rnd.IntN(15), 1+rnd.IntN(15)
		d := mat.NewDense(r, c, nil)
		for i := 0; i < r; i++ {
			for j := 0; j < c; j++ {
				if rnd.Float64() < 0.3 {
					d.Set(i, j, rnd.NormFloat64())
				}
			}
		}
		m, err := linalg.CSRFromDense(d)
		if err != nil {
			t.Fatal(err)
		}
		checkCSR(t, m, r, c)
		if !mat.Equal(m.ToDense(), d) {
			t.Errorf("seed %d: round trip differs", seed)
		}
	}
	if _, err := linalg.CSRFromDense(mat.NewDense(1, 1, []float64{math.NaN()})); !errors.Is(err, linalg.ErrNonFinite) {
		t.Errorf("NaN: %v", err)
	}
}
