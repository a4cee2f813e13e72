package linalg

import (
	"cmp"
	"fmt"
	"math"
	"slices"
	"sort"
	"unsafe"

	"gonum.org/v1/gonum/mat"
)

// CSR is a sparse matrix in compressed-sparse-row form. Row i holds the
// column indices Ind[Ptr[i]:Ptr[i+1]] (strictly increasing) with values
// Val[Ptr[i]:Ptr[i+1]]. A CSR built by this package's constructors is
// validated; the fields are exported read-only for fast loops and must not be
// modified.
//
// CSR implements mat.Matrix, so it can be passed to the dense routines
// (they read it through At; use ToDense for speed).
type CSR struct {
	rows, cols int
	Ptr        []int
	Ind        []int
	Val        []float64
}

var _ mat.Matrix = (*CSR)(nil)

// NewCSR returns a CSR from its three arrays after validating them: len(ptr)
// is rows+1, ptr starts at 0 and does not decrease, column indices are in
// range and strictly increasing in each row, and every value is finite. The
// slices are used, not copied, so the caller must not modify them
// afterwards. Errors wrap ErrDimension or ErrNonFinite.
func NewCSR(rows, cols int, ptr, ind []int, val []float64) (*CSR, error) {
	if rows < 0 || cols < 0 || rows == math.MaxInt {
		return nil, fmt.Errorf("linalg: csr: negative size %dx%d: %w", rows, cols, ErrDimension)
	}
	if len(ptr) != rows+1 || ptr[0] != 0 || len(ind) != len(val) || ptr[rows] != len(ind) {
		return nil, fmt.Errorf("linalg: csr: inconsistent arrays: %w", ErrDimension)
	}
	for i := 0; i < rows; i++ {
		lo, hi := ptr[i], ptr[i+1]
		if hi < lo || hi > len(ind) {
			return nil, fmt.Errorf("linalg: csr: row %d pointer out of order: %w", i, ErrDimension)
		}
		for k := lo; k < hi; k++ {
			if ind[k] < 0 || ind[k] >= cols {
				return nil, fmt.Errorf("linalg: csr: row %d column %d out of range: %w", i, ind[k], ErrDimension)
			}
			if k > lo && ind[k] <= ind[k-1] {
				return nil, fmt.Errorf("linalg: csr: row %d columns not strictly increasing: %w", i, ErrDimension)
			}
			if math.IsNaN(val[k]) || math.IsInf(val[k], 0) {
				return nil, fmt.Errorf("linalg: csr: entry (%d,%d): %w", i, ind[k], ErrNonFinite)
			}
		}
	}
	return &CSR{rows: rows, cols: cols, Ptr: ptr, Ind: ind, Val: val}, nil
}

// Triplet is one entry (Row, Col, Val) of a sparse matrix.
type Triplet struct {
	Row, Col int
	Val      float64
}

// CSRFromTriplets builds a CSR from entries in any order. Entries with the
// same (Row, Col) are summed in input order; explicit zeros are kept. The
// input is not modified. Errors wrap ErrDimension (negative size, or an
// entry out of range) or ErrNonFinite (a NaN or Inf value, or duplicates
// whose sum overflows). It costs O(len(t) log len(t) + rows).
func CSRFromTriplets(rows, cols int, t []Triplet) (*CSR, error) {
	if rows < 0 || cols < 0 || rows == math.MaxInt {
		return nil, fmt.Errorf("linalg: csr: negative size %dx%d: %w", rows, cols, ErrDimension)
	}
	for _, e := range t {
		if e.Row < 0 || e.Row >= rows || e.Col < 0 || e.Col >= cols {
			return nil, fmt.Errorf("linalg: csr: entry (%d,%d) outside %dx%d: %w", e.Row, e.Col, rows, cols, ErrDimension)
		}
		if math.IsNaN(e.Val) || math.IsInf(e.Val, 0) {
			return nil, fmt.Errorf("linalg: csr: entry (%d,%d): %w", e.Row, e.Col, ErrNonFinite)
		}
	}
	s := make([]Triplet, len(t))
	copy(s, t)
	slices.SortStableFunc(s, func(a, b Triplet) int {
		if a.Row != b.Row {
			return cmp.Compare(a.Row, b.Row)
		}
		return cmp.Compare(a.Col, b.Col)
	})
	ptr := make([]int, rows+1)
	ind := make([]int, 0, len(s))
	val := make([]float64, 0, len(s))
	for k, e := range s {
		if k > 0 && e.Row == s[k-1].Row && e.Col == s[k-1].Col {
			val[len(val)-1] += e.Val
			continue
		}
		ind = append(ind, e.Col)
		val = append(val, e.Val)
		ptr[e.Row+1]++
	}
	for i := 0; i < rows; i++ {
		ptr[i+1] += ptr[i]
	}
	for _, v := range val {
		if math.IsInf(v, 0) {
			return nil, fmt.Errorf("linalg: csr: summed entry overflows: %w", ErrNonFinite)
		}
	}
	return &CSR{rows: rows, cols: cols, Ptr: ptr, Ind: ind, Val: val}, nil
}

// CSRFromDense returns the CSR of the non-zero entries of a. It returns an
// error if a holds a non-finite value.
func CSRFromDense(a mat.Matrix) (*CSR, error) {
	r, c := a.Dims()
	ptr := make([]int, r+1)
	var ind []int
	var val []float64
	for i := 0; i < r; i++ {
		for j := 0; j < c; j++ {
			v := a.At(i, j)
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, fmt.Errorf("linalg: csr: entry (%d,%d): %w", i, j, ErrNonFinite)
			}
			if v != 0 {
				ind = append(ind, j)
				val = append(val, v)
			}
		}
		ptr[i+1] = len(ind)
	}
	return &CSR{rows: r, cols: c, Ptr: ptr, Ind: ind, Val: val}, nil
}

// Dims returns the number of rows and columns.
func (m *CSR) Dims() (r, c int) { return m.rows, m.cols }

// NNZ returns the number of stored entries.
func (m *CSR) NNZ() int { return len(m.Val) }

// At returns entry (i, j). It panics if i or j is out of range.
func (m *CSR) At(i, j int) float64 {
	if uint(i) >= uint(m.rows) || uint(j) >= uint(m.cols) {
		panic(mat.ErrIndexOutOfRange)
	}
	lo, hi := m.Ptr[i], m.Ptr[i+1]
	k := lo + sort.SearchInts(m.Ind[lo:hi], j)
	if k < hi && m.Ind[k] == j {
		return m.Val[k]
	}
	return 0
}

// T returns the implicit transpose.
func (m *CSR) T() mat.Matrix { return mat.Transpose{Matrix: m} }

// Row returns views of the column indices and values of row i. They must not
// be modified. It panics if i is out of range.
func (m *CSR) Row(i int) (ind []int, val []float64) {
	lo, hi := m.Ptr[i], m.Ptr[i+1]
	return m.Ind[lo:hi], m.Val[lo:hi]
}

// MulVecTo sets dst = m x. It does not allocate. It panics if
// len(x) != cols or len(dst) != rows, or if dst and x overlap in memory.
func (m *CSR) MulVecTo(dst, x []float64) {
	if len(x) != m.cols || len(dst) != m.rows {
		panic("linalg: csr: MulVecTo length mismatch")
	}
	if overlap(dst, x) {
		panic("linalg: csr: MulVecTo dst and x overlap")
	}
	ptr, ind, val := m.Ptr, m.Ind, m.Val
	for i := range dst {
		ri, rv := ind[ptr[i]:ptr[i+1]], val[ptr[i]:ptr[i+1]]
		rv = rv[:len(ri)]
		var s float64
		for k, j := range ri {
			s += rv[k] * x[j]
		}
		dst[i] = s
	}
}

// ToDense returns m as a new dense matrix (an empty mat.Dense if m has no
// rows or no columns, since gonum has no zero-sized dense matrices).
func (m *CSR) ToDense() *mat.Dense {
	if m.rows == 0 || m.cols == 0 {
		return &mat.Dense{}
	}
	d := mat.NewDense(m.rows, m.cols, nil)
	for i := 0; i < m.rows; i++ {
		for k := m.Ptr[i]; k < m.Ptr[i+1]; k++ {
			d.Set(i, m.Ind[k], m.Val[k])
		}
	}
	return d
}

// overlap reports whether a and b share memory.
func overlap(a, b []float64) bool {
	if len(a) == 0 || len(b) == 0 {
		return false
	}
	const size = unsafe.Sizeof(float64(0))
	a0 := uintptr(unsafe.Pointer(unsafe.SliceData(a)))
	b0 := uintptr(unsafe.Pointer(unsafe.SliceData(b)))
	return a0 < b0+uintptr(len(b))*size && b0 < a0+uintptr(len(a))*size
}
