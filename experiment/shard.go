package experiment

import (
	"cmp"
	"context"
	"fmt"
	"slices"
	"strconv"
	"strings"

	"github.com/successor-go/successor/transfer"
)

// Shard is part Index of Count of the runs of an experiment or a sweep
// (Plan), 0 <= Index < Count. The zero value means the whole: Count 0 is
// read as 1. Its text form is "Index/Count", for example "2/8".
type Shard struct {
	Index, Count int
}

// count returns the number of shards, 0 read as 1.
func (s Shard) count() int { return max(s.Count, 1) }

// check returns an error wrapping ErrConfig unless s is a valid shard.
func (s Shard) check() error {
	if s.Count < 0 || s.Index < 0 || s.Index >= s.count() {
		return fmt.Errorf("experiment: shard index %d out of range for %d shards (want 0 to %d): %w", s.Index, s.Count, s.count()-1, ErrConfig)
	}
	return nil
}

// String returns the text form "Index/Count".
func (s Shard) String() string { return fmt.Sprintf("%d/%d", s.Index, s.count()) }

// MarshalText implements encoding.TextMarshaler.
func (s Shard) MarshalText() ([]byte, error) { return []byte(s.String()), nil }

// UnmarshalText implements encoding.TextUnmarshaler: it reads "i/n" with
// 0 <= i < n, and returns an error wrapping ErrConfig for anything else.
func (s *Shard) UnmarshalText(b []byte) error {
	is, ns, ok := strings.Cut(string(b), "/")
	i, err1 := strconv.Atoi(is)
	n, err2 := strconv.Atoi(ns)
	if !ok || err1 != nil || err2 != nil || n < 1 {
		return fmt.Errorf("experiment: shard %q: want i/n, for example 0/4: %w", b, ErrConfig)
	}
	v := Shard{Index: i, Count: n}
	if err := v.check(); err != nil {
		return err
	}
	*s = v
	return nil
}

// The variables a Slurm job array sets in the environment of every task
// (sbatch(1), "OUTPUT ENVIRONMENT VARIABLES").
const (
	slurmTaskID    = "SLURM_ARRAY_TASK_ID"
	slurmTaskCount = "SLURM_ARRAY_TASK_COUNT"
	slurmTaskMin   = "SLURM_ARRAY_TASK_MIN"
	slurmTaskMax   = "SLURM_ARRAY_TASK_MAX"
	slurmTaskStep  = "SLURM_ARRAY_TASK_STEP"
)

// SlurmShard returns the shard of the running task of a Slurm job array,
// read with getenv (os.Getenv) from SLURM_ARRAY_TASK_ID and
// SLURM_ARRAY_TASK_MIN, SLURM_ARRAY_TASK_MAX, SLURM_ARRAY_TASK_COUNT and
// SLURM_ARRAY_TASK_STEP: the task ids min, min+step, ..., max are shards
// 0, 1, ..., count-1. ok is false, with no error, outside a job array
// (SLURM_ARRAY_TASK_ID unset). An array whose ids are not such a
// progression (sbatch --array=1,4,9), or variables that are missing or
// not numbers, give an error wrapping ErrConfig that names the variables:
// submit the array as --array=0-N (a throttle such as %10 is fine).
func SlurmShard(getenv func(string) string) (s Shard, ok bool, err error) {
	idText := getenv(slurmTaskID)
	if idText == "" {
		return Shard{}, false, nil
	}
	get := func(name string, def int) (int, error) {
		v := getenv(name)
		if v == "" {
			if def >= 0 {
				return def, nil
			}
			return 0, fmt.Errorf("experiment: %s=%s is set but %s is not: %w", slurmTaskID, idText, name, ErrConfig)
		}
		n, err := strconv.Atoi(v)
		if err != nil || n < 0 {
			return 0, fmt.Errorf("experiment: %s=%q is not a task id: %w", name, v, ErrConfig)
		}
		return n, nil
	}
	id, err := get(slurmTaskID, -1)
	if err != nil {
		return Shard{}, false, err
	}
	lo, err := get(slurmTaskMin, -1)
	if err != nil {
		return Shard{}, false, err
	}
	hi, err := get(slurmTaskMax, -1)
	if err != nil {
		return Shard{}, false, err
	}
	step, err := get(slurmTaskStep, 1)
	if err != nil {
		return Shard{}, false, err
	}
	step = max(step, 1)
	n, err := get(slurmTaskCount, (hi-lo)/step+1)
	if err != nil {
		return Shard{}, false, err
	}
	env := fmt.Sprintf("%s=%d, %s=%d, %s=%d, %s=%d, %s=%d", slurmTaskID, id, slurmTaskMin, lo, slurmTaskMax, hi, slurmTaskStep, step, slurmTaskCount, n)
	if hi < lo || (hi-lo)%step != 0 || (hi-lo)/step+1 != n {
		return Shard{}, false, fmt.Errorf("experiment: job array ids are not min, min+step, ..., max (%s): submit it as --array=0-N: %w", env, ErrConfig)
	}
	if id < lo || id > hi || (id-lo)%step != 0 {
		return Shard{}, false, fmt.Errorf("experiment: task id outside its job array (%s): %w", env, ErrConfig)
	}
	return Shard{Index: (id - lo) / step, Count: n}, true, nil
}

// Unit is one independent run of an experiment, the unit that shards
// share out: the pretraining of one method on one seed with the
// adaptation of the agent to every job, or the from-scratch baselines of
// one seed. Each keeps its record in the checkpoint folder.
type Unit struct {
	// Setting is the name of the sweep setting the unit belongs to (the
	// subfolder of its files); empty for a single experiment.
	Setting string
	// Method is the pretrained method; not used when Baselines is set.
	Method transfer.Method
	// Baselines marks the baselines of the seed.
	Baselines bool
	Seed      uint64
	// Cost is the expected cost in environment steps that Plan balances:
	// a method's pretraining steps plus its labelled steps (jobs x the
	// largest budget), or, for the baselines, the steps of their two
	// learners (2 x jobs x the largest budget). Pretraining dominates.
	Cost int
}

// Record returns the file name of the unit's run record:
// <method>-seed<s>.run (RunFiles) or baselines-seed<s>.run.
func (u Unit) Record() string {
	if u.Baselines {
		return baselineFile(u.Seed)
	}
	_, rec := RunFiles(u.Method, u.Seed)
	return rec
}

// String returns "<setting>/<method> seed <s>", without the setting in a
// single experiment.
func (u Unit) String() string {
	name := "baselines"
	if !u.Baselines {
		name = u.Method.String()
	}
	if u.Setting != "" {
		name = u.Setting + "/" + name
	}
	return fmt.Sprintf("%s seed %d", name, u.Seed)
}

// publicUnit returns the exported description of unit u of the resolved
// experiment r.
func (r *Experiment) publicUnit(u unit, setting string) Unit {
	labelled := len(r.Jobs) * r.Budgets[len(r.Budgets)-1]
	if u.method < 0 {
		return Unit{Setting: setting, Baselines: true, Seed: r.Seeds[u.seed], Cost: 2 * labelled}
	}
	m := r.Methods[u.method]
	return Unit{Setting: setting, Method: m.Method, Seed: r.Seeds[u.seed], Cost: m.Steps + labelled}
}

// Units returns every unit of the experiment in the order of its results
// (for every seed its methods, then its baselines), or an error wrapping
// ErrConfig if the experiment does not resolve.
func (e *Experiment) Units() ([]Unit, error) {
	r, err := e.Resolve()
	if err != nil {
		return nil, err
	}
	var out []Unit
	for _, u := range r.units() {
		out = append(out, r.publicUnit(u, ""))
	}
	return out, nil
}

// Plan returns the units of each of n shards: Plan(n)[i] are the units
// that shard i/n runs, in the order it runs them. The assignment is the
// longest-processing-time rule (Graham 1969, "Bounds on multiprocessing
// timing anomalies"): the units in decreasing order of Cost (ties in
// results order), each to the shard with the least total cost so far
// (ties to the lowest index). Its largest shard costs at most
// 4/3 - 1/(3n) times the best possible (ibid.). It depends
// only on the experiment and n, so every shard of a job array computes
// the same plan on its own. Shards beyond the number of units are empty.
// n < 1 or an experiment that does not resolve is an error wrapping
// ErrConfig.
func (e *Experiment) Plan(n int) ([][]Unit, error) {
	if n < 1 {
		return nil, fmt.Errorf("experiment: %d shards: %w", n, ErrConfig)
	}
	us, err := e.Units()
	if err != nil {
		return nil, err
	}
	return planUnits(us, n), nil
}

// planUnits splits us into n shards (see Plan).
func planUnits(us []Unit, n int) [][]Unit {
	out := make([][]Unit, n)
	for k, idx := range planIndices(us, n) {
		for _, i := range idx {
			out[k] = append(out[k], us[i])
		}
	}
	return out
}

// planIndices returns, for each of n shards, the indices in us of its
// units in the order they run (see Plan).
func planIndices(us []Unit, n int) [][]int {
	costs := make([]int, len(us))
	for i, u := range us {
		costs[i] = u.Cost
	}
	order, bin := assign(costs, n)
	out := make([][]int, n)
	for _, i := range order {
		out[bin[i]] = append(out[bin[i]], i)
	}
	return out
}

// assign returns the longest-processing-time assignment of items with the
// given costs to n bins: the order in which the items are placed
// (decreasing cost, ties by index) and the bin of each item (the least
// loaded so far, ties to the lowest bin).
func assign(costs []int, n int) (order, bin []int) {
	order = make([]int, len(costs))
	for i := range order {
		order[i] = i
	}
	slices.SortStableFunc(order, func(a, b int) int { return cmp.Compare(costs[b], costs[a]) })
	bin = make([]int, len(costs))
	load := make([]int, n)
	for _, i := range order {
		best := 0
		for k := 1; k < n; k++ {
			if load[k] < load[best] {
				best = k
			}
		}
		bin[i] = best
		load[best] += costs[i]
	}
	return order, bin
}

// ShardReport says what RunShard did.
type ShardReport struct {
	Shard Shard
	// Units are the shard's units in the order they were started (Plan).
	Units []Unit
	// Resumed lists the runs that continued from the checkpoint folder
	// (see Results.Resumed).
	Resumed []ResumedRun
}

// RunShard runs shard s of the experiment: the units Plan(s.Count)[s.Index]
// on Workers goroutines, each keeping its checkpoint and its record in
// CheckpointDir exactly as RunContext does, so that a stopped shard
// continues where it stopped when run again. Each shard runs in a process
// of its own (a task of a job array); all write into one shared
// CheckpointDir, and Merge then reads the records of every shard and
// returns the figures of a single RunContext. Progress counts the steps of
// the shard's own runs.
//
// An experiment without CheckpointDir, a shard out of range or an
// experiment that does not resolve is an error wrapping ErrConfig; a
// foreign or corrupt file in the folder one wrapping ErrCheckpoint that
// names the file.
func (e *Experiment) RunShard(ctx context.Context, s Shard) (*ShardReport, error) {
	if err := s.check(); err != nil {
		return nil, err
	}
	r, err := e.Resolve()
	if err != nil {
		return nil, err
	}
	if r.CheckpointDir == "" {
		return nil, fmt.Errorf("experiment: a shard needs a CheckpointDir to keep its records: %w", ErrConfig)
	}
	us := r.units()
	pub := make([]Unit, len(us))
	for i, u := range us {
		pub[i] = r.publicUnit(u, "")
	}
	rep := &ShardReport{Shard: s}
	var tasks []task
	if mine := planIndices(pub, s.count())[s.Index]; len(mine) > 0 {
		sc, err := r.prepare()
		if err != nil {
			return nil, err
		}
		for _, i := range mine {
			tasks = append(tasks, task{r: r, sc: sc, u: us[i]})
			rep.Units = append(rep.Units, pub[i])
		}
	}
	outs, err := runTasks(ctx, tasks, r.Workers, r.Progress)
	if err != nil {
		return nil, err
	}
	for _, o := range outs {
		if o.resumed != nil {
			rep.Resumed = append(rep.Resumed, *o.resumed)
		}
	}
	return rep, nil
}
