package experiment

import (
	"context"
	"fmt"
	"os"
	"runtime"
	"sync"
	"time"

	"github.com/successor-go/successor/internal/fileio"
	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/transfer"
)

// unit is one independent piece of work of a resolved experiment: the
// pretraining of method Methods[method] on seed Seeds[seed] and the
// adaptation of the agent to every job, or (method < 0) the baselines of
// the seed. Single runs, shards and merges all go through units, so they
// give the same figures.
type unit struct {
	seed   int
	method int // -1: baselines
}

// units returns every unit of the resolved experiment r in the order of
// its results: for every seed, its methods in order, then its baselines.
func (r *Experiment) units() []unit {
	var us []unit
	for si := range r.Seeds {
		for mi := range r.Methods {
			us = append(us, unit{si, mi})
		}
		if r.Baselines {
			us = append(us, unit{si, -1})
		}
	}
	return us
}

// unitOut is what one unit produced: its result rows, its wall-clock
// seconds, and for a pretrained method its steps, the steps run in the
// measured seconds, its final MI estimate and what was read back from the
// checkpoint folder.
type unitOut struct {
	recs    []Record
	seconds float64
	steps   int
	ran     int
	mi      float64
	resumed *ResumedRun
}

// scoring holds what every unit of a resolved experiment shares: the
// reward and the exact reference of every job.
type scoring struct {
	rewards []mdp.Reward
	refs    []*transfer.Reference
}

// prepare creates the checkpoint folder if there is one, checks that it
// can write there, and computes the references of the jobs. r is
// resolved.
func (r *Experiment) prepare() (*scoring, error) {
	if r.CheckpointDir != "" {
		if err := os.MkdirAll(r.CheckpointDir, 0o755); err != nil {
			return nil, fmt.Errorf("experiment: checkpoint folder: %w", err)
		}
		if err := fileio.CheckWritable(r.CheckpointDir); err != nil {
			return nil, fmt.Errorf("experiment: checkpoint folder: %w", err)
		}
	}
	sc := &scoring{refs: make([]*transfer.Reference, len(r.Jobs)), rewards: make([]mdp.Reward, len(r.Jobs))}
	for j, job := range r.Jobs {
		sc.rewards[j] = placeReward(r.Places, job.Weights)
		ref, err := transfer.NewReference(r.Task, sc.rewards[j], r.TaskGamma)
		if err != nil {
			return nil, fmt.Errorf("experiment: job %q: %w", job.Name, err)
		}
		sc.refs[j] = ref
	}
	return sc, nil
}

// task is a unit of a resolved experiment with what the unit needs to run;
// label prefixes its error messages ("" in a single experiment, the
// setting in a sweep).
type task struct {
	r     *Experiment
	sc    *scoring
	u     unit
	label string
}

// runTasks runs the tasks on workers goroutines (0 means
// runtime.GOMAXPROCS(0)) in the order given and returns their outputs in
// that order. progress, if not nil, is called (never concurrently) with
// the pretraining steps done so far and the total of the tasks. When ctx
// is done no task starts and running ones stop (see RunContext). The
// error is that of the first failed task in the order given.
func runTasks(ctx context.Context, tasks []task, workers int, progress func(done, total int)) ([]unitOut, error) {
	if err := removeOrphans(tasks); err != nil {
		return nil, err
	}
	total := 0
	for _, t := range tasks {
		if t.u.method >= 0 {
			total += t.r.Methods[t.u.method].Steps
		}
	}
	var mu sync.Mutex
	done := 0
	addSteps := func(k int) {
		if progress == nil || k == 0 {
			return
		}
		mu.Lock()
		done += k
		progress(done, total)
		mu.Unlock()
	}

	outs := make([]unitOut, len(tasks))
	errs := make([]error, len(tasks))
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	next := make(chan int)
	var wg sync.WaitGroup
	for range min(workers, len(tasks)) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for ti := range next {
				if err := ctx.Err(); err != nil {
					errs[ti] = err
					continue
				}
				outs[ti], errs[ti] = tasks[ti].run(ctx, addSteps)
			}
		}()
	}
	for ti := range tasks {
		next <- ti
	}
	close(next)
	wg.Wait()
	for ti, err := range errs {
		if err != nil {
			t := tasks[ti]
			return nil, fmt.Errorf("experiment: %sseed %d: %w", t.label, t.r.Seeds[t.u.seed], err)
		}
	}
	return outs, nil
}

// unitFiles returns the names of the files unit u of the resolved r keeps
// in its CheckpointDir.
func (r *Experiment) unitFiles(u unit) []string {
	seed := r.Seeds[u.seed]
	if u.method < 0 {
		return []string{baselineFile(seed)}
	}
	ck, rec := RunFiles(r.Methods[u.method].Method, seed)
	return []string{ck, rec}
}

// removeOrphans removes from the checkpoint folders of the tasks the
// temporary files that an earlier process, killed while saving, left of
// the tasks' own checkpoints and records (up to 90 MB each for the depot
// demo). Only those are removed: the temporary files of other runs may be
// writes in progress of other shards sharing the folder.
func removeOrphans(tasks []task) error {
	ours := map[string]map[string]bool{} // folder -> file names
	for _, t := range tasks {
		dir := t.r.CheckpointDir
		if dir == "" {
			continue
		}
		if ours[dir] == nil {
			ours[dir] = map[string]bool{}
		}
		for _, name := range t.r.unitFiles(t.u) {
			ours[dir][name] = true
		}
	}
	for dir, names := range ours {
		if _, err := fileio.RemoveTemps(dir, func(dest string) bool { return names[dest] }); err != nil {
			return fmt.Errorf("experiment: checkpoint folder: %w", err)
		}
	}
	return nil
}

// run runs one task.
func (t task) run(ctx context.Context, addSteps func(int)) (unitOut, error) {
	r, seed := t.r, t.r.Seeds[t.u.seed]
	t0 := time.Now()
	if t.u.method < 0 {
		recs, err := r.baselineUnit(seed, t.sc)
		return unitOut{recs: recs, seconds: time.Since(t0).Seconds()}, err
	}
	res, err := r.runMethod(ctx, r.Methods[t.u.method], seed, t.sc.rewards, t.sc.refs, addSteps)
	if err != nil {
		return unitOut{}, err
	}
	return unitOut{recs: res.recs, seconds: time.Since(t0).Seconds(), steps: res.steps, ran: res.ran, mi: res.mi, resumed: res.resumed}, nil
}

// assemble returns the results of the resolved experiment r from the
// outputs of all its units (outs[i] of r.units()[i]).
func (r *Experiment) assemble(outs []unitOut) *Results {
	us := r.units()
	res := &Results{}
	for _, o := range outs {
		if o.resumed != nil {
			res.Resumed = append(res.Resumed, *o.resumed)
		}
	}
	for _, m := range r.Methods {
		res.VariantInfo = append(res.VariantInfo, methodVariants(m.Method, r.Adapt)...)
	}
	if r.Baselines {
		res.VariantInfo = append(res.VariantInfo, baselineVariants...)
	}
	for _, v := range res.VariantInfo {
		res.Variants = append(res.Variants, v.Name)
	}
	for _, o := range outs {
		res.Records = append(res.Records, o.recs...)
	}
	for mi, m := range r.Methods {
		st := PretrainStats{Method: m.Method}
		var n, nRan float64
		for ui, u := range us {
			if u.method == mi {
				o := outs[ui]
				st.Seconds += o.seconds
				st.Steps += o.steps
				st.FinalMI += o.mi
				// Only the steps run in the measured time count: a
				// resumed run's earlier steps were timed elsewhere.
				if o.ran > 0 && o.seconds > 0 {
					st.StepsPerSecond += float64(o.ran) / o.seconds
					nRan++
				}
				n++
			}
		}
		st.Seconds /= n
		st.Steps = int(float64(st.Steps) / n)
		st.FinalMI /= n
		if nRan > 0 {
			st.StepsPerSecond /= nRan
		}
		res.Pretrain = append(res.Pretrain, st)
	}
	res.Summary = summarise(res.Records, res.Variants, r.Jobs, r.Budgets, r.Seeds)
	return res
}
