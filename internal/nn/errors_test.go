package nn_test

import (
	"errors"
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/internal/errs"
	"github.com/successor-go/successor/internal/nn"
	"github.com/successor-go/successor/skills"
	"github.com/successor-go/successor/usf"
)

// TestSharedErrors provokes each shared condition nn reports through its
// API and checks errors.Is against nn's name, the shared sentinel and
// another package's re-export of it, and that the error matches no other
// shared condition.
func TestSharedErrors(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for _, tc := range []struct {
		name             string
		err              error
		own, want, other error
	}{
		{"config: nil config",
			errOf(nn.New(nil, rng)),
			nn.ErrConfig, errs.Config, skills.ErrConfig},
		{"config: a width of 0",
			errOf(nn.New(&nn.Config{Sizes: []int{2, 0, 1}}, rng)),
			nn.ErrConfig, errs.Config, usf.ErrConfig},
		{"corrupt: empty network record",
			new(nn.MLP).UnmarshalBinary(nil),
			nn.ErrCorrupt, errs.Corrupt, usf.ErrCorrupt},
		{"corrupt: a network record loaded as an optimiser",
			func() error {
				m, _ := nn.New(&nn.Config{Sizes: []int{2, 1}}, rng)
				b, _ := m.MarshalBinary()
				return new(nn.Adam).UnmarshalBinary(b)
			}(),
			nn.ErrCorrupt, errs.Corrupt, skills.ErrCorrupt},
	} {
		if tc.err == nil {
			t.Errorf("%s: no error", tc.name)
			continue
		}
		if tc.own != tc.want {
			t.Errorf("%s: the package's sentinel %q is not the shared one", tc.name, tc.own)
		}
		if !errors.Is(tc.err, tc.want) || !errors.Is(tc.err, tc.other) {
			t.Errorf("%s: %v: errors.Is(shared) = %v, errors.Is(other package's) = %v",
				tc.name, tc.err, errors.Is(tc.err, tc.want), errors.Is(tc.err, tc.other))
		}
		for _, s := range []error{errs.Dimension, errs.NonFinite, errs.Discount, errs.Config, errs.Diverged, errs.Corrupt} {
			if s != tc.want && errors.Is(tc.err, s) {
				t.Errorf("%s: %v also matches %q", tc.name, tc.err, s)
			}
		}
	}
}

func errOf[T any](_ T, err error) error { return err }
