package mdp_test

import (
	"errors"
	"math"
	"strings"
	"testing"

	"github.com/successor-go/successor/internal/errs"
	"github.com/successor-go/successor/linalg"
	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/sf"
)

// TestSharedErrors provokes each shared condition mdp reports through its
// public API and checks errors.Is against mdp's name, the shared sentinel
// and another package's re-export of it, and that the error matches no
// other shared condition.
func TestSharedErrors(t *testing.T) {
	// A two-state chain: state 0 moves to the terminal state 1.
	tr := []mdp.ProbEntry{{State: 0, Action: 0, Next: 1, Prob: 1}}
	term := []bool{false, true}
	start := []float64{1, 0}
	m, err := mdp.New(2, 1, tr, term, start)
	if err != nil {
		t.Fatal(err)
	}
	one := func(int, int, int) float64 { return 1 }
	for _, tc := range []struct {
		name             string
		err              error
		own, want, other error
	}{
		{"dimension: start of length 3",
			second(mdp.New(2, 1, tr, term, []float64{1, 0, 0})),
			mdp.ErrDimension, errs.Dimension, linalg.ErrDimension},
		{"non-finite: NaN probability",
			second(mdp.New(2, 1, []mdp.ProbEntry{{State: 0, Action: 0, Next: 1, Prob: math.NaN()}}, term, start)),
			mdp.ErrNonFinite, errs.NonFinite, sf.ErrNonFinite},
		{"discount: gamma 2",
			second(mdp.Evaluate(m, mdp.Uniform{N: 1}, one, 2)),
			mdp.ErrDiscount, errs.Discount, linalg.ErrDiscount},
		{"config: next state out of range",
			second(mdp.New(2, 1, []mdp.ProbEntry{{State: 0, Action: 0, Next: 5, Prob: 1}}, term, start)),
			mdp.ErrConfig, errs.Config, sf.ErrConfig},
		{"config: nil reward",
			second(mdp.Evaluate(m, mdp.Uniform{N: 1}, nil, 0.9)),
			mdp.ErrConfig, errs.Config, linalg.ErrConfig},
		{"config: bad layout character (a *LayoutError)",
			second(mdp.ParseGrid("#?#", nil)),
			mdp.ErrConfig, errs.Config, linalg.ErrConfig},
		{"corrupt: not JSON",
			second(mdp.Load(strings.NewReader("{not json"))),
			mdp.ErrCorrupt, errs.Corrupt, sf.ErrCorrupt},
		{"corrupt: other format version",
			second(mdp.Load(strings.NewReader(`{"format": "successor/mdp", "version": 9, "states": 1, "actions": 1, "start": [[0, 1]], "transitions": [[0, 0, 1]]}`))),
			mdp.ErrCorrupt, errs.Corrupt, sf.ErrCorrupt},
	} {
		checkShared(t, tc.name, tc.err, tc.own, tc.want, tc.other)
	}
	var le *mdp.LayoutError
	if _, err := mdp.ParseGrid("#?#", nil); !errors.As(err, &le) {
		t.Errorf("bad layout character: %v is not a *LayoutError", err)
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
