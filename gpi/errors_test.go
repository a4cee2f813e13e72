package gpi_test

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/gpi"
	"github.com/successor-go/successor/internal/errs"
	"github.com/successor-go/successor/linalg"
	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/sf"
	"github.com/successor-go/successor/skills"
	"github.com/successor-go/successor/usf"
)

// TestSharedErrors provokes each shared condition gpi reports through its
// public API and checks errors.Is against gpi's name, the shared sentinel
// and another package's re-export of it, and that the error matches no
// other shared condition.
func TestSharedErrors(t *testing.T) {
	for _, tc := range []struct {
		name             string
		err              error
		own, want, other error
	}{
		{"dimension: tasks of unequal length",
			errOf(gpi.GapBound([]float64{1, 0}, [][]float64{{1}}, 1, 0, 0.9)),
			gpi.ErrDimension, errs.Dimension, sf.ErrDimension},
		{"non-finite: NaN eps",
			errOf(gpi.DominanceSlack(math.NaN(), 0.9)),
			gpi.ErrNonFinite, errs.NonFinite, linalg.ErrNonFinite},
		{"discount: gamma 1",
			errOf(gpi.DominanceSlack(0.1, 1)),
			gpi.ErrDiscount, errs.Discount, mdp.ErrDiscount},
		{"config: negative eps",
			errOf(gpi.DominanceSlack(-1, 0.9)),
			gpi.ErrConfig, errs.Config, usf.ErrConfig},
		{"config: negative steps per task",
			errOf(gpi.QLearning(nil, nil, nil, &gpi.LearnConfig{StepsPerTask: -1}, nil, rand.New(rand.NewPCG(1, 1)))),
			gpi.ErrConfig, errs.Config, linalg.ErrConfig},
		{"diverged: successor features overflow",
			diverge(t),
			gpi.ErrDiverged, errs.Diverged, skills.ErrDiverged},
	} {
		checkShared(t, tc.name, tc.err, tc.own, tc.want, tc.other)
	}
	var de *sf.DivergenceError
	if err := diverge(t); !errors.As(err, &de) {
		t.Errorf("divergence: %v, want an *sf.DivergenceError", err)
	}
}

// diverge runs SF Q-learning where the rewards are finite but one feature
// is 1e308: with alpha = 1 the SF of staying in state 0 is
// phi + gamma psi(0, go) = 1e308 + 0.9 * 1e308 = +Inf in that feature
// (derived by hand), once state 0 has been left once and stayed in once.
func diverge(t *testing.T) error {
	t.Helper()
	// State 0: action 0 goes to the terminal state 1, action 1 stays.
	m, err := mdp.New(2, 2, []mdp.ProbEntry{{State: 0, Action: 0, Next: 1, Prob: 1}, {State: 0, Action: 1, Next: 0, Prob: 1}},
		[]bool{false, true}, []float64{1, 0})
	if err != nil {
		t.Fatal(err)
	}
	phi := sf.FeatureFunc{D: 2, F: func(dst []float64, s, a, next int) {
		dst[0], dst[1] = 1e308, 0
		if next == 1 {
			dst[1] = 1
		}
	}}
	_, err = gpi.SFQLearning(m, phi, [][]float64{{0, 1}},
		&gpi.LearnConfig{Gamma: 0.9, StepSize: 1, Epsilon: 0.5, StepsPerTask: 1000}, nil, rand.New(rand.NewPCG(2, 2)))
	return err
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
