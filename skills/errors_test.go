package skills_test

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

// TestSharedErrors provokes each shared condition skills reports through
// its public API and checks errors.Is against skills' name, the shared
// sentinel and another package's re-export of it, and that the error
// matches no other shared condition.
func TestSharedErrors(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	soft, err := skills.NewSoftmax(&skills.SoftmaxConfig{In: 2, K: 3}, rng)
	if err != nil {
		t.Fatal(err)
	}
	cat := skills.Categorical{K: 3}
	for _, tc := range []struct {
		name             string
		err              error
		own, want, other error
	}{
		{"config: nil config",
			errOf(skills.NewVMF(nil, rng)),
			skills.ErrConfig, errs.Config, sf.ErrConfig},
		{"config: beta1 1",
			errOf(skills.NewSoftmax(&skills.SoftmaxConfig{In: 2, K: 3, Optim: skills.OptimConfig{Beta1: 1}}, rng)),
			skills.ErrConfig, errs.Config, linalg.ErrConfig},
		{"dimension: three observations for two skills",
			errOf(skills.EstimateMI(soft, cat, []float64{1, 0, 0, 1, 1, 1}, []float64{1, 0, 0, 0, 1, 0})),
			skills.ErrDimension, errs.Dimension, usf.ErrDimension},
		{"non-finite: z outside the prior's support",
			errOf(skills.EstimateMI(soft, cat, []float64{1, 0}, []float64{0.5, 0.5, 0})),
			skills.ErrNonFinite, errs.NonFinite, linalg.ErrNonFinite},
		{"diverged: NaN observation (a *DivergenceError)",
			errOf(soft.Clone().Update([]float64{math.NaN(), 0}, []float64{1, 0, 0})),
			skills.ErrDiverged, errs.Diverged, usf.ErrDiverged},
		{"corrupt: empty record",
			errOf(skills.Unmarshal(nil)),
			skills.ErrCorrupt, errs.Corrupt, sf.ErrCorrupt},
		{"corrupt: a softmax record loaded as a vmf",
			func() error {
				b, _ := soft.MarshalBinary()
				return new(skills.VMF).UnmarshalBinary(b)
			}(),
			skills.ErrCorrupt, errs.Corrupt, usf.ErrCorrupt},
	} {
		checkShared(t, tc.name, tc.err, tc.own, tc.want, tc.other)
	}
	var de *skills.DivergenceError
	if _, err := soft.Clone().Update([]float64{math.NaN(), 0}, []float64{1, 0, 0}); !errors.As(err, &de) || de.Step != 1 {
		t.Errorf("divergence: %v, want a *DivergenceError at step 1", err)
	}
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
