package transfer

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"

	"github.com/successor-go/successor/internal/errs"
	"github.com/successor-go/successor/sf"
	"github.com/successor-go/successor/skills"
)

// Sentinel errors wrapped by this package.
var (
	// ErrConfig is wrapped by errors about an invalid configuration (the
	// library's shared sentinel: errors.Is(err, sf.ErrConfig) is the same
	// test).
	ErrConfig = errs.Config
	// ErrDiverged is wrapped when a learner produces a non-finite value
	// (shared, as ErrConfig).
	ErrDiverged = errs.Diverged
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
	i, err := parseName(s, methodNames[:], "method")
	return Method(i), err
}

// MarshalText implements encoding.TextMarshaler (used by results.json).
func (m Method) MarshalText() ([]byte, error) { return marshalName(int(m), methodNames[:], "method") }

// UnmarshalText implements encoding.TextUnmarshaler.
func (m *Method) UnmarshalText(b []byte) error {
	return unmarshalName((*int)(m), b, methodNames[:], "method")
}

// parseName returns the index of s in names (case insensitive, spaces
// trimmed), or an error wrapping ErrConfig naming what.
func parseName(s string, names []string, what string) (int, error) {
	for i, n := range names {
		if strings.EqualFold(strings.TrimSpace(s), n) {
			return i, nil
		}
	}
	return 0, fmt.Errorf("transfer: unknown %s %q (want one of %s): %w", what, s, strings.Join(names, ", "), ErrConfig)
}

func marshalName(i int, names []string, what string) ([]byte, error) {
	if i < 0 || i >= len(names) {
		return nil, fmt.Errorf("transfer: %s %d has no name: %w", what, i, ErrConfig)
	}
	return []byte(names[i]), nil
}

func unmarshalName(dst *int, b []byte, names []string, what string) error {
	i, err := parseName(string(b), names, what)
	if err != nil {
		return err
	}
	*dst = i
	return nil
}

func nameOf(i int, names []string, typ string) string {
	if i < 0 || i >= len(names) {
		return fmt.Sprintf("%s(%d)", typ, i)
	}
	return names[i]
}

// MaxReplay is the largest replay capacity. A usf.Replay keeps the
// features and the task vector of every transition, about (2d + 5) x 8
// bytes each.
const MaxReplay = 1 << 24

// PretrainConfig configures the reward-free phase. The zero value means the
// documented defaults; Resolve fills them in. Negative values are errors
// unless stated otherwise. The JSON form (snake_case keys, enumerations as
// text) is the one results files and checkpoints record; the fields
// marked "not recorded" are left out of it.
type PretrainConfig struct {
	// Method selects the features; the zero value is VMF.
	Method Method `json:"method"`
	// Skills is the number K of skills of every method: K vectors drawn
	// once uniformly on the unit sphere for VMF, Random and Given, the K
	// one-hot vectors of skills.Categorical for Categorical. 0 means 32.
	Skills int `json:"skills"`
	// Dim is the feature dimension d. For the sphere methods VMF and Random
	// it is a setting, 0 meaning 8 (at least 2). For Categorical it follows
	// from Skills, d = K+1 (skills.Softmax's features log q(. | s) and the
	// constant log K), and for Given from Features, d = Features.Dim(); for
	// those two, 0 or that value is accepted and Resolve sets it.
	Dim int `json:"dim"`
	// Kappa is the von Mises-Fisher concentration of the discriminator
	// (VMF only). 0 means 5.
	Kappa float64 `json:"kappa"`
	// Relabel is the number of extra skills, drawn at random, whose SFs are
	// updated with each replayed transition (off-policy relabelling). 0
	// means 4; a negative value means none, which Resolve records as -1.
	Relabel int `json:"relabel"`
	// Features are the given features phi(s, a, s') for Method Given
	// (evaluated at the next state). Required by Given, ignored otherwise.
	// Not recorded: a checkpoint keeps the table of phi instead.
	Features sf.FeatureMap `json:"-"`

	// Steps is the number of environment steps. Episodes always finish, so
	// the run stops at the first episode end at or after Steps. 0 means
	// 100000.
	Steps int `json:"steps"`
	// EpisodeSteps is the time limit of a pretraining episode (a
	// truncation, not a termination). 0 means 50.
	EpisodeSteps int `json:"episode_steps"`
	// SkillGamma is the discount of the skills' successor features, in
	// (0, 1): the horizon of the skills (and of FitModel's fitted values).
	// It need not equal the discount of the tasks the agent is scored on.
	// 0 means 0.95.
	SkillGamma float64 `json:"skill_gamma"`
	// Epsilon is the exploration rate of the epsilon-greedy behaviour.
	// 0 means 0.2; a negative value means no random actions, which Resolve
	// records as -1.
	Epsilon float64 `json:"epsilon"`
	// Batch is the minibatch size drawn from the replay buffer at every
	// step, for both the discriminator and the USF. 0 means 16.
	Batch int `json:"batch"`
	// Replay is the replay buffer capacity in transitions. 0 means 50000;
	// at most MaxReplay.
	Replay int `json:"replay"`
	// StepSize is the TD step size of the successor features, in (0, 1].
	// 0 means 0.2.
	StepSize float64 `json:"step_size"`
	// DiscStepSize is the Adam step size of the discriminator (skills.OptimConfig
	// StepSize). 0 means 0.03.
	DiscStepSize float64 `json:"disc_step_size"`
	// DiscOptim is the discriminator's optimiser. The zero value is dense
	// Adam (skills.OptimAdam). skills.OptimSparseAdam updates only the
	// minibatch's states and the bias (observations are one-hot): on the
	// depot it pretrains VMF about 1.8 times faster, but its skills
	// transferred worse there (see the package doc), so it is not the
	// default.
	DiscOptim skills.OptimMethod `json:"disc_optim"`
	// Seed determines the run: every random choice comes from it.
	Seed uint64 `json:"seed"`
	// ProgressEvery calls Progress after every ProgressEvery steps (at the
	// next episode end) and at the end. 0 means Steps/100 (at least 1). It
	// also delimits the statistics of a report, such as the MI estimate.
	ProgressEvery int `json:"progress_every"`

	// CheckpointEvery saves a checkpoint to CheckpointPath at the first
	// episode end after every CheckpointEvery steps, and at the end of the
	// run. 0 means no periodic checkpoints (a final one is still written if
	// CheckpointPath is set). Not recorded: it changes no figure.
	CheckpointEvery int `json:"-"`
	// CheckpointPath is the checkpoint file; empty means none. Not
	// recorded.
	CheckpointPath string `json:"-"`
	// Progress, if not nil, receives progress reports. Not recorded.
	Progress func(Progress) `json:"-"`
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
	// report (usf.TDStats).
	TDError float64
}

// Resolve returns cfg with every default filled in, the configuration
// that runs, or an error wrapping ErrConfig for an invalid value.
// Resolving a resolved configuration returns it unchanged.
func (cfg PretrainConfig) Resolve() (PretrainConfig, error) {
	c := cfg
	if c.Method < VMF || c.Method > Given {
		return c, fmt.Errorf("transfer: method %d: %w", int(c.Method), ErrConfig)
	}
	setI(&c.Skills, 32)
	if c.Skills < 1 {
		return c, fmt.Errorf("transfer: %d skills: %w", c.Skills, ErrConfig)
	}
	switch c.Method {
	case Categorical:
		if c.Dim != 0 && c.Dim != c.Skills+1 {
			return c, fmt.Errorf("transfer: categorical features of %d skills have dimension %d, not %d: %w", c.Skills, c.Skills+1, c.Dim, ErrConfig)
		}
		c.Dim = c.Skills + 1
	case Given:
		if c.Features == nil {
			return c, fmt.Errorf("transfer: method given needs Features: %w", ErrConfig)
		}
		if c.Dim != 0 && c.Dim != c.Features.Dim() {
			return c, fmt.Errorf("transfer: given features have dimension %d, not %d: %w", c.Features.Dim(), c.Dim, ErrConfig)
		}
		c.Dim = c.Features.Dim()
	default:
		setI(&c.Dim, 8)
	}
	setF(&c.Kappa, 5)
	setI(&c.Relabel, 4)
	if c.Relabel < 0 {
		c.Relabel = -1
	}
	setI(&c.Steps, 100000)
	setI(&c.EpisodeSteps, 50)
	setF(&c.SkillGamma, 0.95)
	setF(&c.Epsilon, 0.2)
	if c.Epsilon < 0 {
		c.Epsilon = -1
	}
	setI(&c.Batch, 16)
	setI(&c.Replay, 50000)
	setF(&c.StepSize, 0.2)
	setF(&c.DiscStepSize, 0.03)
	if c.ProgressEvery == 0 && c.Steps > 0 {
		c.ProgressEvery = max(c.Steps/100, 1)
	}
	return c, c.validate()
}

// validate checks a resolved configuration; Features are not needed (a
// checkpoint of a Given agent has none).
func (c PretrainConfig) validate() error {
	switch {
	case c.Method < VMF || c.Method > Given:
		return fmt.Errorf("transfer: method %d: %w", int(c.Method), ErrConfig)
	case c.Skills < 1 || c.Relabel < -1:
		return fmt.Errorf("transfer: %d skills, relabel %d: %w", c.Skills, c.Relabel, ErrConfig)
	case c.Dim < 1 || (c.Method == VMF || c.Method == Random) && c.Dim < 2 || c.Method == Categorical && c.Dim != c.Skills+1:
		return fmt.Errorf("transfer: dimension %d: %w", c.Dim, ErrConfig)
	case !(c.Kappa > 0) || math.IsInf(c.Kappa, 0):
		return fmt.Errorf("transfer: kappa %v: %w", c.Kappa, ErrConfig)
	case c.Replay > MaxReplay:
		return fmt.Errorf("transfer: replay capacity %d above %d: %w", c.Replay, MaxReplay, ErrConfig)
	case c.Steps < 1 || c.EpisodeSteps < 1 || c.Batch < 1 || c.Replay < 1:
		return fmt.Errorf("transfer: steps %d, episode steps %d, batch %d, replay %d: %w", c.Steps, c.EpisodeSteps, c.Batch, c.Replay, ErrConfig)
	case !(c.SkillGamma > 0 && c.SkillGamma < 1):
		return fmt.Errorf("transfer: skill gamma %v outside (0, 1): %w", c.SkillGamma, ErrConfig)
	case !(c.Epsilon == -1 || c.Epsilon >= 0 && c.Epsilon <= 1):
		return fmt.Errorf("transfer: epsilon %v: %w", c.Epsilon, ErrConfig)
	case !(c.StepSize > 0 && c.StepSize <= 1) || !(c.DiscStepSize > 0) || math.IsInf(c.DiscStepSize, 0):
		return fmt.Errorf("transfer: step sizes %v, %v: %w", c.StepSize, c.DiscStepSize, ErrConfig)
	case c.DiscOptim < skills.OptimAdam || c.DiscOptim > skills.OptimSparseAdam:
		return fmt.Errorf("transfer: discriminator optimiser %v: %w", c.DiscOptim, ErrConfig)
	case c.CheckpointEvery < 0 || c.ProgressEvery < 1:
		return fmt.Errorf("transfer: checkpoint every %d, progress every %d: %w", c.CheckpointEvery, c.ProgressEvery, ErrConfig)
	}
	return nil
}

// relabel returns the number of relabelled skills of a resolved
// configuration.
func (c *PretrainConfig) relabel() int { return max(c.Relabel, 0) }

// ResumeConfig says how a saved pretraining run continues (Resume,
// Agent.Continue): everything else is the saved configuration.
type ResumeConfig struct {
	// Steps is the total number of environment steps to reach (episodes
	// finish, as in Pretrain). 0 means the Steps of the saved
	// configuration.
	Steps int
	// CheckpointEvery and CheckpointPath are as in PretrainConfig; Resume
	// uses the file it read when CheckpointPath is empty.
	CheckpointEvery int
	CheckpointPath  string
	// ProgressEvery is as in PretrainConfig; 0 keeps the saved value.
	ProgressEvery int
	// Progress, if not nil, receives progress reports.
	Progress func(Progress)
}

// Explore is the rule by which the agent collects its labelled transitions.
// Its text form is "skills", "uniform" or "greedy".
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

var exploreNames = [...]string{"skills", "uniform", "greedy"}

// String returns "skills", "uniform" or "greedy".
func (e Explore) String() string { return nameOf(int(e), exploreNames[:], "Explore") }

// MarshalText implements encoding.TextMarshaler.
func (e Explore) MarshalText() ([]byte, error) {
	return marshalName(int(e), exploreNames[:], "explore rule")
}

// UnmarshalText implements encoding.TextUnmarshaler.
func (e *Explore) UnmarshalText(b []byte) error {
	return unmarshalName((*int)(e), b, exploreNames[:], "explore rule")
}

// FitMode selects how the acting policy evaluates the inferred task w. Its
// text form is "none" or "model".
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
func (f FitMode) String() string { return nameOf(int(f), fitNames[:], "FitMode") }

// MarshalText implements encoding.TextMarshaler (used by results.json).
func (f FitMode) MarshalText() ([]byte, error) { return marshalName(int(f), fitNames[:], "fit") }

// UnmarshalText implements encoding.TextUnmarshaler.
func (f *FitMode) UnmarshalText(b []byte) error {
	return unmarshalName((*int)(f), b, fitNames[:], "fit")
}

// RidgeRule is how task inference chooses its ridge penalty lambda. Its
// text form is "cv" or "fixed".
type RidgeRule int

const (
	// RidgeCV chooses lambda from AdaptConfig.RidgeGrid by
	// leave-one-state-out cross-validation on the labelled transitions
	// (see Infer). The zero value.
	RidgeCV RidgeRule = iota
	// RidgeFixed uses AdaptConfig.Lambda (see Infer); 0 is plain least
	// squares.
	RidgeFixed
)

var ridgeNames = [...]string{"cv", "fixed"}

// String returns "cv" or "fixed".
func (r RidgeRule) String() string { return nameOf(int(r), ridgeNames[:], "RidgeRule") }

// MarshalText implements encoding.TextMarshaler.
func (r RidgeRule) MarshalText() ([]byte, error) {
	return marshalName(int(r), ridgeNames[:], "ridge rule")
}

// UnmarshalText implements encoding.TextUnmarshaler.
func (r *RidgeRule) UnmarshalText(b []byte) error {
	return unmarshalName((*int)(r), b, ridgeNames[:], "ridge rule")
}

// GPIMode switches generalized policy improvement over the skills on or
// off. Its text form is "on" or "off".
type GPIMode int

const (
	// GPIOn acts by GPI over the AdaptConfig.Candidates skills nearest the
	// inferred task. The zero value.
	GPIOn GPIMode = iota
	// GPIOff acts greedily in psi(s, ., z) . w for the single skill z
	// nearest w (with FitModel, greedy in the fitted Q(., ., w) alone).
	GPIOff
)

var gpiNames = [...]string{"on", "off"}

// String returns "on" or "off".
func (g GPIMode) String() string { return nameOf(int(g), gpiNames[:], "GPIMode") }

// MarshalText implements encoding.TextMarshaler.
func (g GPIMode) MarshalText() ([]byte, error) { return marshalName(int(g), gpiNames[:], "gpi mode") }

// UnmarshalText implements encoding.TextUnmarshaler.
func (g *GPIMode) UnmarshalText(b []byte) error {
	return unmarshalName((*int)(g), b, gpiNames[:], "gpi mode")
}

// DefaultRidgeGrid returns the grid of penalties RidgeCV chooses from by
// default: 1e-3, 1e-2, 0.1, 0.3, 1, 3, 10, 30, 100 (a new slice each
// call).
func DefaultRidgeGrid() []float64 {
	return []float64{1e-3, 1e-2, 0.1, 0.3, 1, 3, 10, 30, 100}
}

// AdaptConfig configures task inference and the acting policy. The zero
// value means the documented defaults; Resolve fills them in. The JSON
// form has snake_case keys and enumerations as text.
type AdaptConfig struct {
	// Ridge is the rule that sets the ridge penalty of task inference:
	// RidgeCV (the zero value) or RidgeFixed.
	Ridge RidgeRule `json:"ridge"`
	// Lambda is the penalty of RidgeFixed, at least 0 (0: plain least
	// squares). Ignored by RidgeCV.
	Lambda float64 `json:"lambda"`
	// RidgeGrid are the penalties RidgeCV chooses from, each positive. nil
	// means DefaultRidgeGrid. Ignored (and left nil) by RidgeFixed.
	RidgeGrid []float64 `json:"ridge_grid"`
	// GPI switches GPI over the candidate skills on (GPIOn, the zero
	// value) or off (GPIOff: the single nearest skill).
	GPI GPIMode `json:"gpi"`
	// Candidates is the number N of skills, the most similar to w by
	// cosine, whose successor features form the GPI candidate set. 0 means
	// 8.
	Candidates int `json:"candidates"`
	// Fit selects whether a model-based candidate joins the GPI set. The
	// zero value FitNone is the pure successor-feature method; FitModel
	// adds Q(., ., w) fitted by value iteration on the empirical model of
	// the reward-free transitions (see FitModel).
	Fit FitMode `json:"fit"`
	// FitSweeps is the largest number of value-iteration sweeps of
	// FitModel. 0 means 2000. Ignored with FitNone.
	FitSweeps int `json:"fit_sweeps"`
	// Explore is the rule that collects labelled transitions.
	Explore Explore `json:"explore"`
	// Epsilon is the random-action rate while collecting with
	// ExploreSkills and ExploreGreedy. 0 means 0.2; a negative value means
	// none, which Resolve records as -1.
	Epsilon float64 `json:"epsilon"`
	// EpisodeSteps is the time limit of a labelled episode. 0 means 1000.
	EpisodeSteps int `json:"episode_steps"`
	// SwitchEvery is the number of steps after which ExploreSkills moves to
	// the next skill within an episode, and after which ExploreGreedy
	// re-infers the task. 0 means 40.
	SwitchEvery int `json:"switch_every"`
	// Warmup is the number of skill-following steps before ExploreGreedy
	// starts acting on its inferred task. 0 means 200.
	Warmup int `json:"warmup"`
}

// Resolve returns cfg with every default filled in, the configuration
// that runs, or an error wrapping ErrConfig for an invalid value.
// Resolving a resolved configuration returns it unchanged.
func (cfg AdaptConfig) Resolve() (AdaptConfig, error) {
	c := cfg
	if c.Ridge == RidgeCV {
		if c.RidgeGrid == nil {
			c.RidgeGrid = DefaultRidgeGrid()
		} else {
			c.RidgeGrid = slices.Clone(c.RidgeGrid)
		}
	}
	setI(&c.Candidates, 8)
	setI(&c.FitSweeps, 2000)
	setF(&c.Epsilon, 0.2)
	if c.Epsilon < 0 {
		c.Epsilon = -1
	}
	setI(&c.EpisodeSteps, 1000)
	setI(&c.SwitchEvery, 40)
	setI(&c.Warmup, 200)
	switch {
	case c.Ridge < RidgeCV || c.Ridge > RidgeFixed:
		return c, fmt.Errorf("transfer: ridge rule %d: %w", int(c.Ridge), ErrConfig)
	case !(c.Lambda >= 0) || math.IsInf(c.Lambda, 0):
		return c, fmt.Errorf("transfer: ridge penalty %v: %w", c.Lambda, ErrConfig)
	case c.Ridge == RidgeCV && len(c.RidgeGrid) == 0:
		return c, fmt.Errorf("transfer: empty ridge grid: %w", ErrConfig)
	case c.GPI < GPIOn || c.GPI > GPIOff:
		return c, fmt.Errorf("transfer: gpi mode %d: %w", int(c.GPI), ErrConfig)
	case c.Candidates < 1:
		return c, fmt.Errorf("transfer: %d candidates (switch GPI off with GPIOff): %w", c.Candidates, ErrConfig)
	case c.Warmup < 0:
		return c, fmt.Errorf("transfer: warm-up %d: %w", c.Warmup, ErrConfig)
	case c.SwitchEvery < 1:
		return c, fmt.Errorf("transfer: switch every %d: %w", c.SwitchEvery, ErrConfig)
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
	for _, lam := range c.RidgeGrid {
		if !(lam > 0) || math.IsInf(lam, 0) {
			return c, fmt.Errorf("transfer: ridge grid penalty %v: %w", lam, ErrConfig)
		}
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

// orZero returns *p, or the zero value (every default) for a nil p.
func orZero[T any](p *T) T {
	if p == nil {
		var z T
		return z
	}
	return *p
}
