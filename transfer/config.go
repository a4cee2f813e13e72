package transfer

import (
	"errors"
	"fmt"
	"math"
	"strings"

	"github.com/successor-go/successor/sf"
	"github.com/successor-go/successor/skills"
)

// Sentinel errors wrapped by this package.
var (
	// ErrConfig is wrapped by errors about an invalid configuration.
	ErrConfig = errors.New("invalid configuration")
	// ErrDiverged is wrapped when a learner produces a non-finite value.
	ErrDiverged = errors.New("learner diverged")
	// ErrCheckpoint is wrapped by errors about a missing, truncated,
	// corrupted or incompatible checkpoint file.
	ErrCheckpoint = errors.New("bad checkpoint")
	// ErrNoData is wrapped when task inference gets no labelled transitions.
	ErrNoData = errors.New("no labelled transitions")
)

// Method selects where the features phi come from during pretraining. The
// zero value is VMF.
type Method int

const (
	// VMF learns phi with a von Mises-Fisher discriminator on the unit
	// sphere: z is uniform on S^{d-1}, phi(s) = f(s)/||f(s)||, intrinsic
	// reward phi(s').z, task vector w = z (Hansen et al. 2020).
	VMF Method = iota
	// Categorical learns phi = log q(. | s) with a softmax discriminator over
	// K one-hot skills, intrinsic reward log q(z | s') (Eysenbach et al.
	// 2019, with the SF decomposition w = z).
	Categorical
	// Random uses fixed random unit vectors phi(s) drawn once from the run's
	// seed; there is no discriminator and no mutual-information term. It is
	// the ablation that isolates what learning phi buys.
	Random
	// Given uses features handed in by the caller (for example the place
	// labels of a grid layout): the upper reference, since rewards defined
	// on those features are exactly linear in phi.
	Given
)

var methodNames = [...]string{"vmf", "categorical", "random", "given"}

// String returns the method's short name: "vmf", "categorical", "random" or
// "given".
func (m Method) String() string {
	if m < 0 || int(m) >= len(methodNames) {
		return fmt.Sprintf("Method(%d)", int(m))
	}
	return methodNames[m]
}

// Sphere reports whether the method's skills live on the unit sphere (so
// inferred task vectors are normalised to unit length).
func (m Method) Sphere() bool { return m != Categorical }

// ParseMethod returns the method with the given short name (case
// insensitive).
func ParseMethod(s string) (Method, error) {
	for i, n := range methodNames {
		if strings.EqualFold(strings.TrimSpace(s), n) {
			return Method(i), nil
		}
	}
	return 0, fmt.Errorf("transfer: unknown method %q (want one of %s): %w", s, strings.Join(methodNames[:], ", "), ErrConfig)
}

// MarshalText implements encoding.TextMarshaler (used by results.json).
func (m Method) MarshalText() ([]byte, error) { return []byte(m.String()), nil }

// UnmarshalText implements encoding.TextUnmarshaler.
func (m *Method) UnmarshalText(b []byte) error {
	v, err := ParseMethod(string(b))
	if err != nil {
		return err
	}
	*m = v
	return nil
}

// MaxReplay is the largest replay capacity. A usf.Replay keeps the
// features and the task vector of every transition, about (2d + 5) x 8
// bytes each.
const MaxReplay = 1 << 24

// PretrainConfig configures the reward-free phase. The zero value means the
// documented defaults; negative values are errors unless stated otherwise.
type PretrainConfig struct {
	// Method selects the features; the zero value is VMF.
	Method Method
	// Dim is the feature dimension d of the sphere methods; for
	// Categorical, the number of skills K (the features then have K+1
	// entries). 0 means 8. Ignored by Given, whose dimension is
	// Features.Dim().
	Dim int
	// Kappa is the von Mises-Fisher concentration of the discriminator.
	// 0 means 5.
	Kappa float64
	// Skills is the number K of skill vectors for the sphere methods
	// (VMF, Random, Given), drawn once uniformly on the unit sphere. 0 means
	// 32. Categorical uses its Dim one-hot skills.
	Skills int
	// Relabel is the number of extra skills, drawn at random, whose SFs are
	// updated with each replayed transition (off-policy relabelling). 0
	// means 4; negative means none.
	Relabel int
	// Features are the given features phi(s, a, s') for Method Given
	// (evaluated at the next state). Required by Given, ignored otherwise.
	Features sf.FeatureMap `json:"-"`

	// Steps is the number of environment steps. Episodes always finish, so
	// the run stops at the first episode end at or after Steps. 0 means
	// 100000.
	Steps int
	// EpisodeSteps is the time limit of a pretraining episode (a
	// truncation, not a termination). 0 means 50.
	EpisodeSteps int
	// Gamma is the discount of the successor features. 0 means 0.95.
	Gamma float64
	// Epsilon is the exploration rate of the epsilon-greedy behaviour.
	// 0 means 0.2; a negative value means no random actions.
	Epsilon float64
	// Batch is the minibatch size drawn from the replay buffer at every
	// step, for both the discriminator and the USF. 0 means 16.
	Batch int
	// Replay is the replay buffer capacity in transitions. 0 means 50000;
	// at most MaxReplay.
	Replay int
	// LearnRate is the TD step size of the successor features. 0 means 0.2.
	LearnRate float64
	// DiscRate is the Adam step size of the discriminator (skills.Optim
	// LearnRate). 0 means 0.03.
	DiscRate float64
	// DiscOptim is the discriminator's optimiser. The zero value is dense
	// Adam (skills.OptimAdam). skills.OptimSparseAdam updates only the
	// minibatch's states and the bias (observations are one-hot): on the
	// depot it pretrains VMF about 1.8 times faster, but its skills
	// transferred worse there (see the package doc), so it is not the
	// default. A checkpoint keeps it (in the discriminator's encoding).
	DiscOptim skills.OptimMethod
	// Seed determines the run: every random choice comes from it.
	Seed uint64

	// CheckpointEvery saves a checkpoint to CheckpointPath at the first
	// episode end after every CheckpointEvery steps, and at the end of the
	// run. 0 means no periodic checkpoints (a final one is still written if
	// CheckpointPath is set).
	CheckpointEvery int
	// CheckpointPath is the checkpoint file; empty means none.
	CheckpointPath string
	// ProgressEvery calls Progress after every ProgressEvery steps (at the
	// next episode end) and at the end. 0 means Steps/100 (at least 1).
	ProgressEvery int
	// Progress, if not nil, receives progress reports.
	Progress func(Progress) `json:"-"`

	// stop, if not nil, is asked at every episode end before the last;
	// a non-nil error ends the run with that error, after a checkpoint
	// if CheckpointPath is set (Experiment.RunContext).
	stop func() error
}

// Progress is a pretraining progress report.
type Progress struct {
	Steps, Episodes int
	// DiscLoss is the mean discriminator loss -log q(z|s') over the
	// minibatches since the last report (0 for Random and Given).
	DiscLoss float64
	// MI is the variational lower bound E[log q(z|s')] - E[log p(z)] over
	// the same minibatches, with its standard error MIStdErr. HasMI is false
	// for Random and Given, which have no discriminator.
	MI, MIStdErr float64
	HasMI        bool
	// TDError is the mean squared TD error per feature since the last
	// report.
	TDError float64
}

// pretrainDefaults returns cfg with the zero values replaced by defaults,
// or an error for invalid values.
func (cfg PretrainConfig) withDefaults() (PretrainConfig, error) {
	c := cfg
	if c.Method < VMF || c.Method > Given {
		return c, fmt.Errorf("transfer: method %d: %w", int(c.Method), ErrConfig)
	}
	if c.Method == Given {
		if c.Features == nil {
			return c, fmt.Errorf("transfer: method given needs Features: %w", ErrConfig)
		}
		c.Dim = c.Features.Dim()
	}
	if c.Dim == 0 {
		c.Dim = 8
	}
	setF(&c.Kappa, 5)
	setI(&c.Skills, 32)
	setI(&c.Relabel, 4)
	if c.Relabel < 0 {
		c.Relabel = 0
	}
	setI(&c.Steps, 100000)
	setI(&c.EpisodeSteps, 50)
	setF(&c.Gamma, 0.95)
	setF(&c.Epsilon, 0.2)
	if c.Epsilon < 0 {
		c.Epsilon = 0
	}
	setI(&c.Batch, 16)
	setI(&c.Replay, 50000)
	setF(&c.LearnRate, 0.2)
	setF(&c.DiscRate, 0.03)
	if c.ProgressEvery == 0 {
		c.ProgressEvery = max(c.Steps/100, 1)
	}
	return c, c.validate()
}

// validate checks a configuration whose defaults have been applied.
func (c PretrainConfig) validate() error {
	switch {
	case c.Method < VMF || c.Method > Given:
		return fmt.Errorf("transfer: method %d: %w", int(c.Method), ErrConfig)
	case c.Dim < 1 || (c.Method == VMF || c.Method == Random) && c.Dim < 2:
		return fmt.Errorf("transfer: dimension %d: %w", c.Dim, ErrConfig)
	case c.Skills < 1 || c.Relabel < 0:
		return fmt.Errorf("transfer: %d skills, relabel %d: %w", c.Skills, c.Relabel, ErrConfig)
	case !(c.Kappa > 0) || math.IsInf(c.Kappa, 0):
		return fmt.Errorf("transfer: kappa %v: %w", c.Kappa, ErrConfig)
	case c.Replay > MaxReplay:
		return fmt.Errorf("transfer: replay capacity %d above %d: %w", c.Replay, MaxReplay, ErrConfig)
	case c.Steps < 0 || c.EpisodeSteps < 0 || c.Batch < 0 || c.Replay < 0:
		return fmt.Errorf("transfer: negative count: %w", ErrConfig)
	case !(c.Gamma > 0 && c.Gamma < 1):
		return fmt.Errorf("transfer: gamma %v outside (0, 1): %w", c.Gamma, ErrConfig)
	case !(c.Epsilon >= 0 && c.Epsilon <= 1):
		return fmt.Errorf("transfer: epsilon %v: %w", c.Epsilon, ErrConfig)
	case !(c.LearnRate > 0 && c.LearnRate <= 1) || !(c.DiscRate > 0) || math.IsInf(c.DiscRate, 0):
		return fmt.Errorf("transfer: step sizes %v, %v: %w", c.LearnRate, c.DiscRate, ErrConfig)
	case c.DiscOptim > skills.OptimSparseAdam:
		return fmt.Errorf("transfer: discriminator optimiser %v: %w", c.DiscOptim, ErrConfig)
	case c.CheckpointEvery < 0 || c.ProgressEvery < 1:
		return fmt.Errorf("transfer: negative period: %w", ErrConfig)
	}
	return nil
}

// Explore is the rule by which the agent collects its labelled transitions.
type Explore int

const (
	// ExploreSkills follows the pretrained skills: every labelled episode
	// draws a fresh z from the prior and acts epsilon-greedily on
	// psi(s, ., z) . z. The zero value.
	ExploreSkills Explore = iota
	// ExploreUniform takes uniformly random actions.
	ExploreUniform
	// ExploreGreedy follows the skills for a warm-up, then acts
	// epsilon-greedily with the policy adapted to the labels so far.
	ExploreGreedy
)

// FitMode selects how the acting policy evaluates the inferred task w.
type FitMode int

const (
	// FitNone is the pure successor-feature method: GPI over the
	// universal SFs tabulated at the skill set, Q_k(s, a) = psi(s, a, z_k)
	// . w for the skills z_k nearest to w. The zero value.
	FitNone FitMode = iota
	// FitModel adds a model-based candidate: Q(., ., w) fitted by value
	// iteration on the empirical transition model of every reward-free
	// transition with the inferred reward phi(s') . w. This is
	// model-based evaluation of the inferred task on the empirical model of
	// the reward-free data, not successor-feature transfer: no reward label
	// and no environment step are used, but the result measures the model
	// fit as much as the successor features.
	FitModel
)

var fitNames = [...]string{"none", "model"}

// String returns "none" or "model".
func (f FitMode) String() string {
	if f < 0 || int(f) >= len(fitNames) {
		return fmt.Sprintf("FitMode(%d)", int(f))
	}
	return fitNames[f]
}

// MarshalText implements encoding.TextMarshaler (used by results.json).
func (f FitMode) MarshalText() ([]byte, error) { return []byte(f.String()), nil }

// UnmarshalText implements encoding.TextUnmarshaler.
func (f *FitMode) UnmarshalText(b []byte) error {
	for i, n := range fitNames {
		if strings.EqualFold(strings.TrimSpace(string(b)), n) {
			*f = FitMode(i)
			return nil
		}
	}
	return fmt.Errorf("transfer: unknown fit %q (want none or model): %w", b, ErrConfig)
}

// AdaptConfig configures task inference and the acting policy. The zero
// value means the documented defaults.
type AdaptConfig struct {
	// Ridge is the ridge penalty lambda of task inference. 0 means chosen
	// by leave-one-state-out cross-validation over RidgeGrid (InferTaskCV);
	// a negative value means plain least squares (lambda = 0).
	Ridge float64
	// Candidates is the number N of skills, the most similar to w by
	// cosine, whose successor features form the GPI candidate set. 0 means
	// 8; a negative value switches GPI off: the policy is greedy in
	// psi(s, ., z) . w for the single skill z nearest to w (with
	// FitModel, greedy in the fitted Q(., ., w) alone).
	Candidates int
	// Fit selects whether a model-based candidate joins the GPI set. The
	// zero value FitNone is the pure successor-feature method; FitModel
	// adds Q(., ., w) fitted by value iteration on the empirical model of
	// the reward-free transitions (see FitModel).
	Fit FitMode
	// FitSweeps is the largest number of value-iteration sweeps of
	// FitModel. 0 means 2000. Ignored with FitNone.
	FitSweeps int
	// Explore is the rule that collects labelled transitions.
	Explore Explore
	// Epsilon is the random-action rate while collecting with
	// ExploreSkills. 0 means 0.2; negative means 0.
	Epsilon float64
	// EpisodeSteps is the time limit of a labelled episode. 0 means 1000.
	EpisodeSteps int
	noCV         bool // set by withDefaults for a negative Ridge

	// SwitchEvery is the number of steps after which ExploreSkills moves to
	// the next skill within an episode, and after which ExploreGreedy
	// re-infers the task. 0 means 40.
	SwitchEvery int
	// Warmup is the number of skill-following steps before ExploreGreedy
	// starts acting on its inferred task. 0 means 200.
	Warmup int
}

func (cfg AdaptConfig) withDefaults() (AdaptConfig, error) {
	c := cfg
	if c.Ridge < 0 {
		c.Ridge, c.noCV = 0, true
	}
	setI(&c.Candidates, 8)
	if c.Candidates < 0 {
		c.Candidates = 0
	}
	setI(&c.FitSweeps, 2000)
	setF(&c.Epsilon, 0.2)
	if c.Epsilon < 0 {
		c.Epsilon = 0
	}
	setI(&c.EpisodeSteps, 1000)
	setI(&c.SwitchEvery, 40)
	setI(&c.Warmup, 200)
	switch {
	case c.Warmup < 0:
		return c, fmt.Errorf("transfer: warm-up %d: %w", c.Warmup, ErrConfig)
	case c.SwitchEvery < 1:
		return c, fmt.Errorf("transfer: switch every %d: %w", c.SwitchEvery, ErrConfig)
	case math.IsNaN(c.Ridge) || math.IsInf(c.Ridge, 0):
		return c, fmt.Errorf("transfer: ridge %v: %w", c.Ridge, ErrConfig)
	case !(c.Epsilon <= 1):
		return c, fmt.Errorf("transfer: epsilon %v: %w", c.Epsilon, ErrConfig)
	case c.EpisodeSteps < 0:
		return c, fmt.Errorf("transfer: episode steps %d: %w", c.EpisodeSteps, ErrConfig)
	case c.Fit < FitNone || c.Fit > FitModel:
		return c, fmt.Errorf("transfer: fit %d: %w", int(c.Fit), ErrConfig)
	case c.FitSweeps < 1:
		return c, fmt.Errorf("transfer: fit sweeps %d: %w", c.FitSweeps, ErrConfig)
	case c.Explore < ExploreSkills || c.Explore > ExploreGreedy:
		return c, fmt.Errorf("transfer: explore rule %d: %w", int(c.Explore), ErrConfig)
	}
	return c, nil
}

func setF(p *float64, def float64) {
	if *p == 0 {
		*p = def
	}
}

func setI(p *int, def int) {
	if *p == 0 {
		*p = def
	}
}
