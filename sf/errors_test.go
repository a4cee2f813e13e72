package sf_test

import (
	"errors"
	"math"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/successor-go/successor/internal/errs"
	"github.com/successor-go/successor/linalg"
	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/sf"
	"github.com/successor-go/successor/skills"
	"github.com/successor-go/successor/usf"
)

// TestSharedErrors provokes each shared condition sf reports through its
// public API and checks errors.Is against sf's name, the shared sentinel
// and another package's re-export of it, and that the error matches no
// other shared condition.
func TestSharedErrors(t *testing.T) {
	tab := func() *sf.Table { tb, _ := sf.NewTable(1, 1, 2); return tb }
	phi := sf.FeatureFunc{D: 2, F: func(dst []float64, s, a, next int) { dst[0], dst[1] = 1, 0 }}
	// phi = 1e308 on a self-loop with alpha = 1 and gamma = 1: psi is
	// 1e308 after the first update and +Inf at the second (derived by
	// hand: psi <- phi + psi).
	huge := sf.FeatureFunc{D: 2, F: func(dst []float64, s, a, next int) { dst[0], dst[1] = 1e308, 0 }}
	diverge := func() error {
		l, err := sf.NewTD(tab(), huge, 1, &sf.TDConfig{Schedule: sf.StepSchedule{StepSize: 1}})
		if err != nil {
			return err
		}
		for range 2 {
			if err := l.Update(0, 0, 0, false, 0); err != nil {
				return err
			}
		}
		return nil
	}
	for _, tc := range []struct {
		name             string
		err              error
		own, want, other error
	}{
		{"dimension: a table of 0 states",
			second(sf.NewTable(0, 1, 1)),
			sf.ErrDimension, errs.Dimension, linalg.ErrDimension},
		{"dimension: features of another dimension",
			second(sf.NewTD(tab(), sf.FeatureFunc{D: 3, F: func([]float64, int, int, int) {}}, 0.9, nil)),
			sf.ErrDimension, errs.Dimension, usf.ErrDimension},
		{"non-finite: NaN reward in task inference",
			second(sf.InferTask(make([]float64, 1), mat.NewDense(2, 1, []float64{1, 2}), []float64{1, math.NaN()}, 0, nil)),
			sf.ErrNonFinite, errs.NonFinite, linalg.ErrNonFinite},
		{"discount: gamma 2",
			second(sf.NewTD(tab(), phi, 2, nil)),
			sf.ErrDiscount, errs.Discount, mdp.ErrDiscount},
		{"config: step 2",
			second(sf.NewTD(tab(), phi, 0.9, &sf.TDConfig{Schedule: sf.StepSchedule{StepSize: 2}})),
			sf.ErrConfig, errs.Config, linalg.ErrConfig},
		{"config: ridge lambda -1",
			second(sf.InferTask(make([]float64, 1), mat.NewDense(2, 1, []float64{1, 2}), []float64{1, 2}, -1, nil)),
			sf.ErrConfig, errs.Config, skills.ErrConfig},
		{"diverged: TD update (a *DivergenceError)",
			diverge(),
			sf.ErrDiverged, errs.Diverged, skills.ErrDiverged},
		{"corrupt: empty table record",
			new(sf.Table).UnmarshalBinary(nil),
			sf.ErrCorrupt, errs.Corrupt, usf.ErrCorrupt},
		{"corrupt: a linear record loaded as a table",
			func() error {
				l, _ := sf.NewLinear(1, 1, 1)
				b, _ := l.MarshalBinary()
				return new(sf.Table).UnmarshalBinary(b)
			}(),
			sf.ErrCorrupt, errs.Corrupt, skills.ErrCorrupt},
	} {
		checkShared(t, tc.name, tc.err, tc.own, tc.want, tc.other)
	}
	var de *sf.DivergenceError
	if err := diverge(); !errors.As(err, &de) || de.Step != 2 {
		t.Errorf("divergence: %v, want a *DivergenceError at step 2", err)
	}
}

func second[T any](_ T, err error) error { return err }

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
