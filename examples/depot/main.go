// Command depot is the main job of the successor library: a floor robot
// explores an empty depot with no reward, then is handed jobs it has never
// seen, each with only a small budget of reward-labelled steps, and is
// scored exactly against the optimal policy.
//
// The depot floor (mdp.Depot) and the jobs below are invented demo data, not
// a model of a real site. Policies learned in such a simulation must not
// drive a physical machine without a proper safety review.
//
// Usage:
//
//	go run ./examples/depot [flags]
//
// It pretrains every method on every seed, adapts each pretrained agent to
// every job from the labelled budgets, prints the table method x job ->
// normalised return (0 = uniform random policy, 1 = optimal; mean +-
// standard error over the seeds), and writes results.json (described by
// results.schema.json, written beside it), results.csv, NumPy arrays with a
// manifest in arrays/ and captioned PNG and SVG figures (package figure)
// into the output folder.
//
// Every method appears in three rows: <method>:usf+gpi is successor-feature
// transfer proper (GPI over the universal SFs of the skills nearest the
// inferred task), <method>:usf-no-gpi acts on the single nearest skill, and
// <method>:model-fit+gpi adds a candidate fitted by value iteration on the
// empirical model of the reward-free data, which is model-based planning
// with the inferred reward rather than successor-feature transfer.
// results.json states the variant of every row (results.variant_info).
//
// With -checkpoints DIR every pretraining run keeps its checkpoint and,
// once scored, its result rows in DIR, so a run stopped by Ctrl-C, a kill
// or a crash continues where it stopped when started again with the same
// flags; the figures equal those of an uninterrupted run, and the output
// lists the runs that were resumed. Without it (the default) nothing is
// kept: the checkpoints take tens of megabytes per run (the successor
// features of 128 skills and the replay), over a gigabyte for the default
// 4 methods x 5 seeds.
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"path/filepath"
	"runtime"
	"runtime/pprof"
	"slices"
	"strings"
	"sync"
	"time"

	"github.com/schollz/progressbar/v3"
	"golang.org/x/term"

	"github.com/successor-go/successor/experiment"
	"github.com/successor-go/successor/internal/fileio"
	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/sf"
	"github.com/successor-go/successor/skills"
	"github.com/successor-go/successor/transfer"
)

// options are the command-line settings.
type options struct {
	budget       int
	seeds        int
	firstSeed    uint64
	methods      []transfer.Method
	out          string
	quick        bool
	workers      int
	steps        int
	cpuProfile   string
	noPlots      bool
	explore      transfer.Explore
	dim          int
	discStepSize float64
	discOptim    skills.OptimMethod
	skills       int
	candidates   int
	gpi          transfer.GPIMode
	ckptDir      string
}

// errUsage marks a bad command line (exit status 2).
var errUsage = errors.New("bad command line")

func main() {
	if err := run(os.Args[1:], os.Stdout, os.Stderr); err != nil {
		fmt.Fprintln(os.Stderr, "depot:", err)
		if errors.Is(err, errUsage) {
			os.Exit(2)
		}
		os.Exit(1)
	}
}

func parseFlags(args []string, stderr io.Writer) (*options, error) {
	fs := flag.NewFlagSet("depot", flag.ContinueOnError)
	// The flag package's own messages would print each error twice (once
	// here, once by main) and the usage after it; errors are returned and
	// printed once, and the usage is printed for -h alone.
	fs.SetOutput(io.Discard)
	o := &options{}
	var methods, explore, discOptim, gpi string
	var seed uint64
	fs.IntVar(&o.budget, "budget", 1000, "labelled transitions per job (the table's budget; the curve uses smaller budgets too)")
	fs.IntVar(&o.seeds, "seeds", 5, "number of seeds (runs), at least 2 for a standard error")
	fs.Uint64Var(&seed, "seed", 1, "first seed; the runs use seed, seed+1, ...")
	fs.StringVar(&methods, "methods", "vmf,categorical,random,given", "comma-separated pretraining methods: vmf, categorical, random, given")
	fs.StringVar(&o.out, "out", "depot-out", "output folder (created if missing; checked to be writable before the runs start)")
	fs.BoolVar(&o.quick, "quick", false, "a few seconds: fewer steps, 2 seeds, smaller budget (for CI)")
	fs.IntVar(&o.workers, "workers", 0, "parallel runs (0: one per CPU); the figures do not depend on it")
	fs.IntVar(&o.steps, "steps", 0, "pretraining steps per run (0: the default, 100000; -quick 8000)")
	fs.StringVar(&o.cpuProfile, "cpuprofile", "", "write a CPU profile of the whole run to this file")
	fs.BoolVar(&o.noPlots, "noplots", false, "skip the PNG and SVG figures (the NumPy arrays are still written)")
	fs.IntVar(&o.dim, "dim", 0, "feature dimension d of the sphere methods vmf and random (0: the demo's default, 64); categorical's is skills+1, given's the number of place features")
	fs.Float64Var(&o.discStepSize, "discrate", 0, "step size of the discriminator's Adam (0: transfer's default)")
	fs.StringVar(&discOptim, "discoptim", "adam", "discriminator optimiser: adam, or sparse-adam (only the minibatch's states and the bias; faster, transferred worse on this depot)")
	fs.IntVar(&o.skills, "skills", 0, "number of skills K of every method (0: the demo's default, 128 for vmf, random and given, 64 for categorical)")
	fs.IntVar(&o.candidates, "candidates", 0, "GPI candidates: the number of skills nearest the inferred task that GPI chooses among (0: transfer's default); see -gpi")
	fs.StringVar(&gpi, "gpi", "on", "GPI over the candidate skills: on, or off (act on the single nearest skill)")
	fs.StringVar(&o.ckptDir, "checkpoints", "", "keep every pretraining run's checkpoint and result rows in folder `DIR` (created if missing), so a run that is\nstopped (Ctrl-C, kill, crash) continues where it stopped when started again with the same flags and folder; the figures are\nthe same as without a stop. Files of other settings are refused: use a new folder per setting. Default: off (nothing kept;\nthe files take tens of MB per run)")
	fs.StringVar(&explore, "explore", "skills", "how the agent collects its labelled steps: skills (follow its skills), greedy (skills, then act on the task inferred so far), uniform (random actions)")
	fs.Usage = func() {} // printed below for -h only
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			fmt.Fprintf(stderr, "usage: depot [flags]\n\nPretrain on the invented depot floor without reward, then adapt to held-out jobs.\n\n")
			fs.SetOutput(stderr)
			fs.PrintDefaults()
			return nil, err
		}
		return nil, fmt.Errorf("%w: %v (see -h)", errUsage, err)
	}
	if fs.NArg() > 0 {
		return nil, fmt.Errorf("%w: unexpected argument %q (all settings are flags; see -h)", errUsage, fs.Arg(0))
	}
	o.firstSeed = seed
	set := map[string]bool{}
	fs.Visit(func(f *flag.Flag) { set[f.Name] = true })
	if o.quick {
		if !set["seeds"] {
			o.seeds = 2
		}
		if !set["budget"] {
			o.budget = 200
		}
		if !set["steps"] {
			o.steps = 8000
		}
	}
	if o.steps == 0 {
		o.steps = 100000
	}
	// One message per flag, in the style "-flag value: what is wanted".
	usage := func(format string, args ...any) error {
		return fmt.Errorf("%w: %s", errUsage, fmt.Sprintf(format, args...))
	}
	for i, name := range strings.Split(methods, ",") {
		name = strings.TrimSpace(name)
		if name == "" {
			return nil, usage("-methods %q: method %d is empty (want a comma-separated list of vmf, categorical, random, given)", methods, i+1)
		}
		m, err := transfer.ParseMethod(name)
		if err != nil {
			return nil, usage("-methods: unknown method %q (want vmf, categorical, random or given)", name)
		}
		if !slices.Contains(o.methods, m) {
			o.methods = append(o.methods, m)
		}
	}
	if err := o.explore.UnmarshalText([]byte(explore)); err != nil {
		return nil, usage("-explore %q: want skills, greedy or uniform", explore)
	}
	if err := o.discOptim.UnmarshalText([]byte(discOptim)); err != nil {
		return nil, usage("-discoptim %q: want adam or sparse-adam", discOptim)
	}
	if err := o.gpi.UnmarshalText([]byte(gpi)); err != nil {
		return nil, usage("-gpi %q: want on or off", gpi)
	}
	switch {
	case o.budget < 1:
		return nil, usage("-budget %d: must be at least 1", o.budget)
	case o.seeds < 1:
		return nil, usage("-seeds %d: must be at least 1", o.seeds)
	case o.steps < 1:
		return nil, usage("-steps %d: must be at least 1", o.steps)
	case o.workers < 0:
		return nil, usage("-workers %d: must not be negative", o.workers)
	case !(o.discStepSize >= 0) || o.discStepSize > 1e6:
		return nil, usage("-discrate %v: want 0 (the default) or a positive step size", o.discStepSize)
	case o.dim < 0 || o.dim == 1:
		return nil, usage("-dim %d: want 0 (the default) or at least 2", o.dim)
	case o.skills < 0:
		return nil, usage("-skills %d: want 0 (the default) or at least 1", o.skills)
	case o.candidates < 0:
		return nil, usage("-candidates %d: want 0 (the default) or at least 1; to turn GPI off, use -gpi off", o.candidates)
	case o.out == "":
		return nil, usage("-out: empty folder name")
	case set["checkpoints"] && o.ckptDir == "":
		return nil, usage("-checkpoints: empty folder name")
	}
	return o, nil
}

// interrupted returns the error of a run stopped by Ctrl-C, saying how to
// continue it (with a checkpoint folder) or how it could have been made
// resumable (without one).
func interrupted(ckptDir string, err error) error {
	if ckptDir != "" {
		return fmt.Errorf("interrupted; start again with the same flags to continue from %s: %w", ckptDir, err)
	}
	return fmt.Errorf("interrupted; nothing was kept (run with -checkpoints DIR to be able to continue a stopped run): %w", err)
}

// plural returns "n word", with an s for n other than 1.
func plural(n int, word string) string {
	if n == 1 {
		return "1 " + word
	}
	return fmt.Sprintf("%d %ss", n, word)
}

// jobs returns the held-out jobs over the depot's place labels. They were
// fixed before any result was seen; they are the jobs a floor planner would
// hand the robot, not ones chosen because a method does well on them.
func jobs(g *mdp.Grid) ([]experiment.Job, error) {
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

func run(args []string, stdout, stderr io.Writer) error {
	o, err := parseFlags(args, stderr)
	if err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return nil
		}
		return err
	}
	if o.cpuProfile != "" {
		f, err := os.Create(o.cpuProfile)
		if err != nil {
			return fmt.Errorf("-cpuprofile: %w", err)
		}
		defer f.Close()
		if err := pprof.StartCPUProfile(f); err != nil {
			return fmt.Errorf("-cpuprofile: %w", err)
		}
		defer pprof.StopCPUProfile()
	}
	if err := os.MkdirAll(o.out, 0o755); err != nil {
		return fmt.Errorf("-out: %w", err)
	}
	// Found now rather than after the runs.
	if err := fileio.CheckWritable(o.out); err != nil {
		return fmt.Errorf("-out %s: cannot write there: %w", o.out, err)
	}

	g, err := mdp.Depot()
	if err != nil {
		return err
	}
	places, err := sf.GridLabels(g, false)
	if err != nil {
		return err
	}
	js, err := jobs(g)
	if err != nil {
		return err
	}
	explore, err := mdp.WithStart(g.MDP, mdp.UniformStart(g.MDP))
	if err != nil {
		return err
	}
	seeds := make([]uint64, o.seeds)
	for i := range seeds {
		seeds[i] = o.firstSeed + uint64(i)
	}
	e := &experiment.Experiment{
		Task:       g.MDP,
		Explore:    explore,
		Places:     places,
		PlaceNames: g.LabelNames(),
		Jobs:       js,
		Methods:    methodConfigs(o),
		Seeds:      seeds,
		Budgets:    budgets(o.budget),
		Baselines:  true,
		TaskGamma:  0.95,
		Adapt:      transfer.AdaptConfig{Explore: o.explore, Candidates: o.candidates, GPI: o.gpi},
		Workers:    o.workers,

		CheckpointDir: o.ckptDir,
	}

	// Keep the first seed's agents for the figures.
	var mu sync.Mutex
	kept := map[transfer.Method]*transfer.Agent{}
	e.Keep = func(m transfer.Method, seed uint64, ag *transfer.Agent) {
		if seed == seeds[0] {
			mu.Lock()
			kept[m] = ag
			mu.Unlock()
		}
	}
	prog, finish := progress(stderr, len(seeds)*len(o.methods)*o.steps)
	e.Progress = prog
	workers := o.workers
	if workers == 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	fmt.Fprintf(stderr, "depot: %s x %s, %d pretraining steps each, %s\n", plural(len(o.methods), "method"), plural(len(seeds), "seed"), o.steps, plural(workers, "worker"))
	if o.ckptDir != "" {
		fmt.Fprintf(stderr, "depot: checkpoints in %s (an interrupted run continues from them when started again with the same flags)\n", o.ckptDir)
	}
	// The first Ctrl-C stops the runs at their next episode end; a second
	// one kills the program.
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	go func() {
		<-ctx.Done()
		stop()
	}()
	t0 := time.Now()
	res, err := e.RunContext(ctx)
	finish()
	if err != nil {
		if errors.Is(err, context.Canceled) {
			return interrupted(o.ckptDir, err)
		}
		return err
	}
	elapsed := time.Since(t0)

	printResumed(stdout, o.ckptDir, res.Resumed)
	printTable(stdout, e, res, elapsed)

	rep, err := experiment.NewReport(e, res,
		"the depot floor and the jobs are invented demo data, not a real site",
		"pretraining episodes start at a uniformly random free cell; labelled episodes and scores start at the depot's start cell",
		"pretraining seconds and steps per second depend on the machine; every other figure depends only on the seeds",
		"config.methods holds the resolved configuration of every pretrained method; its seed is not used: each run's seed is derived from the run's seed and the method by experiment.DeriveSeed",
		"labelled transitions: one run of up to adapt.episode_steps steps from the start cell by the rule adapt.explore (skills: follow the skills in a random order, a new one every adapt.switch_every steps; uniform: random actions; greedy: skills for adapt.warmup steps, then the policy adapted to the labels so far); the baselines learn online with the same budget",
		"discounts: config.task_gamma scores every policy and drives the baselines; methods[].skill_gamma is the horizon of the skills")
	if err != nil {
		return err
	}
	if err := rep.WriteJSON(filepath.Join(o.out, "results.json")); err != nil {
		return err
	}
	if err := rep.WriteCSV(filepath.Join(o.out, "results.csv")); err != nil {
		return err
	}
	if err := fileio.WriteAtomic(filepath.Join(o.out, "results.schema.json"), experiment.ResultsSchema(), fileio.FileMode); err != nil {
		return err
	}
	files := []string{"results.json", "results.csv", "results.schema.json"}
	outs, err := prepare(g, rep.Config, res, kept)
	if err != nil {
		return err
	}
	arrays, err := outs.writeArrays(o.out)
	if err != nil {
		return err
	}
	files = append(files, fmt.Sprintf("%s/ (%d NumPy arrays and %s)", arraysDir, len(arrays)-1, experiment.ManifestFile))
	if !o.noPlots {
		figs, err := outs.drawFigures(o.out)
		if err != nil {
			return err
		}
		files = append(files, figs...)
	}
	fmt.Fprintf(stdout, "\nwrote %s into %s\n", strings.Join(files, ", "), o.out)
	return nil
}

// methodConfigs returns the pretraining configuration of every method of
// the demo.
func methodConfigs(o *options) []transfer.PretrainConfig {
	var out []transfer.PretrainConfig
	for _, m := range o.methods {
		c := transfer.PretrainConfig{
			Method:       m,
			Skills:       128,  // skill set of the tabulated universal SFs
			Kappa:        10,   // discriminator concentration
			SkillGamma:   0.99, // skill horizon: long enough to cross the floor
			Steps:        o.steps,
			EpisodeSteps: 50,
			DiscStepSize: o.discStepSize, // 0: transfer's default
			DiscOptim:    o.discOptim,
		}
		switch m {
		case transfer.VMF, transfer.Random:
			c.Dim = 64 // phi on S^63
			if o.dim > 0 {
				c.Dim = o.dim
			}
		case transfer.Categorical:
			c.Skills = 64 // one-hot skills; the features have 65 entries
		}
		if o.skills > 0 {
			c.Skills = o.skills
		}
		out = append(out, c)
	}
	return out
}

// progress returns a progress callback drawing a bar on stderr when it is a
// terminal, and plain periodic lines otherwise, and a function to call at
// the end.
func progress(stderr io.Writer, total int) (func(done, total int), func()) {
	if f, ok := stderr.(*os.File); ok && term.IsTerminal(int(f.Fd())) {
		bar := progressbar.NewOptions(total,
			progressbar.OptionSetWriter(stderr),
			progressbar.OptionSetDescription("pretraining"),
			progressbar.OptionShowCount(),
			progressbar.OptionThrottle(100*time.Millisecond),
			progressbar.OptionClearOnFinish(),
		)
		// The bar's own rate would divide the first report (one episode's
		// steps) by the nanoseconds since its first frame; the rate here is
		// ours, over the time since the start, shown after a second.
		start := time.Now()
		return func(done, _ int) {
			bar.Describe("pretraining" + rateText(done, time.Since(start)))
			// Episodes finish, so a run may overshoot its planned steps a
			// little.
			bar.Set(min(done, total))
		}, func() { bar.Finish() }
	}
	start := time.Now()
	last := time.Time{}
	return func(done, total int) {
		if now := time.Now(); now.Sub(last) >= 2*time.Second || done >= total {
			last = now
			fmt.Fprintf(stderr, "pretraining: %d/%d steps (%.0f%%) after %.1fs\n", done, total, 100*float64(done)/float64(total), now.Sub(start).Seconds())
		}
	}, func() {}
}

// rateText returns " (N steps/s)", the mean pretraining rate since the
// start, or "" during the first second, when a rate would be mostly noise
// (the first report comes after a single episode).
func rateText(done int, elapsed time.Duration) string {
	if elapsed < time.Second || done <= 0 {
		return ""
	}
	return fmt.Sprintf(" (%.0f steps/s)", float64(done)/elapsed.Seconds())
}

// printResumed says which runs continued from the checkpoint folder.
func printResumed(w io.Writer, dir string, runs []experiment.ResumedRun) {
	if len(runs) == 0 {
		return
	}
	fmt.Fprintf(w, "Resumed %s from %s (their pretraining times and steps per second cover only the part run now):\n", plural(len(runs), "pretraining run"), dir)
	for _, r := range runs {
		var how string
		switch {
		case r.Adapted:
			how = "finished earlier; result rows read back"
		case r.Pretrained:
			how = fmt.Sprintf("pretraining finished earlier (%d steps); adapted now", r.Steps)
		default:
			how = fmt.Sprintf("pretraining continued from step %d", r.Steps)
		}
		fmt.Fprintf(w, "  %-11s seed %d: %s\n", r.Method, r.Seed, how)
	}
	fmt.Fprintln(w)
}

// printTable prints the variant x job table of the normalised return at
// the largest budget (experiment.WriteTable), then the pretraining times,
// the variants and the jobs.
func printTable(w io.Writer, e *experiment.Experiment, res *experiment.Results, elapsed time.Duration) {
	if err := experiment.WriteTable(w, res, nil); err != nil {
		fmt.Fprintln(w, err)
	}
	fmt.Fprintln(w)
	for _, p := range res.Pretrain {
		mi := ""
		if p.Method == transfer.VMF || p.Method == transfer.Categorical {
			mi = fmt.Sprintf(", final MI estimate %.2f nats", p.FinalMI)
		}
		fmt.Fprintf(w, "pretraining %-11s %6.2f s per run, %8.0f env steps/s%s\n", p.Method, p.Seconds, p.StepsPerSecond, mi)
	}
	fmt.Fprintf(w, "total wall time %.1f s\n", elapsed.Seconds())
	fmt.Fprintln(w, "\nVariants:")
	seen := map[string]bool{}
	for _, v := range res.VariantInfo {
		suffix := strings.TrimPrefix(v.Name, v.Method)
		if v.Method == "" || seen[suffix] {
			if v.Method == "" {
				fmt.Fprintf(w, "  %-15s %s\n", v.Name, v.Description)
			}
			continue
		}
		seen[suffix] = true
		fmt.Fprintf(w, "  <method>%-15s %s\n", suffix, v.Description)
	}
	fmt.Fprintln(w, "\nJobs (invented):")
	for _, j := range e.Jobs {
		fmt.Fprintf(w, "  %-13s %s\n", j.Name, j.Description)
	}
}
