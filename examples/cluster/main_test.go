package main

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"github.com/successor-go/successor/experiment"
)

func TestParseFlags(t *testing.T) {
	for _, tc := range []struct {
		args []string
		ok   bool
	}{
		{nil, true},
		{[]string{"-quick"}, true},
		{[]string{"-shard", "2/4"}, true},
		{[]string{"-plan", "8", "-dims", "8,16,32"}, true},
		{[]string{"-shard", "4/4"}, false},
		{[]string{"-shard", "x"}, false},
		{[]string{"-merge", "-shard", "0/2"}, false},
		{[]string{"-methods", "nope"}, false},
		{[]string{"-dims", "1"}, false},
		{[]string{"-dims", "8,8"}, false},
		{[]string{"-skills", "2.5"}, false},
		{[]string{"-kappas", "0"}, false},
		{[]string{"-kappas", "x"}, false},
		{[]string{"-seeds", "0"}, false},
		{[]string{"-records", ""}, false},
		{[]string{"stray"}, false},
	} {
		_, err := parseFlags(tc.args, io.Discard)
		if tc.ok && err != nil {
			t.Errorf("%q: unexpected error %v", tc.args, err)
		}
		if !tc.ok && !errors.Is(err, errUsage) {
			t.Errorf("%q: got %v, want a usage error", tc.args, err)
		}
	}
	o, err := parseFlags([]string{"-quick", "-seeds", "3"}, io.Discard)
	if err != nil {
		t.Fatal(err)
	}
	if o.seeds != 3 || o.steps != 2000 || o.budget != 100 || len(o.methods) != 2 || !reflect.DeepEqual(o.dims, []float64{4, 8}) || !reflect.DeepEqual(o.skills, []float64{16}) {
		t.Errorf("-quick -seeds 3: %+v", o)
	}
}

// TestArrayTasksInProcess runs the quick sweep as the three tasks of a job
// array would, each reading its shard from the Slurm variables, then
// merges, and checks the files against the whole sweep run in one
// process; then checks that a merge with a shard missing names its
// records.
func TestArrayTasksInProcess(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the quick sweep twice")
	}
	dir := t.TempDir()
	flags := func(extra ...string) []string {
		return append([]string{"-quick", "-workers", "2", "-records", filepath.Join(dir, "records"), "-out", filepath.Join(dir, "merged")}, extra...)
	}
	noEnv := func(string) string { return "" }

	var merged bytes.Buffer
	err := run(flags("-merge"), noEnv, &merged, io.Discard)
	var me *experiment.MergeError
	if !errors.As(err, &me) || len(me.Missing) != 6 || !strings.Contains(err.Error(), "vmf-seed1.run") {
		t.Fatalf("merge before any shard: %v", err)
	}
	for i := range 3 {
		env := map[string]string{"SLURM_ARRAY_TASK_ID": fmt.Sprint(10 + i), "SLURM_ARRAY_TASK_MIN": "10", "SLURM_ARRAY_TASK_MAX": "12", "SLURM_ARRAY_TASK_COUNT": "3"}
		var out bytes.Buffer
		if err := run(flags(), func(k string) string { return env[k] }, &out, io.Discard); err != nil {
			t.Fatal(err)
		}
		if !strings.HasPrefix(out.String(), fmt.Sprintf("shard %d/3: ", i)) {
			t.Errorf("task %d said:\n%s", 10+i, out.String())
		}
	}
	if err := run(flags("-merge"), noEnv, &merged, io.Discard); err != nil {
		t.Fatal(err)
	}
	single := []string{"-quick", "-workers", "2", "-records", filepath.Join(dir, "records-single"), "-out", filepath.Join(dir, "single")}
	if err := run(single, noEnv, io.Discard, io.Discard); err != nil {
		t.Fatal(err)
	}
	for _, f := range []string{"sweep.csv", "sweep.json", "dim=4_skills=16_kappa=5/results.csv", "dim=8_skills=16_kappa=5/results.csv"} {
		a, errA := os.ReadFile(filepath.Join(dir, "single", f))
		b, errB := os.ReadFile(filepath.Join(dir, "merged", f))
		if errA != nil || errB != nil || !bytes.Equal(a, b) {
			t.Errorf("%s: merged differs from the single run (%v, %v)", f, errA, errB)
		}
	}
	a := withoutTimings(t, filepath.Join(dir, "single", "dim=8_skills=16_kappa=5", "results.json"))
	b := withoutTimings(t, filepath.Join(dir, "merged", "dim=8_skills=16_kappa=5", "results.json"))
	if !reflect.DeepEqual(a, b) {
		t.Error("results.json: merged differs from the single run beyond the timings")
	}
	if !strings.Contains(merged.String(), "dim=8_skills=16_kappa=5") {
		t.Errorf("merge printed:\n%s", merged.String())
	}

	// -plan prints all 12 runs over the shards.
	var plan bytes.Buffer
	if err := run([]string{"-quick", "-plan", "5"}, noEnv, &plan, io.Discard); err != nil {
		t.Fatal(err)
	}
	if !strings.HasPrefix(plan.String(), "12 runs, ") || strings.Count(plan.String(), "\nshard ") != 5 {
		t.Errorf("plan:\n%s", plan.String())
	}
	// A bad Slurm environment is an error, not a silent whole run.
	bad := map[string]string{"SLURM_ARRAY_TASK_ID": "1", "SLURM_ARRAY_TASK_MIN": "0"}
	if err := run(flags(), func(k string) string { return bad[k] }, io.Discard, io.Discard); !errors.Is(err, experiment.ErrConfig) {
		t.Errorf("bad Slurm variables: %v", err)
	}
}
