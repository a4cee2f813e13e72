package experiment_test

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"hash/crc32"
	"os"
	"path/filepath"
	"reflect"
	"slices"
	"strings"
	"testing"

	"github.com/successor-go/successor/experiment"
	"github.com/successor-go/successor/transfer"
)

// allMethods returns the tiny experiment with every pretraining method,
// the baselines, two seeds and short pretraining.
func allMethods(t testing.TB, workers int) *experiment.Experiment {
	e := tinyExperiment(t, workers)
	e.Methods = []transfer.PretrainConfig{
		{Method: transfer.VMF, Dim: 4, Skills: 8, Steps: 2000, EpisodeSteps: 20},
		{Method: transfer.Categorical, Skills: 6, Steps: 1600, EpisodeSteps: 20},
		{Method: transfer.Random, Dim: 4, Skills: 8, Steps: 1200, EpisodeSteps: 20},
		{Method: transfer.Given, Skills: 8, Steps: 800, EpisodeSteps: 20},
	}
	return e
}

// reportFiles writes results.json and results.csv of e and res into dir
// and returns the CSV bytes and the JSON without the timing fields.
func reportFiles(t *testing.T, e *experiment.Experiment, res *experiment.Results, dir string) ([]byte, map[string]any) {
	t.Helper()
	rep, err := experiment.NewReport(e, res, "invented data")
	if err != nil {
		t.Fatal(err)
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	if err := rep.WriteJSON(filepath.Join(dir, "results.json")); err != nil {
		t.Fatal(err)
	}
	if err := rep.WriteCSV(filepath.Join(dir, "results.csv")); err != nil {
		t.Fatal(err)
	}
	c, err := os.ReadFile(filepath.Join(dir, "results.csv"))
	if err != nil {
		t.Fatal(err)
	}
	j, err := os.ReadFile(filepath.Join(dir, "results.json"))
	if err != nil {
		t.Fatal(err)
	}
	var v map[string]any
	if err := json.Unmarshal(j, &v); err != nil {
		t.Fatal(err)
	}
	for _, p := range v["results"].(map[string]any)["pretrain"].([]any) {
		delete(p.(map[string]any), "seconds")
		delete(p.(map[string]any), "steps_per_second")
	}
	return c, v
}

// runShards runs every shard of n of a fresh experiment (as the tasks of a
// job array would, each with its own Experiment value) into dir, the
// last one only if all is set, and returns the units each ran.
func runShards(t *testing.T, mk func() *experiment.Experiment, dir string, n int, all bool) [][]experiment.Unit {
	t.Helper()
	var ran [][]experiment.Unit
	for i := range n {
		if i == n-1 && !all {
			break
		}
		e := mk()
		e.CheckpointDir = dir
		rep, err := e.RunShard(context.Background(), experiment.Shard{Index: i, Count: n})
		if err != nil {
			t.Fatalf("shard %d/%d: %v", i, n, err)
		}
		if rep.Shard != (experiment.Shard{Index: i, Count: n}) {
			t.Errorf("report of shard %v", rep.Shard)
		}
		ran = append(ran, rep.Units)
	}
	return ran
}

// TestShardsMergeEqualRun runs an experiment with all four methods and the
// baselines on one machine, then as two and as three shards into a shared
// folder, and checks that merging the shards' records gives the same
// figures and the same results.csv bit for bit, and results.json equal
// but for the timings; merging twice gives the same again.
func TestShardsMergeEqualRun(t *testing.T) {
	mk := func() *experiment.Experiment { return allMethods(t, 2) }
	single, err := mk().Run()
	if err != nil {
		t.Fatal(err)
	}
	base := t.TempDir()
	wantCSV, wantJSON := reportFiles(t, mk(), single, filepath.Join(base, "single"))
	units, err := mk().Units()
	if err != nil {
		t.Fatal(err)
	}
	if len(units) != 2*(4+1) {
		t.Fatalf("%d units, want 10", len(units))
	}

	for _, n := range []int{2, 3} {
		t.Run(fmt.Sprint(n, " shards"), func(t *testing.T) {
			dir := filepath.Join(base, fmt.Sprint("ck", n))
			plan, err := mk().Plan(n)
			if err != nil {
				t.Fatal(err)
			}
			ran := runShards(t, mk, dir, n, true)
			if !reflect.DeepEqual(ran, plan) {
				t.Errorf("shards ran %v, plan %v", ran, plan)
			}
			var all []experiment.Unit
			for _, r := range ran {
				all = append(all, r...)
			}
			if len(all) != len(units) {
				t.Errorf("shards ran %d units, want %d", len(all), len(units))
			}
			for _, u := range units {
				if !slices.Contains(all, u) {
					t.Errorf("unit %v run by no shard", u)
				}
			}
			e := mk()
			e.CheckpointDir = dir
			for pass := 1; pass <= 2; pass++ {
				merged, err := e.Merge()
				if err != nil {
					t.Fatal(err)
				}
				sameFigures(t, fmt.Sprintf("merge %d of %d shards", pass, n), single, merged)
				gotCSV, gotJSON := reportFiles(t, e, merged, filepath.Join(base, fmt.Sprint("merged", n, pass)))
				if !bytes.Equal(gotCSV, wantCSV) {
					t.Errorf("merge %d: results.csv differs from the single run's", pass)
				}
				if !reflect.DeepEqual(gotJSON, wantJSON) {
					t.Errorf("merge %d: results.json differs from the single run's beyond the timings", pass)
				}
				for _, p := range merged.Pretrain {
					if !(p.Seconds > 0 && p.StepsPerSecond > 0) {
						t.Errorf("merged timings of %s: %v s, %v steps/s; want those of the records", p.Method, p.Seconds, p.StepsPerSecond)
					}
				}
				if len(merged.Resumed) != 0 {
					t.Errorf("merge lists resumed runs %v", merged.Resumed)
				}
			}
			// A single machine restarted on the shards' folder reads every
			// run back.
			again, err := e.Run()
			if err != nil {
				t.Fatal(err)
			}
			sameFigures(t, "run on the shards' folder", single, again)
			if len(again.Resumed) != 2*4 {
				t.Errorf("%d runs read back, want 8", len(again.Resumed))
			}
		})
	}
}

// TestPlan checks that a plan shares every unit out exactly once, does not
// depend on the call, keeps within the list-scheduling bound
// (makespan <= total/n + largest cost, Graham 1966), and that the shard of
// a unit does not depend on the number of workers or other settings that
// change no figure.
func TestPlan(t *testing.T) {
	e := allMethods(t, 1)
	e.Seeds = []uint64{1, 2, 3, 4, 5}
	units, err := e.Units()
	if err != nil {
		t.Fatal(err)
	}
	total, largest := 0, 0
	for _, u := range units {
		total += u.Cost
		largest = max(largest, u.Cost)
	}
	for n := 1; n <= 12; n++ {
		p, err := e.Plan(n)
		if err != nil {
			t.Fatal(err)
		}
		e2 := allMethods(t, 7)
		e2.Seeds = e.Seeds
		p2, _ := e2.Plan(n)
		if !reflect.DeepEqual(p, p2) {
			t.Errorf("n=%d: plans differ between two calls", n)
		}
		if len(p) != n {
			t.Fatalf("n=%d: %d shards", n, len(p))
		}
		seen := map[experiment.Unit]int{}
		worst := 0
		for _, sh := range p {
			load := 0
			for _, u := range sh {
				seen[u]++
				load += u.Cost
			}
			worst = max(worst, load)
		}
		for _, u := range units {
			if seen[u] != 1 {
				t.Errorf("n=%d: unit %v in %d shards", n, u, seen[u])
			}
		}
		if bound := float64(total)/float64(n) + float64(largest); float64(worst) > bound {
			t.Errorf("n=%d: largest shard costs %d, above total/n + largest = %.0f", n, worst, bound)
		}
	}
	if _, err := e.Plan(0); !errors.Is(err, experiment.ErrConfig) {
		t.Errorf("Plan(0): %v, want ErrConfig", err)
	}
	// Pretraining dominates: a method's unit costs its steps plus its
	// labelled steps (2 jobs x 100), the baselines two learners' labelled
	// steps.
	if u := units[0]; u.Method != transfer.VMF || u.Cost != 2000+2*100 || u.Record() != "vmf-seed1.run" || u.String() != "vmf seed 1" {
		t.Errorf("first unit %+v (%s, %s)", u, u.Record(), u)
	}
	if u := units[4]; !u.Baselines || u.Cost != 2*2*100 || u.Record() != "baselines-seed1.run" || u.String() != "baselines seed 1" {
		t.Errorf("fifth unit %+v (%s, %s)", u, u.Record(), u)
	}
}

// editRecord rewrites the body of the run record at path with edit,
// keeping the documented framing (the CRC-32C of the new body).
func editRecord(t *testing.T, path string, edit func(body map[string]json.RawMessage)) {
	t.Helper()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var env map[string]json.RawMessage
	if err := json.Unmarshal(data, &env); err != nil {
		t.Fatal(err)
	}
	var body map[string]json.RawMessage
	if err := json.Unmarshal(env["body"], &body); err != nil {
		t.Fatal(err)
	}
	edit(body)
	nb, err := json.Marshal(body)
	if err != nil {
		t.Fatal(err)
	}
	env["body"] = nb
	crc, _ := json.Marshal(crc32.Checksum(nb, crc32.MakeTable(crc32.Castagnoli)))
	env["crc32c"] = crc
	out, err := json.Marshal(env)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, out, 0o600); err != nil {
		t.Fatal(err)
	}
}

// TestMergeErrors checks that every bad input is a clear error naming what
// is wrong: a shard out of range, records missing, unfinished, half-written,
// corrupted, of another experiment or of another build in the folder.
func TestMergeErrors(t *testing.T) {
	mk := func() *experiment.Experiment {
		e := tinyExperiment(t, 1)
		e.Methods = e.Methods[1:] // given
		e.Methods[0].Steps = 400
		e.Budgets = []int{20, 60}
		return e
	}
	// A finished folder: 2 seeds x (given + baselines), as 2 shards.
	setup := func(t *testing.T) (string, *experiment.Experiment) {
		dir := t.TempDir()
		runShards(t, mk, dir, 2, true)
		e := mk()
		e.CheckpointDir = dir
		if _, err := e.Merge(); err != nil {
			t.Fatal(err)
		}
		return dir, e
	}
	mergeErr := func(t *testing.T, e *experiment.Experiment, words ...string) *experiment.MergeError {
		t.Helper()
		_, err := e.Merge()
		var me *experiment.MergeError
		if !errors.As(err, &me) || !errors.Is(err, experiment.ErrCheckpoint) {
			t.Fatalf("got %v, want a *MergeError wrapping ErrCheckpoint", err)
		}
		for _, w := range words {
			if !strings.Contains(err.Error(), w) {
				t.Errorf("error %q does not mention %q", err, w)
			}
		}
		return me
	}

	t.Run("shard out of range", func(t *testing.T) {
		e := mk()
		e.CheckpointDir = t.TempDir()
		for _, s := range []experiment.Shard{{Index: 3, Count: 3}, {Index: -1, Count: 2}, {Index: 1}, {Count: -2}} {
			_, err := e.RunShard(context.Background(), s)
			if !errors.Is(err, experiment.ErrConfig) || !strings.Contains(err.Error(), fmt.Sprintf("shard index %d out of range", s.Index)) {
				t.Errorf("shard %+v: %v, want ErrConfig naming the index", s, err)
			}
		}
		var s experiment.Shard
		for _, text := range []string{"3/3", "-1/2", "1/0", "2", "a/b", "1/2/3", ""} {
			if err := s.UnmarshalText([]byte(text)); !errors.Is(err, experiment.ErrConfig) {
				t.Errorf("shard %q: %v, want ErrConfig", text, err)
			}
		}
	})
	t.Run("no folder", func(t *testing.T) {
		if _, err := mk().RunShard(context.Background(), experiment.Shard{Count: 2}); !errors.Is(err, experiment.ErrConfig) {
			t.Errorf("shard without folder: %v, want ErrConfig", err)
		}
		if _, err := mk().Merge(); !errors.Is(err, experiment.ErrConfig) {
			t.Errorf("merge without folder: %v, want ErrConfig", err)
		}
	})
	t.Run("missing", func(t *testing.T) {
		dir := t.TempDir()
		runShards(t, mk, dir, 2, false)
		e := mk()
		e.CheckpointDir = dir
		plan, _ := e.Plan(2)
		var want []string
		for _, u := range plan[1] {
			want = append(want, u.Record())
		}
		me := mergeErr(t, e, append([]string{dir, "missing"}, want...)...)
		slices.Sort(want)
		got := slices.Sorted(slices.Values(me.Missing))
		if !reflect.DeepEqual(got, want) || len(me.Foreign)+len(me.Unfinished)+len(me.Unreadable) != 0 {
			t.Errorf("missing %v, want %v; the rest %+v", got, want, me)
		}
	})
	t.Run("unfinished", func(t *testing.T) {
		dir, e := setup(t)
		editRecord(t, filepath.Join(dir, "given-seed2.run"), func(b map[string]json.RawMessage) { b["records"] = json.RawMessage("null") })
		me := mergeErr(t, e, "unfinished", "given-seed2.run")
		if !reflect.DeepEqual(me.Unfinished, []string{"given-seed2.run"}) {
			t.Errorf("unfinished %v", me.Unfinished)
		}
	})
	t.Run("half-written", func(t *testing.T) {
		dir, e := setup(t)
		path := filepath.Join(dir, "baselines-seed1.run")
		data, _ := os.ReadFile(path)
		if err := os.WriteFile(path, data[:len(data)/2], 0o600); err != nil {
			t.Fatal(err)
		}
		me := mergeErr(t, e, path, "not a run record")
		if len(me.Unreadable) != 1 {
			t.Errorf("unreadable %v", me.Unreadable)
		}
	})
	t.Run("corrupted", func(t *testing.T) {
		dir, e := setup(t)
		path := filepath.Join(dir, "given-seed1.run")
		data, _ := os.ReadFile(path)
		// Change the first digit of a normalised return: still JSON, so
		// only the checksum can tell.
		i := bytes.Index(data, []byte(`"normalised":`)) + len(`"normalised":`)
		if data[i] == '-' {
			i++
		}
		data[i] = '0' + (data[i]-'0'+1)%10
		if err := os.WriteFile(path, data, 0o600); err != nil {
			t.Fatal(err)
		}
		mergeErr(t, e, path, "checksum")
	})
	t.Run("shards of two experiments", func(t *testing.T) {
		dir := t.TempDir()
		other := func() *experiment.Experiment {
			e := mk()
			e.Budgets = []int{20, 90}
			return e
		}
		// Shard 0 of this experiment, shard 1 of another, into one folder;
		// plus a record of a seed this experiment does not have.
		runShards(t, mk, dir, 2, false)
		e := other()
		e.CheckpointDir = dir
		if _, err := e.RunShard(context.Background(), experiment.Shard{Index: 1, Count: 2}); err != nil {
			t.Fatal(err)
		}
		data, err := os.ReadFile(filepath.Join(dir, "given-seed1.run"))
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dir, "given-seed9.run"), data, 0o600); err != nil {
			t.Fatal(err)
		}
		e = mk()
		e.CheckpointDir = dir
		plan, _ := e.Plan(2)
		want := []string{"given-seed9.run"}
		for _, u := range plan[1] {
			want = append(want, u.Record())
		}
		me := mergeErr(t, e, append([]string{"another experiment"}, want...)...)
		slices.Sort(want)
		if got := slices.Sorted(slices.Values(me.Foreign)); !reflect.DeepEqual(got, want) || len(me.Missing) != 0 {
			t.Errorf("foreign %v, want %v; missing %v", got, want, me.Missing)
		}
		// The other experiment cannot run its shard 0 over this one's.
		e = other()
		e.CheckpointDir = dir
		if _, err := e.RunShard(context.Background(), experiment.Shard{Index: 0, Count: 2}); !errors.Is(err, experiment.ErrCheckpoint) || !strings.Contains(err.Error(), "another configuration") {
			t.Errorf("shard over another experiment's records: %v", err)
		}
	})
	t.Run("two builds", func(t *testing.T) {
		dir, e := setup(t)
		editRecord(t, filepath.Join(dir, "given-seed2.run"), func(b map[string]json.RawMessage) {
			b["origin"] = json.RawMessage(`"successor 0.0.0 go1.0 plan9/arm64"`)
		})
		me := mergeErr(t, e, "different builds", "plan9/arm64: given-seed2.run")
		if len(me.Origins) != 2 {
			t.Errorf("origins %v", me.Origins)
		}
	})
	t.Run("no folder on disk", func(t *testing.T) {
		e := mk()
		e.CheckpointDir = filepath.Join(t.TempDir(), "nowhere")
		_, err := e.Merge()
		var me *experiment.MergeError
		if !errors.As(err, &me) || len(me.Missing) != 4 || !strings.Contains(err.Error(), "nowhere") {
			t.Errorf("merge of a missing folder: %v, want every record missing", err)
		}
	})
}

// TestMergeKeep checks that a merge hands Keep every pretrained agent,
// loaded from its checkpoint and equal to the agent of a single run.
func TestMergeKeep(t *testing.T) {
	mk := func() *experiment.Experiment {
		e := tinyExperiment(t, 1)
		for i := range e.Methods {
			e.Methods[i].Steps = 600
		}
		e.Baselines = false
		return e
	}
	want := map[string][]float64{}
	e := mk()
	e.Keep = func(m transfer.Method, seed uint64, ag *transfer.Agent) {
		want[fmt.Sprint(m, seed)] = slices.Clone(ag.SkillState(1, 3))
	}
	if _, err := e.Run(); err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	runShards(t, mk, dir, 3, true)
	got := map[string][]float64{}
	e = mk()
	e.CheckpointDir = dir
	e.Keep = func(m transfer.Method, seed uint64, ag *transfer.Agent) {
		got[fmt.Sprint(m, seed)] = slices.Clone(ag.SkillState(1, 3))
	}
	if _, err := e.Merge(); err != nil {
		t.Fatal(err)
	}
	if len(want) != 4 || !reflect.DeepEqual(got, want) {
		t.Errorf("merge kept %v, a single run %v", got, want)
	}
	ck, _ := experiment.RunFiles(transfer.Given, 2)
	if err := os.Remove(filepath.Join(dir, ck)); err != nil {
		t.Fatal(err)
	}
	if _, err := e.Merge(); !errors.Is(err, experiment.ErrCheckpoint) || !strings.Contains(err.Error(), ck) {
		t.Errorf("merge with Keep and a missing checkpoint: %v", err)
	}
}

// TestSlurmShard reads the shard from the variables of a Slurm job array
// (sbatch(1), "OUTPUT ENVIRONMENT VARIABLES"). The variables of the
// stepped and the listed array are those Slurm 22.05.8 (Debian 12) set in
// the tasks of sbatch --array=1-7:2 (MIN 1, MAX 7, STEP 2, COUNT 4) and
// --array=1,4,9 (MIN 1, MAX 9, STEP 1, COUNT 3); the shard numbers are
// derived by hand (shard = (id - min) / step).
func TestSlurmShard(t *testing.T) {
	for _, tc := range []struct {
		env  map[string]string
		want experiment.Shard
		ok   bool
		err  bool
	}{
		{env: nil},
		{env: map[string]string{"SLURM_ARRAY_TASK_ID": "0", "SLURM_ARRAY_TASK_MIN": "0", "SLURM_ARRAY_TASK_MAX": "3", "SLURM_ARRAY_TASK_COUNT": "4", "SLURM_ARRAY_TASK_STEP": "1"}, want: experiment.Shard{Index: 0, Count: 4}, ok: true},
		{env: map[string]string{"SLURM_ARRAY_TASK_ID": "3", "SLURM_ARRAY_TASK_MIN": "0", "SLURM_ARRAY_TASK_MAX": "3", "SLURM_ARRAY_TASK_COUNT": "4"}, want: experiment.Shard{Index: 3, Count: 4}, ok: true},
		// --array=1-10: ids 1..10 are shards 0..9.
		{env: map[string]string{"SLURM_ARRAY_TASK_ID": "10", "SLURM_ARRAY_TASK_MIN": "1", "SLURM_ARRAY_TASK_MAX": "10", "SLURM_ARRAY_TASK_COUNT": "10"}, want: experiment.Shard{Index: 9, Count: 10}, ok: true},
		// --array=1-7:2: ids 1, 3, 5, 7.
		{env: map[string]string{"SLURM_ARRAY_TASK_ID": "5", "SLURM_ARRAY_TASK_MIN": "1", "SLURM_ARRAY_TASK_MAX": "7", "SLURM_ARRAY_TASK_COUNT": "4", "SLURM_ARRAY_TASK_STEP": "2"}, want: experiment.Shard{Index: 2, Count: 4}, ok: true},
		// No COUNT (older Slurm): from MIN, MAX and STEP.
		{env: map[string]string{"SLURM_ARRAY_TASK_ID": "4", "SLURM_ARRAY_TASK_MIN": "2", "SLURM_ARRAY_TASK_MAX": "6"}, want: experiment.Shard{Index: 2, Count: 5}, ok: true},
		// --array=1,4,9: not a progression.
		{env: map[string]string{"SLURM_ARRAY_TASK_ID": "4", "SLURM_ARRAY_TASK_MIN": "1", "SLURM_ARRAY_TASK_MAX": "9", "SLURM_ARRAY_TASK_COUNT": "3", "SLURM_ARRAY_TASK_STEP": "1"}, err: true},
		{env: map[string]string{"SLURM_ARRAY_TASK_ID": "12", "SLURM_ARRAY_TASK_MIN": "0", "SLURM_ARRAY_TASK_MAX": "3", "SLURM_ARRAY_TASK_COUNT": "4"}, err: true},
		{env: map[string]string{"SLURM_ARRAY_TASK_ID": "2", "SLURM_ARRAY_TASK_MIN": "1", "SLURM_ARRAY_TASK_MAX": "7", "SLURM_ARRAY_TASK_COUNT": "4", "SLURM_ARRAY_TASK_STEP": "2"}, err: true},
		{env: map[string]string{"SLURM_ARRAY_TASK_ID": "1", "SLURM_ARRAY_TASK_MAX": "3"}, err: true},
		{env: map[string]string{"SLURM_ARRAY_TASK_ID": "x", "SLURM_ARRAY_TASK_MIN": "0", "SLURM_ARRAY_TASK_MAX": "3"}, err: true},
		{env: map[string]string{"SLURM_ARRAY_TASK_ID": "1", "SLURM_ARRAY_TASK_MIN": "0", "SLURM_ARRAY_TASK_MAX": "-3"}, err: true},
	} {
		s, ok, err := experiment.SlurmShard(func(k string) string { return tc.env[k] })
		if tc.err {
			if !errors.Is(err, experiment.ErrConfig) || !strings.Contains(err.Error(), "SLURM_ARRAY_TASK_") {
				t.Errorf("%v: %v, want ErrConfig naming the variables", tc.env, err)
			}
			continue
		}
		if err != nil || ok != tc.ok || s != tc.want {
			t.Errorf("%v: %v %v %v, want %v %v", tc.env, s, ok, err, tc.want, tc.ok)
		}
	}
}

// TestShardText checks the text form i/n both ways.
func TestShardText(t *testing.T) {
	for _, s := range []experiment.Shard{{Index: 0, Count: 1}, {Index: 2, Count: 8}, {Index: 999, Count: 1000}} {
		b, _ := s.MarshalText()
		var back experiment.Shard
		if err := back.UnmarshalText(b); err != nil || back != s {
			t.Errorf("%v -> %q -> %v, %v", s, b, back, err)
		}
	}
	if s := (experiment.Shard{}).String(); s != "0/1" {
		t.Errorf("zero shard is %q, want 0/1", s)
	}
}

// FuzzShardText checks that the shard parser accepts only i/n with
// 0 <= i < n, and that what it accepts round-trips.
func FuzzShardText(f *testing.F) {
	for _, s := range []string{"0/1", "3/4", "4/4", "-1/2", "1/0", "9223372036854775807/9223372036854775807", "01/02", "+1/2", " 1/2"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, text string) {
		var s experiment.Shard
		if err := s.UnmarshalText([]byte(text)); err != nil {
			if !errors.Is(err, experiment.ErrConfig) {
				t.Fatalf("%q: error %v does not wrap ErrConfig", text, err)
			}
			return
		}
		if s.Index < 0 || s.Index >= s.Count {
			t.Fatalf("%q accepted as %+v", text, s)
		}
		b, _ := s.MarshalText()
		var back experiment.Shard
		if err := back.UnmarshalText(b); err != nil || back != s {
			t.Fatalf("%q -> %+v -> %q -> %+v, %v", text, s, b, back, err)
		}
	})
}

// TestDropCheckpoints checks that with DropCheckpoints a finished run
// leaves only its record, that shards and merge still give the figures of
// a single run, that a restart reads the records back, and that Keep then
// reports the missing checkpoint by name.
func TestDropCheckpoints(t *testing.T) {
	mk := func() *experiment.Experiment {
		e := tinyExperiment(t, 2)
		for i := range e.Methods {
			e.Methods[i].Steps = 800
		}
		e.DropCheckpoints = true
		return e
	}
	single, err := mk().Run()
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	runShards(t, mk, dir, 2, true)
	names, err := filepath.Glob(filepath.Join(dir, "*"))
	if err != nil {
		t.Fatal(err)
	}
	for i, n := range names {
		names[i] = filepath.Base(n)
	}
	want := []string{"baselines-seed1.run", "baselines-seed2.run", "given-seed1.run", "given-seed2.run", "vmf-seed1.run", "vmf-seed2.run"}
	if !reflect.DeepEqual(names, want) {
		t.Errorf("folder holds %v, want %v", names, want)
	}
	e := mk()
	e.CheckpointDir = dir
	merged, err := e.Merge()
	if err != nil {
		t.Fatal(err)
	}
	sameFigures(t, "merge without checkpoints", single, merged)
	again, err := e.Run()
	if err != nil {
		t.Fatal(err)
	}
	sameFigures(t, "restart without checkpoints", single, again)
	e.Keep = func(transfer.Method, uint64, *transfer.Agent) {}
	if _, err := e.Merge(); !errors.Is(err, experiment.ErrCheckpoint) || !strings.Contains(err.Error(), "vmf-seed1.ckpt is missing") {
		t.Errorf("merge with Keep: %v", err)
	}
}
