package experiment

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/sf"
	"github.com/successor-go/successor/transfer"
)

// Sentinel errors. They are transfer's, so errors.Is works across the two
// packages (a bad pretraining setting found by transfer is an ErrConfig
// here too).
var (
	// ErrConfig is wrapped by errors about an invalid experiment.
	ErrConfig = transfer.ErrConfig
	// ErrCheckpoint is wrapped by errors about a missing, corrupted or
	// foreign file in the checkpoint folder.
	ErrCheckpoint = transfer.ErrCheckpoint
	// ErrDiverged is wrapped when a baseline learner produces a non-finite
	// value.
	ErrDiverged = transfer.ErrDiverged
)

// Job is a task handed to the agent after pretraining: the reward
// r(s, a, s') = Places(s') . Weights, paid on every step that ends on a
// labelled place.
type Job struct {
	Name        string    `json:"name"`
	Description string    `json:"description"`
	Weights     []float64 `json:"weights"`
}

// Experiment is the whole job: pretrain every method on every seed, hand
// each pretrained agent every job with each labelled budget, and score the
// resulting policies exactly against the uniform random and the optimal
// policy; run the from-scratch baselines with the same budgets.
//
// Its JSON form (in results.json, through Report) is the resolved
// experiment (Resolve): snake_case keys, enumerations as text, every
// default filled in. The MDPs, the feature map and the callbacks are not
// part of it.
type Experiment struct {
	// Task is the finite MDP of the jobs; its start distribution is the one
	// the policies are scored from and the labelled episodes start from.
	Task *mdp.Finite `json:"-"`
	// Explore is the MDP of the reward-free phase (for example Task with
	// another start distribution, mdp.WithStart); nil means Task.
	Explore *mdp.Finite `json:"-"`
	// Places are the place features the jobs are defined on (and the
	// features of transfer.Given and of the SF Q-learning baseline).
	Places sf.FeatureMap `json:"-"`
	// PlaceNames names the dimensions of Places (for the results file).
	PlaceNames []string `json:"place_names"`
	Jobs       []Job    `json:"jobs"`
	// Methods are the pretraining runs, at most one per transfer.Method:
	// each is pretrained on every seed with its own configuration and
	// scored in three variants (see SuffixGPI, SuffixNoGPI,
	// SuffixModelFit). Their Seed is not used (every run's seed is
	// DeriveSeed(seed, method), and Resolve sets it to 0); Given uses
	// Places as its Features; CheckpointPath and Progress are set by the
	// experiment.
	Methods []transfer.PretrainConfig `json:"methods"`
	// Seeds are the runs; each determines its run completely.
	Seeds []uint64 `json:"seeds"`
	// Budgets are the labelled budgets, ascending; the last is the one of
	// the results table.
	Budgets []int `json:"budgets"`
	// Baselines adds tabular Q-learning and SF Q-learning with Places from
	// scratch.
	Baselines bool `json:"baselines"`
	// TaskGamma is the discount of the jobs, in (0, 1): the policies are
	// scored with it and the baselines learn with it. 0 means 0.95. The
	// other discount of an experiment is the skills' own,
	// transfer.PretrainConfig.SkillGamma.
	TaskGamma float64 `json:"task_gamma"`

	Adapt    transfer.AdaptConfig `json:"adapt"`
	Baseline BaselineConfig       `json:"baseline"`

	// Workers is the number of goroutines; 0 means runtime.GOMAXPROCS(0).
	// The figures do not depend on it.
	Workers int `json:"-"`
	// Progress, if not nil, is called (never concurrently) with the total
	// pretraining steps done so far and the total planned.
	Progress func(done, total int) `json:"-"`
	// Keep, if not nil, receives every pretrained agent (called
	// concurrently from the workers), also one read back from
	// CheckpointDir.
	Keep func(m transfer.Method, seed uint64, ag *transfer.Agent) `json:"-"`

	// CheckpointDir, if not empty, is a folder (created if missing) in
	// which every pretraining run (method m, seed s) keeps its state, so an
	// interrupted experiment loses at most a few steps per run:
	//
	//	<m>-seed<s>.ckpt  the agent's checkpoint (transfer.Agent.Save
	//	                  format), written every CheckpointEvery steps of
	//	                  the method's configuration (0 means Steps/5),
	//	                  when stopped by RunContext's context, and at the
	//	                  end of pretraining;
	//	<m>-seed<s>.run   the run's record: a fingerprint of everything its
	//	                  figures depend on, its final MI estimate and, once
	//	                  adapted, its result rows (JSON with a CRC-32C).
	//
	// m is the method's text form (vmf, categorical, random, given) and s
	// the experiment seed in decimal. On start a run with result rows
	// takes them as they are; one with a finished checkpoint skips to
	// adaptation; one with a partial checkpoint resumes pretraining from
	// it (transfer.Agent.Continue); a run without files starts afresh. The
	// figures are then bit-identical to those of an uninterrupted
	// experiment (the timings aside). A checkpoint or record of another
	// configuration is an error wrapping ErrCheckpoint, never mixed in:
	// the fingerprint covers the pretraining, adaptation and job settings,
	// the budgets, the task discount, the MDP sizes and the place features
	// at every next state, but not the transition probabilities of Task
	// and Explore, which are the caller's to keep fixed within a folder.
	// The baselines of seed s keep their rows in baselines-seed<s>.run
	// (read back if present, so that Merge finds every run's record).
	// Results.Resumed lists the pretraining runs read back. On start the
	// folder must be writable (checked before any work), and the temporary
	// files that a process killed while saving left of the runs' own files
	// (.<file>.tmp<digits>, see package internal/fileio) are removed;
	// nothing else in the folder is touched.
	CheckpointDir string `json:"-"`
	// DropCheckpoints removes a run's checkpoint from CheckpointDir once
	// its record holds the result rows, so that the folder keeps only the
	// records (about 16 kB per run of the depot demo, whose checkpoints
	// take up to 90 MB): for sweeps of many runs. A run stopped before
	// then resumes from its checkpoint as usual; the agent of a finished
	// run is gone, so Keep (and Merge with Keep) cannot be given it.
	DropCheckpoints bool `json:"-"`
}

// ResumedRun says what an experiment read back from its CheckpointDir for
// one pretraining run.
type ResumedRun struct {
	Method transfer.Method `json:"method"`
	Seed   uint64          `json:"seed"`
	// Steps is the number of pretraining steps in the checkpoint (or of
	// the finished run for Adapted).
	Steps int `json:"steps"`
	// Pretrained reports that pretraining had finished, and Adapted that
	// the result rows were read rather than recomputed.
	Pretrained bool `json:"pretrained"`
	Adapted    bool `json:"adapted"`
}

// Resolve returns a copy of e with every default filled in (the
// configuration that runs and that results.json records), or an error
// wrapping ErrConfig if e is not a valid experiment. Resolving a resolved
// experiment returns an equal one.
func (e *Experiment) Resolve() (*Experiment, error) {
	switch {
	case e.Task == nil || e.Places == nil:
		return nil, fmt.Errorf("experiment: needs Task and Places: %w", ErrConfig)
	case len(e.Jobs) == 0 || len(e.Seeds) == 0 || len(e.Budgets) == 0:
		return nil, fmt.Errorf("experiment: needs jobs, seeds and budgets: %w", ErrConfig)
	case !(e.TaskGamma >= 0 && e.TaskGamma < 1):
		return nil, fmt.Errorf("experiment: task gamma %v outside [0, 1): %w", e.TaskGamma, ErrConfig)
	case len(e.Methods) == 0 && !e.Baselines:
		return nil, fmt.Errorf("experiment: nothing to run: %w", ErrConfig)
	}
	for i, b := range e.Budgets {
		if b < 1 || i > 0 && b <= e.Budgets[i-1] {
			return nil, fmt.Errorf("experiment: budgets must be positive and increasing: %w", ErrConfig)
		}
	}
	for _, j := range e.Jobs {
		if len(j.Weights) != e.Places.Dim() {
			return nil, fmt.Errorf("experiment: job %q has %d weights for %d place features: %w", j.Name, len(j.Weights), e.Places.Dim(), ErrConfig)
		}
	}
	if e.Explore != nil && (e.Explore.NumStates() != e.Task.NumStates() || e.Explore.NumActions() != e.Task.NumActions()) {
		return nil, fmt.Errorf("experiment: explore and task MDPs differ in size: %w", ErrConfig)
	}
	r := *e
	if r.TaskGamma == 0 {
		r.TaskGamma = 0.95
	}
	r.Methods = make([]transfer.PretrainConfig, len(e.Methods))
	seen := map[transfer.Method]bool{}
	for i, m := range e.Methods {
		if seen[m.Method] {
			return nil, fmt.Errorf("experiment: method %s listed twice: %w", m.Method, ErrConfig)
		}
		seen[m.Method] = true
		m.Seed = 0
		m.Features = nil
		if m.Method == transfer.Given {
			m.Features = e.Places
		}
		c, err := m.Resolve()
		if err != nil {
			return nil, fmt.Errorf("experiment: method %s: %w", m.Method, err)
		}
		r.Methods[i] = c
	}
	var err error
	if r.Adapt, err = e.Adapt.Resolve(); err != nil {
		return nil, fmt.Errorf("experiment: %w", err)
	}
	if r.Baseline, err = e.Baseline.Resolve(); err != nil {
		return nil, err
	}
	return &r, nil
}

// Run runs the experiment. Work is split into units (one pretrained method
// on one seed, or the baselines of one seed), run by Workers goroutines;
// each unit draws only from generators derived from its own seed, so the
// figures are the same for any number of workers. Run is RunContext with
// context.Background().
func (e *Experiment) Run() (*Results, error) {
	return e.RunContext(context.Background())
}

// RunContext runs the experiment as Run does until ctx is done: then no
// unit starts, pretraining runs stop at their next episode end (saving a
// checkpoint there if CheckpointDir is set; transfer.PretrainContext), and
// RunContext returns an error wrapping ctx.Err() once the running units
// have stopped. With a CheckpointDir, a later run continues where this one
// stopped.
func (e *Experiment) RunContext(ctx context.Context) (*Results, error) {
	r, err := e.Resolve()
	if err != nil {
		return nil, err
	}
	sc, err := r.prepare()
	if err != nil {
		return nil, err
	}
	us := r.units()
	tasks := make([]task, len(us))
	for i, u := range us {
		tasks[i] = task{r: r, sc: sc, u: u}
	}
	outs, err := runTasks(ctx, tasks, r.Workers, r.Progress)
	if err != nil {
		return nil, err
	}
	return r.assemble(outs), nil
}

// Streams of the generators the harness makes from derived seeds (the
// stream numbers package transfer used when its calls took seeds, kept so
// that the figures keep their bits).
const (
	streamCollect  = 2
	streamBaseline = 4
)

// CollectRand returns the generator the harness passes to transfer.Collect
// for job j of the run with the given seed: a PCG generator seeded with
// DeriveSeed(seed, 1000+j). A program can replay that collection with it.
func CollectRand(seed uint64, j int) *rand.Rand {
	return rand.New(rand.NewPCG(DeriveSeed(seed, 1000+uint64(j)), streamCollect))
}

// baselineRand returns the generator of a baseline run with the derived
// seed s.
func baselineRand(s uint64) *rand.Rand { return rand.New(rand.NewPCG(s, streamBaseline)) }

// DeriveSeed returns the seed of a sub-run (a method, a job) of the run with
// the given seed: a SplitMix64 mix (Steele et al. 2014) of seed and the
// sub-run's index. An experiment pretrains method m of run seed s with
// DeriveSeed(s, m), collects the labelled transitions of job j with
// DeriveSeed(s, 1000+j), and runs the Q-learning and SF Q-learning
// baselines of job j with DeriveSeed(s, 2000+j) and DeriveSeed(s, 3000+j).
func DeriveSeed(seed uint64, index uint64) uint64 {
	z := seed + 0x9e3779b97f4a7c15*(index+1)
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

// adaptAll scores agent ag on every job and budget in the three variants
// of methodVariants. e is resolved.
func (e *Experiment) adaptAll(ag *transfer.Agent, seed uint64, rewards []mdp.Reward, refs []*transfer.Reference) ([]Record, error) {
	env := mdp.NewSampler(e.Task, e.Adapt.EpisodeSteps)
	maxB := e.Budgets[len(e.Budgets)-1]
	var recs []Record
	vars := methodVariants(ag.Method(), e.Adapt)
	for j, job := range e.Jobs {
		lab, err := transfer.Collect(env, ag, rewards[j], maxB, &e.Adapt, CollectRand(seed, j))
		if err != nil {
			return nil, err
		}
		for _, b := range e.Budgets {
			inf, err := transfer.Infer(ag, lab[:b], &e.Adapt)
			if err != nil {
				return nil, fmt.Errorf("job %q: %w", job.Name, err)
			}
			for _, v := range vars {
				cfg := e.Adapt
				cfg.Fit = v.Fit
				if !v.GPI {
					cfg.GPI = transfer.GPIOff
				}
				pol, err := ag.Policy(inf, &cfg)
				if err != nil {
					return nil, fmt.Errorf("job %q: %w", job.Name, err)
				}
				sc, err := refs[j].Score(pol)
				if err != nil {
					return nil, fmt.Errorf("job %q: %w", job.Name, err)
				}
				recs = append(recs, Record{Variant: v.Name, Job: job.Name, Budget: b, Seed: seed,
					Normalised: sc.Normalised, Value: sc.Value, RSquared: inf.RSquared, Residual: inf.Residual, Rewarded: inf.Rewarded, Lambda: inf.Lambda})
			}
		}
	}
	return recs, nil
}

// runBaselines runs the from-scratch learners of one seed on every job. e
// is resolved.
func (e *Experiment) runBaselines(seed uint64, rewards []mdp.Reward, refs []*transfer.Reference) ([]Record, error) {
	bc := e.Baseline
	var recs []Record
	for j, job := range e.Jobs {
		env := mdp.NewSampler(e.Task, bc.EpisodeSteps)
		qp, err := QBaseline(env, rewards[j], e.TaskGamma, e.Budgets, &bc, baselineRand(DeriveSeed(seed, 2000+uint64(j))))
		if err != nil {
			return nil, err
		}
		sp, err := SFQBaseline(env, e.Places, rewards[j], e.TaskGamma, e.Budgets, &bc, baselineRand(DeriveSeed(seed, 3000+uint64(j))))
		if err != nil {
			return nil, err
		}
		for bi, b := range e.Budgets {
			for _, v := range []struct {
				name string
				pol  mdp.Deterministic
			}{{VariantQLearning, qp[bi]}, {VariantSFQLearning, sp[bi]}} {
				sc, err := refs[j].Score(v.pol)
				if err != nil {
					return nil, fmt.Errorf("job %q: %w", job.Name, err)
				}
				recs = append(recs, Record{Variant: v.name, Job: job.Name, Budget: b, Seed: seed,
					Normalised: sc.Normalised, Value: sc.Value})
			}
		}
	}
	return recs, nil
}

// placeReward returns r(s, a, s') = phi(s, a, s') . w.
func placeReward(phi sf.FeatureMap, w []float64) mdp.Reward {
	w = append([]float64(nil), w...)
	return func(s, a, next int) float64 {
		f := make([]float64, len(w))
		phi.Features(f, s, a, next)
		var r float64
		for i, v := range f {
			r += v * w[i]
		}
		return r
	}
}

// summarise computes mean and standard error over seeds for every
// (variant, job, budget) and the across-job mean ("mean").
func summarise(recs []Record, variants []string, jobs []Job, budgets []int, seeds []uint64) []Summary {
	type key struct {
		v, j string
		b    int
		s    uint64
	}
	val := map[key]Record{}
	for _, r := range recs {
		val[key{r.Variant, r.Job, r.Budget, r.Seed}] = r
	}
	var out []Summary
	for _, v := range variants {
		for _, b := range budgets {
			means := make([]float64, len(seeds))
			var r2 float64
			ok := true
			for _, job := range jobs {
				xs := make([]float64, 0, len(seeds))
				var jr2 float64
				for si, s := range seeds {
					r, found := val[key{v, job.Name, b, s}]
					if !found {
						ok = false
						continue
					}
					xs = append(xs, r.Normalised)
					means[si] += r.Normalised / float64(len(jobs))
					jr2 += r.RSquared
				}
				if len(xs) == 0 {
					continue
				}
				m, se := meanSE(xs)
				out = append(out, Summary{Variant: v, Job: job.Name, Budget: b, Mean: m, StdErr: se, RSquared: jr2 / float64(len(xs)), N: len(xs)})
				r2 += jr2 / float64(len(xs)) / float64(len(jobs))
			}
			if ok {
				m, se := meanSE(means)
				out = append(out, Summary{Variant: v, Job: "mean", Budget: b, Mean: m, StdErr: se, RSquared: r2, N: len(seeds)})
			}
		}
	}
	return out
}

func meanSE(xs []float64) (mean, se float64) {
	n := float64(len(xs))
	for _, x := range xs {
		mean += x
	}
	mean /= n
	if len(xs) < 2 {
		return mean, 0
	}
	var v float64
	for _, x := range xs {
		v += (x - mean) * (x - mean)
	}
	return mean, math.Sqrt(v / (n - 1) / n)
}
