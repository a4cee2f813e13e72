package transfer

import (
	"context"
	"fmt"
	"math"
	"os"
	"runtime"
	"sync"
	"time"

	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/sf"
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
type Experiment struct {
	// Task is the finite MDP of the jobs; its start distribution is the one
	// the policies are scored from and the labelled episodes start from.
	Task *mdp.Finite `json:"-"`
	// Explore is the MDP of the reward-free phase (for example Task with
	// another start distribution); nil means Task.
	Explore *mdp.Finite `json:"-"`
	// Places are the place features the jobs are defined on (and the
	// features of Method Given and of the SF Q-learning baseline).
	Places sf.FeatureMap `json:"-"`
	// PlaceNames names the dimensions of Places (for the results file).
	PlaceNames []string `json:"place_names"`
	Jobs       []Job    `json:"jobs"`
	// Methods are pretrained and each scored in three variants (see
	// SuffixGPI, SuffixNoGPI, SuffixModelFit).
	Methods []Method `json:"methods"`
	// Seeds are the runs; each determines its run completely.
	Seeds []uint64 `json:"seeds"`
	// Budgets are the labelled budgets, ascending; the last is the one of
	// the results table.
	Budgets []int `json:"budgets"`
	// Baselines adds tabular Q-learning and SF Q-learning with Places from
	// scratch.
	Baselines bool `json:"baselines"`
	// Gamma is the discount of the jobs (scoring and baselines). 0 means
	// 0.95. It may differ from Pretrain.Gamma, the horizon of the skills.
	Gamma float64 `json:"gamma"`

	Pretrain PretrainConfig `json:"pretrain"`
	Adapt    AdaptConfig    `json:"adapt"`
	Baseline BaselineConfig `json:"baseline"`

	// Workers is the number of goroutines; 0 means runtime.GOMAXPROCS(0).
	// The figures do not depend on it.
	Workers int `json:"-"`
	// Progress, if not nil, is called (never concurrently) with the total
	// pretraining steps done so far and the total planned.
	Progress func(done, total int) `json:"-"`
	// Keep, if not nil, receives every pretrained agent (called
	// concurrently from the workers), also one read back from
	// CheckpointDir.
	Keep func(m Method, seed uint64, ag *Agent) `json:"-"`

	// CheckpointDir, if not empty, is a folder (created if missing) in
	// which every pretraining run (method m, seed s) keeps its state, so an
	// interrupted experiment loses at most a few steps per run:
	//
	//	<m>-seed<s>.ckpt  the agent's checkpoint (Agent.Save format), written
	//	                  every Pretrain.CheckpointEvery steps (0 means
	//	                  Steps/5), when stopped by RunContext's context,
	//	                  and at the end of pretraining;
	//	<m>-seed<s>.run   the run's record: a fingerprint of everything its
	//	                  figures depend on, its final MI estimate and, once
	//	                  adapted, its result rows (JSON with a CRC-32C).
	//
	// m is the method's text form (vmf, categorical, random, given) and s
	// the experiment seed in decimal. On start a run with result rows
	// takes them as they are; one with a finished checkpoint skips to
	// adaptation; one with a partial checkpoint resumes pretraining from
	// it (Resume); a run without files starts afresh. The figures are
	// then bit-identical to those of an uninterrupted experiment (the
	// timings aside). A checkpoint or record of another configuration is
	// an error wrapping ErrCheckpoint, never mixed in: the fingerprint
	// covers the pretraining, adaptation and job settings, the budgets,
	// the MDP sizes and the place features at every next state, but not
	// the transition probabilities of Task and Explore, which are the
	// caller's to keep fixed within a folder. The baselines are cheap and
	// always recomputed. Results.Resumed lists what was read back.
	CheckpointDir string `json:"-"`
}

// ResumedRun says what an experiment read back from its CheckpointDir for
// one pretraining run.
type ResumedRun struct {
	Method Method
	Seed   uint64
	// Steps is the number of pretraining steps in the checkpoint (or of
	// the finished run for Adapted).
	Steps int
	// Pretrained reports that pretraining had finished, and Adapted that
	// the result rows were read rather than recomputed.
	Pretrained, Adapted bool
}

// Variant names. A pretrained method m is scored in three variants, named
// m + one of the suffixes: SuffixGPI (the pure successor-feature method:
// GPI over the universal SFs at the skills nearest w), SuffixNoGPI (greedy
// on the single nearest skill's psi . w) and SuffixModelFit (GPI with the
// model-based Q(., ., w) of FitModel added to the candidates). The
// baselines are named VariantQLearning and VariantSFQLearning.
const (
	VariantQLearning   = "q-learning"
	VariantSFQLearning = "sf-q-learning"
	SuffixGPI          = ":usf+gpi"
	SuffixNoGPI        = ":usf-no-gpi"
	SuffixModelFit     = ":model-fit+gpi"
)

// VariantInfo states what a variant of the results is.
type VariantInfo struct {
	Name string `json:"name"`
	// Method is the pretraining method; empty for the baselines.
	Method string `json:"method,omitempty"`
	// GPI reports whether the policy takes GPI over several candidates,
	// and Fit whether the model-based candidate is among them.
	GPI         bool    `json:"gpi"`
	Fit         FitMode `json:"fit"`
	Description string  `json:"description"`
}

func methodVariants(m Method, candidates int) []VariantInfo {
	n := candidates
	if n == 0 {
		n = 8
	}
	return []VariantInfo{
		{Name: m.String() + SuffixGPI, Method: m.String(), GPI: n > 0, Fit: FitNone,
			Description: fmt.Sprintf("successor-feature transfer: GPI over psi(s, a, z) . w for the %d skills z nearest the inferred w (cosine)", max(n, 1))},
		{Name: m.String() + SuffixNoGPI, Method: m.String(), GPI: false, Fit: FitNone,
			Description: "successor-feature transfer without GPI: greedy in psi(s, a, z) . w for the single skill z nearest the inferred w"},
		{Name: m.String() + SuffixModelFit, Method: m.String(), GPI: true, Fit: FitModel,
			Description: fmt.Sprintf("model-based evaluation of the inferred task on the empirical model of the reward-free data (value iteration on the counts of every reward-free transition), GPI with the %d nearest skills' psi . w", max(n, 0))},
	}
}

var baselineVariants = []VariantInfo{
	{Name: VariantQLearning, Description: "tabular Q-learning from scratch on the labelled budget"},
	{Name: VariantSFQLearning, Description: "SF Q-learning from scratch with the given place features on the labelled budget"},
}

// Record is one scored policy.
type Record struct {
	Variant    string  `json:"variant"`
	Job        string  `json:"job"`
	Budget     int     `json:"budget"`
	Seed       uint64  `json:"seed"`
	Normalised float64 `json:"normalised"`
	Value      float64 `json:"value"`
	// RSquared and Residual are the task-inference fit (pretrained
	// variants only; 0 for the baselines).
	RSquared float64 `json:"r_squared"`
	Residual float64 `json:"residual"`
	// Rewarded is the number of labelled transitions with a non-zero
	// reward (pretrained variants only).
	Rewarded int `json:"rewarded"`
	// Lambda is the ridge penalty of the task inference.
	Lambda float64 `json:"lambda"`
}

// Summary is the mean and standard error over seeds of one (variant, job,
// budget); Job "mean" averages the per-seed job means.
type Summary struct {
	Variant  string  `json:"variant"`
	Job      string  `json:"job"`
	Budget   int     `json:"budget"`
	Mean     float64 `json:"mean"`
	StdErr   float64 `json:"std_err"`
	RSquared float64 `json:"r_squared"`
	N        int     `json:"n"`
}

// PretrainStats summarises the pretraining of one method over the seeds.
type PretrainStats struct {
	Method Method `json:"method"`
	// Seconds is the mean wall-clock time per run and StepsPerSecond the
	// mean throughput (these depend on the machine, unlike every other
	// figure).
	Seconds        float64 `json:"seconds"`
	StepsPerSecond float64 `json:"steps_per_second"`
	Steps          int     `json:"steps"`
	// FinalMI is the mean over seeds of the last reported MI estimate (VMF
	// and Categorical).
	FinalMI float64 `json:"final_mi"`
}

// Results is everything an experiment measured.
type Results struct {
	Records  []Record        `json:"records"`
	Summary  []Summary       `json:"summary"`
	Pretrain []PretrainStats `json:"pretrain"`
	// Variants lists the variants in table order, and VariantInfo says
	// what each is.
	Variants    []string      `json:"variants"`
	VariantInfo []VariantInfo `json:"variant_info"`
	// Resumed lists the runs that continued from Experiment.CheckpointDir,
	// in unit order (not in the results file: the figures do not depend
	// on it).
	Resumed []ResumedRun `json:"-"`
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
// checkpoint there if CheckpointDir is set), and RunContext returns an
// error wrapping ctx.Err() once the running units have stopped. With a
// CheckpointDir, a later run continues where this one stopped.
func (e *Experiment) RunContext(ctx context.Context) (*Results, error) {
	if err := e.check(); err != nil {
		return nil, err
	}
	if e.CheckpointDir != "" {
		if err := os.MkdirAll(e.CheckpointDir, 0o755); err != nil {
			return nil, fmt.Errorf("transfer: checkpoint folder: %w", err)
		}
	}
	refs := make([]*Reference, len(e.Jobs))
	rewards := make([]mdp.Reward, len(e.Jobs))
	gamma := e.gamma()
	for j, job := range e.Jobs {
		rewards[j] = placeReward(e.Places, job.Weights)
		ref, err := NewReference(e.Task, rewards[j], gamma)
		if err != nil {
			return nil, fmt.Errorf("transfer: job %q: %w", job.Name, err)
		}
		refs[j] = ref
	}

	type unit struct {
		seed   int
		method int // -1: baselines
	}
	var units []unit
	for si := range e.Seeds {
		for mi := range e.Methods {
			units = append(units, unit{si, mi})
		}
		if e.Baselines {
			units = append(units, unit{si, -1})
		}
	}
	out := make([][]Record, len(units))
	times := make([]float64, len(units))
	mis := make([]float64, len(units))
	steps := make([]int, len(units))
	errs := make([]error, len(units))
	resumed := make([]*ResumedRun, len(units))

	pc, _ := e.Pretrain.withDefaults()
	total := len(e.Seeds) * len(e.Methods) * pc.Steps
	var mu sync.Mutex
	done := 0
	addSteps := func(k int) {
		if e.Progress == nil || k == 0 {
			return
		}
		mu.Lock()
		done += k
		e.Progress(done, total)
		mu.Unlock()
	}

	workers := e.Workers
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	next := make(chan int)
	var wg sync.WaitGroup
	for range min(workers, len(units)) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for ui := range next {
				u := units[ui]
				seed := e.Seeds[u.seed]
				if err := ctx.Err(); err != nil {
					errs[ui] = err
					continue
				}
				if u.method < 0 {
					out[ui], errs[ui] = e.runBaselines(seed, rewards, refs)
					continue
				}
				m := e.Methods[u.method]
				t0 := time.Now()
				r, err := e.runMethod(ctx, m, seed, rewards, refs, addSteps)
				times[ui] = time.Since(t0).Seconds()
				if err != nil {
					errs[ui] = err
					continue
				}
				out[ui], steps[ui], mis[ui], resumed[ui] = r.recs, r.steps, r.mi, r.resumed
			}
		}()
	}
	for ui := range units {
		next <- ui
	}
	close(next)
	wg.Wait()
	for ui, err := range errs {
		if err != nil {
			return nil, fmt.Errorf("transfer: seed %d: %w", e.Seeds[units[ui].seed], err)
		}
	}

	res := &Results{}
	for _, r := range resumed {
		if r != nil {
			res.Resumed = append(res.Resumed, *r)
		}
	}
	for _, m := range e.Methods {
		res.VariantInfo = append(res.VariantInfo, methodVariants(m, e.Adapt.Candidates)...)
	}
	if e.Baselines {
		res.VariantInfo = append(res.VariantInfo, baselineVariants...)
	}
	for _, v := range res.VariantInfo {
		res.Variants = append(res.Variants, v.Name)
	}
	for _, recs := range out {
		res.Records = append(res.Records, recs...)
	}
	for mi, m := range e.Methods {
		st := PretrainStats{Method: m}
		var n float64
		for ui, u := range units {
			if u.method == mi {
				st.Seconds += times[ui]
				st.Steps += steps[ui]
				st.FinalMI += mis[ui]
				if times[ui] > 0 {
					st.StepsPerSecond += float64(steps[ui]) / times[ui]
				}
				n++
			}
		}
		st.Seconds /= n
		st.Steps = int(float64(st.Steps) / n)
		st.FinalMI /= n
		st.StepsPerSecond /= n
		res.Pretrain = append(res.Pretrain, st)
	}
	res.Summary = summarise(res.Records, res.Variants, e.Jobs, e.Budgets, e.Seeds)
	return res, nil
}

func (e *Experiment) gamma() float64 {
	if e.Gamma == 0 {
		return 0.95
	}
	return e.Gamma
}

func (e *Experiment) check() error {
	switch {
	case e.Task == nil || e.Places == nil:
		return fmt.Errorf("transfer: experiment needs Task and Places: %w", ErrConfig)
	case len(e.Jobs) == 0 || len(e.Seeds) == 0 || len(e.Budgets) == 0:
		return fmt.Errorf("transfer: experiment needs jobs, seeds and budgets: %w", ErrConfig)
	case !(e.Gamma >= 0 && e.Gamma < 1):
		return fmt.Errorf("transfer: experiment gamma %v outside [0, 1): %w", e.Gamma, ErrConfig)
	case len(e.Methods) == 0 && !e.Baselines:
		return fmt.Errorf("transfer: experiment has nothing to run: %w", ErrConfig)
	}
	for i, b := range e.Budgets {
		if b < 1 || i > 0 && b <= e.Budgets[i-1] {
			return fmt.Errorf("transfer: budgets must be positive and increasing: %w", ErrConfig)
		}
	}
	for _, j := range e.Jobs {
		if len(j.Weights) != e.Places.Dim() {
			return fmt.Errorf("transfer: job %q has %d weights for %d place features: %w", j.Name, len(j.Weights), e.Places.Dim(), ErrConfig)
		}
	}
	if e.Explore != nil && (e.Explore.NumStates() != e.Task.NumStates() || e.Explore.NumActions() != e.Task.NumActions()) {
		return fmt.Errorf("transfer: explore and task MDPs differ in size: %w", ErrConfig)
	}
	p := e.Pretrain
	p.Features = e.Places
	if _, err := p.withDefaults(); err != nil {
		return err
	}
	if _, err := e.Adapt.withDefaults(); err != nil {
		return err
	}
	if _, err := e.Baseline.withDefaults(); err != nil {
		return err
	}
	return nil
}

// DeriveSeed returns the seed of a sub-run (a method, a job) of the run with
// the given seed: a SplitMix64 mix (Steele et al. 2014) of seed and the
// sub-run's index.
func DeriveSeed(seed uint64, index uint64) uint64 {
	z := seed + 0x9e3779b97f4a7c15*(index+1)
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

// adaptAll scores agent ag on every job and budget in the three variants
// of methodVariants.
func (e *Experiment) adaptAll(ag *Agent, seed uint64, rewards []mdp.Reward, refs []*Reference) ([]Record, error) {
	ac, _ := e.Adapt.withDefaults()
	env := mdp.NewSampler(e.Task, ac.EpisodeSteps)
	maxB := e.Budgets[len(e.Budgets)-1]
	var recs []Record
	vars := methodVariants(ag.Method(), e.Adapt.Candidates)
	for j, job := range e.Jobs {
		lab, err := Collect(env, ag, rewards[j], maxB, e.Adapt, DeriveSeed(seed, 1000+uint64(j)))
		if err != nil {
			return nil, err
		}
		for _, b := range e.Budgets {
			inf, err := infer(ag, lab[:b], ac)
			if err != nil {
				return nil, fmt.Errorf("job %q: %w", job.Name, err)
			}
			for _, v := range vars {
				cfg := e.Adapt
				cfg.Fit = v.Fit
				if !v.GPI {
					cfg.Candidates = -1
				}
				pol, err := ag.Policy(inf, cfg)
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

func (e *Experiment) runBaselines(seed uint64, rewards []mdp.Reward, refs []*Reference) ([]Record, error) {
	bc, _ := e.Baseline.withDefaults()
	bc.Gamma = e.gamma()
	var recs []Record
	for j, job := range e.Jobs {
		env := mdp.NewSampler(e.Task, bc.EpisodeSteps)
		qp, err := QLearning(env, rewards[j], e.Budgets, bc, DeriveSeed(seed, 2000+uint64(j)))
		if err != nil {
			return nil, err
		}
		sp, err := SFQLearning(env, e.Places, rewards[j], e.Budgets, bc, DeriveSeed(seed, 3000+uint64(j)))
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
		return dot(f, w)
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

// Lookup returns the summary of (variant, job, budget).
func (r *Results) Lookup(variant, job string, budget int) (Summary, bool) {
	for _, s := range r.Summary {
		if s.Variant == variant && s.Job == job && s.Budget == budget {
			return s, true
		}
	}
	return Summary{}, false
}
