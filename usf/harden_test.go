package usf

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/sf"
)

// TestTabularUpdateInfiniteStep checks that Update reports divergence when
// the values it writes are not finite, even though its TD errors are: a
// visit count of -1 (which a file could once give) makes the step
// alpha (0)^-power = +Inf, and 0 x Inf writes NaN with a squared error of
// 0. The check used to look at the TD errors alone, so the NaN passed.
func TestTabularUpdateInfiniteStep(t *testing.T) {
	tab, err := NewTabular(2, 1, [][]float64{{1}}, 0.5, &TabularConfig{Schedule: sf.StepSchedule{StepSize: 0.5, Power: 0.5}})
	if err != nil {
		t.Fatal(err)
	}
	tab.visits[0] = -1 // state 0, action 0 of z 0
	b := &Batch{S: []int{0}, A: []int{0}, Next: []int{1}, Terminal: []bool{true}, Phi: []float64{0}, K: []int{0}}
	_, err = tab.Update(b)
	var de *sf.DivergenceError
	if !errors.Is(err, ErrDiverged) || !errors.As(err, &de) || de.Step != 1 {
		t.Fatalf("error %v, want a divergence at step 1", err)
	}
	if _, err := tab.MarshalBinary(); !errors.Is(err, ErrDiverged) {
		t.Errorf("saving a diverged tabular: error %v, want ErrDiverged", err)
	}
}

// TestTabularSaveNonFinite checks that a table holding a NaN or an
// infinity is not saved (its loader would refuse it).
func TestTabularSaveNonFinite(t *testing.T) {
	for _, v := range []float64{math.NaN(), math.Inf(1)} {
		tab, err := NewTabular(2, 1, [][]float64{{1}}, 0.5, nil)
		if err != nil {
			t.Fatal(err)
		}
		tab.Tables[0].Data[1] = v
		if _, err := tab.MarshalBinary(); !errors.Is(err, ErrNonFinite) {
			t.Errorf("table holding %v: error %v, want ErrNonFinite", v, err)
		}
	}
}

// TestConstructorBounds checks that sizes whose buffers would overflow or
// exceed the documented bounds are errors (they used to panic in
// makeslice).
func TestConstructorBounds(t *testing.T) {
	for _, c := range []struct{ capacity, obs, dim int }{
		{1 << 30, math.MaxInt, 0},
		{1 << 30, 0, 1 << 28},
		{1 << 30, 1 << 10, 1 << 10},
		{1 << 31, 1, 1},
	} {
		if _, err := NewReplay(c.capacity, c.obs, c.dim); !errors.Is(err, ErrDimension) {
			t.Errorf("NewReplay(%d, %d, %d): error %v, want ErrDimension", c.capacity, c.obs, c.dim, err)
		}
	}
	rng := rand.New(rand.NewPCG(1, 2))
	if _, err := Candidates([]float64{1, 0}, &CandidateConfig{N: math.MaxInt}, rng); !errors.Is(err, ErrConfig) {
		t.Errorf("Candidates with N = MaxInt: error %v, want ErrConfig", err)
	}
	if zs, err := Candidates([]float64{1, 0}, &CandidateConfig{N: 3, Kappa: 5}, rng); err != nil || len(zs) != 4 {
		t.Errorf("Candidates with N = 3: %d vectors, %v", len(zs), err)
	}
}
