package usf_test

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/internal/errs"
	"github.com/successor-go/successor/linalg"
	"github.com/successor-go/successor/sf"
	"github.com/successor-go/successor/skills"
	"github.com/successor-go/successor/usf"
)

// TestSharedErrors provokes each shared condition usf reports through its
// public API and checks errors.Is against usf's name, the shared sentinel
// and another package's re-export of it, and that the error matches no
// other shared condition.
func TestSharedErrors(t *testing.T) {
	for _, tc := range []struct {
		name             string
		err              error
		own, want, other error
	}{
		{"dimension: replay of capacity 0",
			errOf(usf.NewReplay(0, 1, 1)),
			usf.ErrDimension, errs.Dimension, sf.ErrDimension},
		{"discount: gamma 2",
			errOf(usf.NewTabular(1, 1, [][]float64{{1}}, 2, nil)),
			usf.ErrDiscount, errs.Discount, linalg.ErrDiscount},
		{"non-finite: NaN in z",
			errOf(usf.NewTabular(1, 1, [][]float64{{math.NaN()}}, 0.9, nil)),
			usf.ErrNonFinite, errs.NonFinite, skills.ErrNonFinite},
		{"config: negative step",
			errOf(usf.NewTabular(1, 1, [][]float64{{1}}, 0.9, &usf.TabularConfig{Schedule: sf.StepSchedule{StepSize: -1}})),
			usf.ErrConfig, errs.Config, sf.ErrConfig},
		{"config: nil rng",
			errOf(usf.NewNeural(1, 1, 1, 0.9, nil, nil)),
			usf.ErrConfig, errs.Config, skills.ErrConfig},
		{"diverged: tabular update",
			diverge(),
			usf.ErrDiverged, errs.Diverged, sf.ErrDiverged},
		{"corrupt: empty replay record",
			new(usf.Replay).UnmarshalBinary(nil),
			usf.ErrCorrupt, errs.Corrupt, sf.ErrCorrupt},
		{"corrupt: a neural record loaded as a tabular one",
			func() error {
				l, _ := usf.NewNeural(1, 1, 1, 0.9, nil, rand.New(rand.NewPCG(1, 1)))
				b, _ := l.MarshalBinary()
				return new(usf.Tabular).UnmarshalBinary(b)
			}(),
			usf.ErrCorrupt, errs.Corrupt, skills.ErrCorrupt},
	} {
		checkShared(t, tc.name, tc.err, tc.own, tc.want, tc.other)
	}
	var de *sf.DivergenceError
	if err := diverge(); !errors.As(err, &de) {
		t.Errorf("divergence: %v, want an *sf.DivergenceError", err)
	}
}

// diverge makes tabular updates on a self-loop with phi = 1e308, step 1
// and gamma 1: psi is 1e308 after the first and phi + psi = +Inf at the
// second (derived by hand).
func diverge() error {
	tab, err := usf.NewTabular(1, 1, [][]float64{{1}}, 1, &usf.TabularConfig{Schedule: sf.StepSchedule{StepSize: 1}})
	if err != nil {
		return err
	}
	b := &usf.Batch{S: []int{0}, Next: []int{0}, A: []int{0}, Phi: []float64{1e308}, Z: []float64{1}, Terminal: []bool{false}}
	for range 2 {
		if _, err := tab.Update(b); err != nil {
			return err
		}
	}
	return nil
}

func errOf[T any](_ T, err error) error { return err }

var shared = []error{errs.Dimension, errs.NonFinite, errs.Discount, errs.Config, errs.Diverged, errs.Corrupt}

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
