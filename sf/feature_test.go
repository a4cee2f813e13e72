package sf

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/internal/vec"
)

// TestFeatureMaps checks each built-in map against its defining formula
// (derived by hand from the doc comments) and checks that the sparse and row
// fast paths used by the learners agree with Features.
func TestFeatureMaps(t *testing.T) {
	lab, err := NewLabels([]int{-1, 0, 1, -1}, 2, false)
	if err != nil {
		t.Fatal(err)
	}
	labc, err := NewLabels([]int{-1, 0, 1, -1}, 2, true)
	if err != nil {
		t.Fatal(err)
	}
	ns, err := NewNextState([][]float64{{1, 2}, {3, 4}, {5, 6}, {7, 8}})
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name       string
		phi        FeatureMap
		s, a, next int
		want       []float64
	}{
		{"one-hot state", OneHotState{N: 4}, 2, 1, 3, []float64{0, 0, 1, 0}},
		{"one-hot state-action", OneHotStateAction{N: 2, A: 2}, 1, 0, 0, []float64{0, 0, 1, 0}},
		{"labels unlabelled", lab, 1, 0, 0, []float64{0, 0}},
		{"labels next", lab, 0, 0, 2, []float64{0, 1}},
		{"labels constant", labc, 0, 0, 1, []float64{1, 0, 1}},
		{"labels constant unlabelled", labc, 0, 0, 3, []float64{0, 0, 1}},
		{"next state", ns, 0, 1, 2, []float64{5, 6}},
		{"func", FeatureFunc{D: 2, F: func(dst []float64, s, a, next int) {
			dst[0], dst[1] = float64(s), float64(10*a+next)
		}}, 3, 1, 2, []float64{3, 12}},
	} {
		if tc.phi.Dim() != len(tc.want) {
			t.Errorf("%s: Dim = %d, want %d", tc.name, tc.phi.Dim(), len(tc.want))
			continue
		}
		got := make([]float64, len(tc.want))
		for k := range got {
			got[k] = math.NaN() // Features must overwrite every entry
		}
		tc.phi.Features(got, tc.s, tc.a, tc.next)
		for k := range got {
			if got[k] != tc.want[k] {
				t.Errorf("%s: phi = %v, want %v", tc.name, got, tc.want)
				break
			}
		}
		if sp, ok := tc.phi.(sparseMap); ok {
			fast := make([]float64, len(tc.want))
			i, vi, j, vj := sp.hot(tc.s, tc.a, tc.next)
			if i >= 0 {
				fast[i] += vi
			}
			if j >= 0 {
				fast[j] += vj
			}
			for k := range fast {
				if fast[k] != tc.want[k] {
					t.Errorf("%s: sparse path = %v, want %v", tc.name, fast, tc.want)
					break
				}
			}
		}
		if rm, ok := tc.phi.(rowMap); ok {
			r := rm.row(tc.s, tc.a, tc.next)
			for k := range r {
				if r[k] != tc.want[k] {
					t.Errorf("%s: row path = %v, want %v", tc.name, r, tc.want)
					break
				}
			}
		}
	}
}

func TestFeatureErrors(t *testing.T) {
	if _, err := NewLabels([]int{0, 2}, 2, false); !errors.Is(err, ErrDimension) {
		t.Errorf("label out of range: err = %v, want ErrDimension", err)
	}
	if _, err := NewLabels([]int{-1}, 0, false); !errors.Is(err, ErrDimension) {
		t.Errorf("no dimension: err = %v, want ErrDimension", err)
	}
	if _, err := NewNextState([][]float64{{1, 2}, {3}}); !errors.Is(err, ErrDimension) {
		t.Errorf("ragged rows: err = %v, want ErrDimension", err)
	}
	if _, err := NewNextState([][]float64{{math.NaN()}}); !errors.Is(err, ErrNonFinite) {
		t.Errorf("NaN row: err = %v, want ErrNonFinite", err)
	}
	if _, err := NewRandom(0, 3, false, rand.New(rand.NewPCG(1, 2))); !errors.Is(err, ErrDimension) {
		t.Errorf("zero states: err = %v, want ErrDimension", err)
	}
	func() {
		defer func() {
			if recover() == nil {
				t.Error("wrong length: no panic")
			}
		}()
		OneHotState{N: 3}.Features(make([]float64, 2), 0, 0, 0)
	}()
}

// TestRandomFeatures checks seeding (same seed, same bits) and the unit-norm
// option.
func TestRandomFeatures(t *testing.T) {
	f1, _ := NewRandom(5, 8, true, rand.New(rand.NewPCG(7, 1)))
	f2, _ := NewRandom(5, 8, true, rand.New(rand.NewPCG(7, 1)))
	f3, _ := NewRandom(5, 8, true, rand.New(rand.NewPCG(8, 1)))
	same, diff := true, false
	for i := range f1.data {
		same = same && math.Float64bits(f1.data[i]) == math.Float64bits(f2.data[i])
		diff = diff || f1.data[i] != f3.data[i]
	}
	if !same || !diff {
		t.Errorf("seeding: same seed equal %v, other seed differs %v", same, diff)
	}
	for s := 0; s < 5; s++ {
		r := f1.Row(s)
		if n := math.Sqrt(vec.Dot(r, r)); math.Abs(n-1) > 1e-14 {
			t.Errorf("row %d has norm %v, want 1", s, n)
		}
	}
}
