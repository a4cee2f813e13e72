// Command cluster runs a sweep of the depot experiment, a grid of settings
// (feature dimension x number of skills x discriminator concentration) x
// seeds, on one machine or spread over the tasks of a Slurm job array, and
// merges the shards' records into the results a single machine would have
// written, bit for bit (the timings aside).
//
// The depot floor (mdp.Depot) and the jobs below are invented demo data,
// the same as those of examples/depot. Policies learned in such a
// simulation must not drive a physical machine without a proper safety
// review.
//
// Usage:
//
//	go run ./examples/cluster [flags]            the whole sweep here
//	go run ./examples/cluster -shard 2/8 [flags] shard 2 of 8 only
//	go run ./examples/cluster -merge [flags]     merge the shards' records
//	go run ./examples/cluster -plan 8 [flags]    print the shards, run nothing
//
// Inside a task of a Slurm job array (SLURM_ARRAY_TASK_ID set) the program
// runs that task's shard unless -shard says otherwise. Every shard keeps
// its runs' checkpoints and records in the folder of -records, which must
// be shared by all tasks (a network file system); a task that is stopped
// and started again continues where it stopped. A run's checkpoint is
// removed once its record is written (-keep-checkpoints keeps it), so the
// folder ends with a record of about 16 kB per run. -merge reads the records
// of every shard and writes, into -out, each setting's results.json and
// results.csv and the whole grid's sweep.csv and sweep.json. Every run
// must be given the same flags (the grid, the seeds, the steps); records
// of other flags are refused by name.
//
// The batch scripts beside this file submit a sweep to Slurm:
// submit.sh builds the program and submits array.sbatch (the shards) and
// merge.sbatch (the merge, sbatch --dependency=afterok on the array).
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"slices"
	"strconv"
	"strings"
	"text/tabwriter"
	"time"

	"github.com/successor-go/successor/experiment"
	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/sf"
	"github.com/successor-go/successor/transfer"
)

// errUsage marks a bad command line (exit status 2).
var errUsage = errors.New("bad command line")

func main() {
	if err := run(os.Args[1:], os.Getenv, os.Stdout, os.Stderr); err != nil {
		fmt.Fprintln(os.Stderr, "cluster:", err)
		if errors.Is(err, errUsage) {
			os.Exit(2)
		}
		os.Exit(1)
	}
}

// options are the command-line settings.
type options struct {
	records, out string
	shard        experiment.Shard
	shardSet     bool
	merge        bool
	plan         int
	methods      []transfer.Method
	dims, skills []float64
	kappas       []float64
	seeds        int
	firstSeed    uint64
	steps        int
	budget       int
	workers      int
	keepCkpt     bool
}

func parseFlags(args []string, stderr io.Writer) (*options, error) {
	fs := flag.NewFlagSet("cluster", flag.ContinueOnError)
	fs.SetOutput(stderr)
	o := &options{}
	var methods, dims, skills, kappas string
	var quick bool
	fs.StringVar(&o.records, "records", "depot-sweep-records", "folder of the runs' checkpoints and records, shared by all shards (created if missing)")
	fs.StringVar(&o.out, "out", "depot-sweep-out", "folder of the merged results (created if missing)")
	fs.TextVar(&o.shard, "shard", experiment.Shard{}, "run only shard `i/n` (default: the task's shard inside a Slurm job array, else the whole sweep)")
	fs.BoolVar(&o.merge, "merge", false, "merge the records of all shards and write the results")
	fs.IntVar(&o.plan, "plan", 0, "print how the runs are shared out to `n` shards, with their expected costs, and exit")
	fs.StringVar(&methods, "methods", "vmf", "comma-separated pretraining methods: vmf, categorical, random, given")
	fs.StringVar(&dims, "dims", "16,64", "feature dimensions d of the sphere methods (vmf, random)")
	fs.StringVar(&skills, "skills", "32,128", "numbers of skills K")
	fs.StringVar(&kappas, "kappas", "5,10", "von Mises-Fisher concentrations of the discriminator (vmf)")
	fs.IntVar(&o.seeds, "seeds", 5, "number of seeds of every setting")
	fs.Uint64Var(&o.firstSeed, "seed", 1, "first seed; the runs use seed, seed+1, ...")
	fs.IntVar(&o.steps, "steps", 100000, "pretraining steps per run")
	fs.IntVar(&o.budget, "budget", 1000, "labelled transitions per job")
	fs.IntVar(&o.workers, "workers", 0, "parallel runs in this process (0: one per CPU); the figures do not depend on it")
	fs.BoolVar(&o.keepCkpt, "keep-checkpoints", false, "keep every run's checkpoint (up to 90 MB each) after its record is written; by default only the records stay")
	fs.BoolVar(&quick, "quick", false, "a small sweep for tests: methods vmf,given, dims 4,8, skills 16, kappas 5, 2 seeds, 2000 steps, budget 100")
	fs.Usage = func() {
		fmt.Fprintf(fs.Output(), "usage: cluster [flags]\n\nA sweep of the invented depot experiment, on one machine or a Slurm job array.\n\n")
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return nil, err
		}
		return nil, fmt.Errorf("%w: %v", errUsage, err)
	}
	if fs.NArg() > 0 {
		return nil, fmt.Errorf("%w: unexpected argument %q (all settings are flags; see -h)", errUsage, fs.Arg(0))
	}
	set := map[string]bool{}
	fs.Visit(func(f *flag.Flag) { set[f.Name] = true })
	o.shardSet = set["shard"]
	if quick {
		def := func(name string, dst *string, v string) {
			if !set[name] {
				*dst = v
			}
		}
		def("methods", &methods, "vmf,given")
		def("dims", &dims, "4,8")
		def("skills", &skills, "16")
		def("kappas", &kappas, "5")
		for name, v := range map[string]struct {
			dst *int
			v   int
		}{"seeds": {&o.seeds, 2}, "steps": {&o.steps, 2000}, "budget": {&o.budget, 100}} {
			if !set[name] {
				*v.dst = v.v
			}
		}
	}
	for _, name := range strings.Split(methods, ",") {
		m, err := transfer.ParseMethod(name)
		if err != nil {
			return nil, fmt.Errorf("%w: -methods: unknown method %q", errUsage, strings.TrimSpace(name))
		}
		if !slices.Contains(o.methods, m) {
			o.methods = append(o.methods, m)
		}
	}
	var err error
	for _, l := range []struct {
		name string
		text string
		dst  *[]float64
		min  float64
		int  bool
	}{{"dims", dims, &o.dims, 2, true}, {"skills", skills, &o.skills, 1, true}, {"kappas", kappas, &o.kappas, 0, false}} {
		if *l.dst, err = parseList(l.text, l.min, l.int); err != nil {
			return nil, fmt.Errorf("%w: -%s: %v", errUsage, l.name, err)
		}
	}
	switch {
	case o.seeds < 1 || o.steps < 1 || o.budget < 1:
		return nil, fmt.Errorf("%w: -seeds %d, -steps %d, -budget %d: each must be at least 1", errUsage, o.seeds, o.steps, o.budget)
	case o.workers < 0 || o.plan < 0:
		return nil, fmt.Errorf("%w: -workers %d, -plan %d: must not be negative", errUsage, o.workers, o.plan)
	case o.records == "" || o.out == "":
		return nil, fmt.Errorf("%w: -records and -out need folder names", errUsage)
	case o.merge && (o.shardSet || o.plan > 0):
		return nil, fmt.Errorf("%w: -merge runs no shard: drop -shard and -plan", errUsage)
	}
	return o, nil
}

// parseList reads comma-separated distinct numbers, each above min (at
// least min for integers), integers if whole is set.
func parseList(s string, min float64, whole bool) ([]float64, error) {
	var out []float64
	for _, f := range strings.Split(s, ",") {
		v, err := strconv.ParseFloat(strings.TrimSpace(f), 64)
		switch {
		case err != nil:
			return nil, fmt.Errorf("%q is not a number", f)
		case whole && (v != float64(int(v)) || v < min):
			return nil, fmt.Errorf("%v: want a whole number of at least %v", v, min)
		case !whole && !(v > min) || v > 1e6:
			return nil, fmt.Errorf("%v: want a number above %v", v, min)
		case slices.Contains(out, v):
			return nil, fmt.Errorf("%v given twice", v)
		}
		out = append(out, v)
	}
	return out, nil
}

// depotJobs returns the held-out jobs of the depot demo (examples/depot).
func depotJobs(g *mdp.Grid) ([]experiment.Job, error) {
	specs := []struct {
		name, desc string
		w          map[string]float64
	}{
		{"bench", "go to the packing bench", map[string]float64{"bench": 1}},
		{"dock-no-lane", "reach the dock, keep off the charging lane", map[string]float64{"dock": 1, "lane": -1, "charger": -1}},
		{"bays", "either shelf bay pays 1, the dock 0.5, the charging pad costs 0.5", map[string]float64{"bay1": 1, "bay2": 1, "dock": 0.5, "charger": -0.5}},
		{"recharge", "end of shift: park on the charging pad, keep clear of the packing bench", map[string]float64{"charger": 1, "bench": -0.5}},
		{"bay2-restock", "restock shelf bay 2, avoiding the charging lane", map[string]float64{"bay2": 1, "lane": -0.5}},
	}
	out := make([]experiment.Job, len(specs))
	for i, s := range specs {
		w, err := g.Weights(s.w)
		if err != nil {
			return nil, err
		}
		out[i] = experiment.Job{Name: s.name, Description: s.desc, Weights: w}
	}
	return out, nil
}

// budgets returns the labelled budgets of the curve, ending at max.
func budgets(max int) []int {
	var b []int
	for _, v := range []int{50, 100, 200, 500} {
		if v < max {
			b = append(b, v)
		}
	}
	return append(b, max)
}

// sweep returns the sweep of the options: the depot experiment of the
// demo (its pretraining settings, jobs, budgets and baselines) with the
// axes dim, skills and kappa.
func sweep(o *options) (*experiment.Sweep, error) {
	g, err := mdp.Depot()
	if err != nil {
		return nil, err
	}
	places, err := sf.GridLabels(g, false)
	if err != nil {
		return nil, err
	}
	js, err := depotJobs(g)
	if err != nil {
		return nil, err
	}
	explore, err := mdp.WithStart(g.MDP, mdp.UniformStart(g.MDP))
	if err != nil {
		return nil, err
	}
	seeds := make([]uint64, o.seeds)
	for i := range seeds {
		seeds[i] = o.firstSeed + uint64(i)
	}
	var methods []transfer.PretrainConfig
	for _, m := range o.methods {
		methods = append(methods, transfer.PretrainConfig{
			Method: m, SkillGamma: 0.99, Steps: o.steps, EpisodeSteps: 50,
		})
	}
	base := &experiment.Experiment{
		Task: g.MDP, Explore: explore, Places: places, PlaceNames: g.LabelNames(),
		Jobs: js, Methods: methods, Seeds: seeds, Budgets: budgets(o.budget),
		Baselines: true, TaskGamma: 0.95, Workers: o.workers,
		DropCheckpoints: !o.keepCkpt,
	}
	return &experiment.Sweep{Base: base, Dir: o.records, Axes: []experiment.Axis{
		{Name: "dim", Values: o.dims, Set: func(e *experiment.Experiment, v float64) error {
			for i := range e.Methods {
				if m := e.Methods[i].Method; m == transfer.VMF || m == transfer.Random {
					e.Methods[i].Dim = int(v)
				}
			}
			return nil
		}},
		{Name: "skills", Values: o.skills, Set: func(e *experiment.Experiment, v float64) error {
			for i := range e.Methods {
				e.Methods[i].Skills = int(v)
			}
			return nil
		}},
		{Name: "kappa", Values: o.kappas, Set: func(e *experiment.Experiment, v float64) error {
			for i := range e.Methods {
				e.Methods[i].Kappa = v
			}
			return nil
		}},
	}}, nil
}

// notes are the remarks written into every results file.
var notes = []string{
	"the depot floor and the jobs are invented demo data, not a real site",
	"pretraining seconds and steps per second depend on the machine; every other figure depends only on the seeds",
}

func run(args []string, getenv func(string) string, stdout, stderr io.Writer) error {
	o, err := parseFlags(args, stderr)
	if err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return nil
		}
		return err
	}
	sw, err := sweep(o)
	if err != nil {
		return err
	}
	settings, err := sw.Settings()
	if err != nil {
		return err
	}
	switch {
	case o.plan > 0:
		return printPlan(stdout, sw, o.plan)
	case o.merge:
		res, err := sw.Merge()
		if err != nil {
			return err
		}
		return finish(stdout, sw, res, o.out)
	}
	shard, inArray, err := experiment.SlurmShard(getenv)
	if err != nil {
		return err
	}
	if o.shardSet || inArray {
		if o.shardSet {
			shard = o.shard
		}
		return runShard(stdout, stderr, sw, shard)
	}

	// The whole sweep in this process: every setting's experiment on its
	// own, resumable from the records folder.
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	fmt.Fprintf(stderr, "cluster: %d settings x %d methods x %d seeds on this machine\n", len(settings), len(o.methods), o.seeds)
	res := make([]experiment.SettingResults, len(settings))
	for i, st := range settings {
		st.Experiment.Progress = progress(stderr, st.Name)
		r, err := st.Experiment.RunContext(ctx)
		if err != nil {
			return fmt.Errorf("setting %s: %w", st.Name, err)
		}
		res[i] = experiment.SettingResults{Setting: st, Results: r}
	}
	return finish(stdout, sw, res, o.out)
}

// runShard runs one shard of the sweep and says what it ran.
func runShard(stdout, stderr io.Writer, sw *experiment.Sweep, s experiment.Shard) error {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	sw.Base.Progress = progress(stderr, "shard "+s.String())
	t0 := time.Now()
	rep, err := sw.RunShard(ctx, s)
	if err != nil {
		return fmt.Errorf("shard %s: %w", s, err)
	}
	fmt.Fprintf(stdout, "shard %s: %d runs in %.1f s, records in %s\n", s, len(rep.Units), time.Since(t0).Seconds(), sw.Dir)
	for _, u := range rep.Units {
		fmt.Fprintf(stdout, "  %s\n", u)
	}
	for _, r := range rep.Resumed {
		fmt.Fprintf(stdout, "  (resumed %s seed %d from step %d)\n", r.Method, r.Seed, r.Steps)
	}
	return nil
}

// printPlan prints the units of each of n shards and their costs.
func printPlan(w io.Writer, sw *experiment.Sweep, n int) error {
	plan, err := sw.Plan(n)
	if err != nil {
		return err
	}
	total, worst, units := 0, 0, 0
	for _, sh := range plan {
		load := 0
		for _, u := range sh {
			load += u.Cost
		}
		total += load
		worst = max(worst, load)
		units += len(sh)
	}
	fmt.Fprintf(w, "%d runs, %d expected steps in all, over %d shards: largest shard %d steps (mean %.0f)\n", units, total, n, worst, float64(total)/float64(n))
	for i, sh := range plan {
		load := 0
		var names []string
		for _, u := range sh {
			load += u.Cost
			names = append(names, u.String())
		}
		fmt.Fprintf(w, "shard %d/%d: %d runs, %d steps: %s\n", i, n, len(sh), load, strings.Join(names, ", "))
	}
	return nil
}

// finish writes the results files and prints the table of the sweep.
func finish(w io.Writer, sw *experiment.Sweep, res []experiment.SettingResults, out string) error {
	if err := sw.WriteFiles(out, res, notes...); err != nil {
		return err
	}
	if len(res) == 0 {
		return nil
	}
	r0 := res[0].Results
	b := res[0].Setting.Experiment.Budgets
	last := b[len(b)-1]
	fmt.Fprintf(w, "Normalised return after %d labelled steps, mean over the jobs (0 = uniform random policy, 1 = optimal; +- s.e. over %d seeds)\n\n", last, len(res[0].Setting.Experiment.Seeds))
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprint(tw, "setting\t")
	var cols []string
	for _, v := range r0.Variants {
		if strings.HasSuffix(v, experiment.SuffixGPI) || !strings.Contains(v, ":") {
			cols = append(cols, v)
			fmt.Fprintf(tw, "%s\t", v)
		}
	}
	fmt.Fprintln(tw)
	for _, sr := range res {
		fmt.Fprintf(tw, "%s\t", sr.Setting.Name)
		for _, v := range cols {
			s, _ := sr.Results.Lookup(v, "mean", last)
			fmt.Fprintf(tw, "%.2f +- %.2f\t", s.Mean, s.StdErr)
		}
		fmt.Fprintln(tw)
	}
	tw.Flush()
	fmt.Fprintf(w, "\nwrote sweep.csv, sweep.json and each setting's results.json and results.csv into %s\n", out)
	return nil
}

// progress returns a callback printing plain progress lines every few
// seconds.
func progress(w io.Writer, what string) func(done, total int) {
	start, last := time.Now(), time.Time{}
	return func(done, total int) {
		if now := time.Now(); now.Sub(last) >= 5*time.Second || done >= total {
			last = now
			fmt.Fprintf(w, "%s: %d/%d pretraining steps after %.0f s\n", what, done, total, now.Sub(start).Seconds())
		}
	}
}
