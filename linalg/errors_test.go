package linalg_test

import (
	"errors"
	"math"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/successor-go/successor/internal/errs"
	"github.com/successor-go/successor/linalg"
	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/sf"
)

// shared lists the library's shared sentinels, for the check that an error
// matches its own condition and no other.
var shared = []error{errs.Dimension, errs.NonFinite, errs.Discount, errs.Config, errs.Diverged, errs.Corrupt}

// TestSharedErrors provokes each shared condition linalg reports through
// its public API and checks errors.Is against linalg's name, the shared
// sentinel and another package's re-export of it, and that the error
// matches no other shared condition.
func TestSharedErrors(t *testing.T) {
	chain := mat.NewDense(2, 2, []float64{0.5, 0.5, 0.25, 0.75})
	var dst mat.Dense
	for _, tc := range []struct {
		name             string
		err              error
		own, want, other error
	}{
		{"dimension: successor of a 2x3 matrix",
			linalg.Successor(&dst, mat.NewDense(2, 3, nil), 0.9),
			linalg.ErrDimension, errs.Dimension, sf.ErrDimension},
		{"non-finite: NaN in P",
			linalg.Successor(&dst, mat.NewDense(2, 2, []float64{math.NaN(), 1, 0, 1}), 0.9),
			linalg.ErrNonFinite, errs.NonFinite, mdp.ErrNonFinite},
		{"discount: gamma 1.5",
			linalg.Successor(&dst, chain, 1.5),
			linalg.ErrDiscount, errs.Discount, sf.ErrDiscount},
		{"config: ridge with lambda -1",
			func() error {
				_, err := linalg.Ridge(mat.NewVecDense(1, nil), mat.NewDense(2, 1, []float64{1, 2}), mat.NewVecDense(2, []float64{1, 2}), -1)
				return err
			}(),
			linalg.ErrConfig, errs.Config, mdp.ErrConfig},
		{"config: unknown iterative method",
			func() error {
				p := linalg.GridWalk(2, 2)
				_, err := linalg.SolveIterative(make([]float64, 4), p, 0.5, []float64{1, 0, 0, 0}, &linalg.IterConfig{Method: 99})
				return err
			}(),
			linalg.ErrConfig, errs.Config, sf.ErrConfig},
	} {
		checkShared(t, tc.name, tc.err, tc.own, tc.want, tc.other)
	}
}

func checkShared(t *testing.T, name string, err, own, want, other error) {
	t.Helper()
	if err == nil {
		t.Errorf("%s: no error", name)
		return
	}
	if own != want {
		t.Errorf("%s: the package's sentinel %q is not the shared one", name, own)
	}
	if !errors.Is(err, want) || !errors.Is(err, other) {
		t.Errorf("%s: %v: errors.Is(shared %q) = %v, errors.Is(other package's) = %v",
			name, err, want, errors.Is(err, want), errors.Is(err, other))
	}
	for _, s := range shared {
		if s != want && errors.Is(err, s) {
			t.Errorf("%s: %v also matches %q", name, err, s)
		}
	}
}
