package main

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"flag"
	"io"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/successor-go/successor/experiment"
	"github.com/successor-go/successor/internal/npytest"
	"github.com/successor-go/successor/transfer"
)

func TestParseFlags(t *testing.T) {
	for _, tc := range []struct {
		args []string
		ok   bool
	}{
		{nil, true},
		{[]string{"-quick"}, true},
		{[]string{"-methods", "vmf,given", "-budget", "300", "-seeds", "3"}, true},
		{[]string{"-methods", "nope"}, false},
		{[]string{"-methods", ","}, false},
		{[]string{"-budget", "0"}, false},
		{[]string{"-seeds", "-1"}, false},
		{[]string{"-steps", "-3"}, false},
		{[]string{"-workers", "-2"}, false},
		{[]string{"-explore", "sideways"}, false},
		{[]string{"-out", ""}, false},
		{[]string{"stray"}, false},
		{[]string{"-nosuchflag"}, false},
		{[]string{"-checkpoints", "ck"}, true},
		{[]string{"-checkpoints", ""}, false},
		{[]string{"-gpi", "off"}, true},
		{[]string{"-gpi", "on", "-candidates", "3"}, true},
		{[]string{"-discoptim", "sparse-adam"}, true},
		{[]string{"-explore", "greedy"}, true},
		{[]string{"-methods", " vmf , given "}, true},
	} {
		o, err := parseFlags(tc.args, io.Discard)
		if tc.ok && err != nil {
			t.Errorf("%q: unexpected error %v", tc.args, err)
		}
		if !tc.ok && !errors.Is(err, errUsage) {
			t.Errorf("%q: got %v, want a usage error", tc.args, err)
		}
		if tc.ok && len(tc.args) == 1 && tc.args[0] == "-quick" && (o.seeds != 2 || o.budget != 200 || o.steps != 8000) {
			t.Errorf("-quick settings %+v", o)
		}
	}
}

// TestFlagMessages checks the messages of a bad command line: one per
// flag, naming that flag and what it wants, in one style for every flag
// (the text flags used to print the library's error, twice), and clear
// for the cases a user meets: an empty entry in -methods (it used to be
// dropped silently), -candidates -1 (the library's "GPI off", now -gpi
// off).
func TestFlagMessages(t *testing.T) {
	for _, tc := range []struct {
		args []string
		want string
	}{
		{[]string{"-methods", "vmf,,given"}, `-methods "vmf,,given": method 2 is empty`},
		{[]string{"-methods", "vmf,"}, `-methods "vmf,": method 2 is empty`},
		{[]string{"-dim", "-2"}, "-dim -2: want 0 (the default) or at least 2"},
		{[]string{"-dim", "1"}, "-dim 1: want 0 (the default) or at least 2"},
		{[]string{"-skills", "-3"}, "-skills -3: want 0 (the default) or at least 1"},
		{[]string{"-candidates", "-1"}, "-candidates -1: want 0 (the default) or at least 1; to turn GPI off, use -gpi off"},
		{[]string{"-discoptim", "fast"}, `-discoptim "fast": want adam or sparse-adam`},
		{[]string{"-explore", "sideways"}, `-explore "sideways": want skills, greedy or uniform`},
		{[]string{"-gpi", "maybe"}, `-gpi "maybe": want on or off`},
		{[]string{"-budget", "many"}, `invalid value "many" for flag -budget`},
	} {
		var stderr bytes.Buffer
		_, err := parseFlags(tc.args, &stderr)
		if !errors.Is(err, errUsage) || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%q: error %v, want a usage error saying %q", tc.args, err, tc.want)
			continue
		}
		msg := err.Error()
		for _, other := range []string{"-dim", "-skills", "-candidates"} {
			if other != tc.args[0] && strings.Contains(msg, other+" ") {
				t.Errorf("%q: message %q also names %s", tc.args, msg, other)
			}
		}
		for _, prefix := range []string{"transfer:", "skills:"} {
			if strings.Contains(msg, prefix) {
				t.Errorf("%q: message %q carries a library prefix", tc.args, msg)
			}
		}
		if stderr.Len() != 0 {
			t.Errorf("%q: parseFlags also printed %q (main prints the error once)", tc.args, stderr.String())
		}
	}
	o, err := parseFlags([]string{"-gpi", "off"}, io.Discard)
	if err != nil || o.gpi != transfer.GPIOff {
		t.Errorf("-gpi off: %v, gpi %v", err, o.gpi)
	}
	var help bytes.Buffer
	if _, err := parseFlags([]string{"-h"}, &help); !errors.Is(err, flag.ErrHelp) || !strings.Contains(help.String(), "-gpi") {
		t.Errorf("-h: %v, printed %q", err, help.String())
	}
}

func TestPlural(t *testing.T) {
	for n, want := range map[int]string{0: "0 seeds", 1: "1 seed", 2: "2 seeds"} {
		if got := plural(n, "seed"); got != want {
			t.Errorf("plural(%d) = %q, want %q", n, got, want)
		}
	}
}

// TestInterruptedMessage checks that an interrupted run without
// -checkpoints says how a run could have been continued (it used to say
// nothing), and one with it says how to continue.
func TestInterruptedMessage(t *testing.T) {
	if msg := interrupted("", context.Canceled).Error(); !strings.Contains(msg, "-checkpoints DIR") || !errors.Is(interrupted("", context.Canceled), context.Canceled) {
		t.Errorf("without checkpoints: %q", msg)
	}
	if msg := interrupted("ck", context.Canceled).Error(); !strings.Contains(msg, "continue from ck") {
		t.Errorf("with checkpoints: %q", msg)
	}
}

// TestOutNotWritable checks that an -out folder that exists but cannot be
// written is refused before any run (it used to be found after the whole
// experiment).
func TestOutNotWritable(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "ro")
	if err := os.Mkdir(dir, 0o555); err != nil {
		t.Fatal(err)
	}
	defer os.Chmod(dir, 0o755)
	if f, err := os.CreateTemp(dir, "x"); err == nil {
		f.Close()
		os.Remove(f.Name())
		t.Skip("a read-only folder is writable here (running as root): the case cannot be checked")
	}
	var stderr bytes.Buffer
	err := run([]string{"-quick", "-methods", "given", "-seeds", "1", "-out", dir}, io.Discard, &stderr)
	if !errors.Is(err, os.ErrPermission) || !strings.Contains(err.Error(), "-out "+dir) {
		t.Fatalf("error %v, want a permission error naming -out %s", err, dir)
	}
	if strings.Contains(stderr.String(), "pretraining") {
		t.Errorf("the runs started before the check:\n%s", stderr.String())
	}
}

// TestQuickRun runs the demo end to end in its CI mode into a temporary
// folder (figures included) and checks the files are written.
func TestQuickRun(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the demo")
	}
	dir := t.TempDir()
	if err := run([]string{"-quick", "-methods", "vmf", "-steps", "1000", "-seeds", "2", "-budget", "60", "-out", dir}, io.Discard, io.Discard); err != nil {
		t.Fatal(err)
	}
	for _, f := range []string{"results.json", "results.csv", "results.schema.json", "returns.png", "returns.svg", "successor.png", "successor.svg",
		"skills-vmf.png", "skills-vmf.svg", "arrays/manifest.json", "arrays/records.npy", "arrays/psi_vmf.npy", "arrays/successor_uniform.npy"} {
		if st, err := os.Stat(filepath.Join(dir, f)); err != nil || st.Size() == 0 {
			t.Errorf("%s: %v", f, err)
		}
	}
	checkArrays(t, dir)
}

// checkArrays reads the demo's arrays back with NumPy: every file of the
// manifest loads with the manifest's dtype, shape and SHA-256, and the
// records equal those of results.json bit for bit (float64 compared as
// their bits; JSON numbers written by Go round-trip exactly).
func checkArrays(t *testing.T, dir string) {
	t.Helper()
	arrays := filepath.Join(dir, arraysDir)
	man, err := experiment.ReadManifest(filepath.Join(arrays, experiment.ManifestFile))
	if err != nil {
		t.Fatal(err)
	}
	if err := man.Verify(arrays); err != nil {
		t.Fatal(err)
	}
	got, _ := npytest.Load(t, arrays)
	for _, a := range man.Arrays {
		l := got[a.Name]
		if l.SHA256 != a.SHA256 || l.DType != a.DType || !slices.Equal(l.Shape, a.Shape) {
			t.Errorf("%s: numpy sees %s %v, manifest says %s %v", a.Name, l.DType, l.Shape, a.DType, a.Shape)
		}
	}
	data, err := os.ReadFile(filepath.Join(dir, "results.json"))
	if err != nil {
		t.Fatal(err)
	}
	var rep experiment.Report
	if err := json.Unmarshal(data, &rep); err != nil {
		t.Fatal(err)
	}
	recs := got["records"].Columns
	if len(recs["normalised"]) != len(rep.Results.Records) || len(rep.Results.Records) == 0 {
		t.Fatalf("%d records in records.npy, %d in results.json", len(recs["normalised"]), len(rep.Results.Records))
	}
	for i, r := range rep.Results.Records {
		want := map[string]string{
			"variant": r.Variant, "job": r.Job, "budget": strconv.Itoa(r.Budget), "seed": strconv.FormatUint(r.Seed, 10),
			"normalised": strconv.FormatUint(math.Float64bits(r.Normalised), 10), "value": strconv.FormatUint(math.Float64bits(r.Value), 10),
			"lambda": strconv.FormatUint(math.Float64bits(r.Lambda), 10),
		}
		for k, v := range want {
			if recs[k][i] != v {
				t.Fatalf("record %d field %s: numpy %q, results.json %q", i, k, recs[k][i], v)
			}
		}
	}
}

// TestRateText: the progress bar shows no rate in its first second (the
// first report comes after one episode, so a rate over a few microseconds
// of drawing would be absurd), then the mean rate since the start.
func TestRateText(t *testing.T) {
	for _, tc := range []struct {
		done    int
		elapsed time.Duration
		want    string
	}{
		{100, 7 * time.Nanosecond, ""},
		{100, 999 * time.Millisecond, ""},
		{0, 5 * time.Second, ""},
		{5000, 2 * time.Second, " (2500 steps/s)"},
	} {
		if got := rateText(tc.done, tc.elapsed); got != tc.want {
			t.Errorf("rateText(%d, %v) = %q, want %q", tc.done, tc.elapsed, got, tc.want)
		}
	}
}

// withoutTimings decodes a results.json and drops the fields that depend on
// the machine (pretraining seconds and steps per second).
func withoutTimings(t *testing.T, path string) map[string]any {
	t.Helper()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var v map[string]any
	if err := json.Unmarshal(data, &v); err != nil {
		t.Fatal(err)
	}
	res, _ := v["results"].(map[string]any)
	pre, _ := res["pretrain"].([]any)
	if len(pre) == 0 {
		t.Fatalf("%s: no results.pretrain", path)
	}
	for _, p := range pre {
		m := p.(map[string]any)
		delete(m, "seconds")
		delete(m, "steps_per_second")
	}
	delete(res, "resumed") // which runs were read back: compared by the callers
	return v
}

// resumedRuns returns the number of runs results.json at path lists as
// resumed.
func resumedRuns(t *testing.T, path string) int {
	t.Helper()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var v struct {
		Results struct {
			Resumed []experiment.ResumedRun `json:"resumed"`
		} `json:"results"`
	}
	if err := json.Unmarshal(data, &v); err != nil {
		t.Fatal(err)
	}
	return len(v.Results.Resumed)
}

// TestCheckpointsRestart runs the demo with -checkpoints twice into the
// same folder: the second run reads every run back, says so, and writes
// the same results.json as a run without checkpoints (timings aside).
func TestCheckpointsRestart(t *testing.T) {
	dir := t.TempDir()
	args := []string{"-quick", "-methods", "given", "-steps", "600", "-seeds", "2", "-budget", "60", "-noplots"}
	plain := filepath.Join(dir, "plain")
	if err := run(append(args, "-out", plain), io.Discard, io.Discard); err != nil {
		t.Fatal(err)
	}
	ck := filepath.Join(dir, "ck")
	for i, want := range []string{"", "Resumed 2 pretraining runs from " + ck} {
		out := filepath.Join(dir, "out")
		var stdout bytes.Buffer
		if err := run(append(args, "-out", out, "-checkpoints", ck, "-workers", []string{"1", "2"}[i]), &stdout, io.Discard); err != nil {
			t.Fatal(err)
		}
		if got := strings.Contains(stdout.String(), "Resumed"); got != (want != "") || !strings.Contains(stdout.String(), want) {
			t.Errorf("run %d: output does not say %q as it should:\n%s", i+1, want, stdout.String())
		}
		if !reflect.DeepEqual(withoutTimings(t, filepath.Join(out, "results.json")), withoutTimings(t, filepath.Join(plain, "results.json"))) {
			t.Errorf("run %d: results.json differs from the run without checkpoints", i+1)
		}
		// results.json says which runs were read back (it used not to).
		if n, want := resumedRuns(t, filepath.Join(out, "results.json")), 2*i; n != want {
			t.Errorf("run %d: results.json lists %d resumed runs, want %d", i+1, n, want)
		}
	}
	for _, f := range []string{"given-seed1.ckpt", "given-seed1.run", "given-seed2.ckpt", "given-seed2.run"} {
		if _, err := os.Stat(filepath.Join(ck, f)); err != nil {
			t.Error(err)
		}
	}
}

// TestMethodConfigs checks the meaning of -dim and -skills: -dim is the
// feature dimension of vmf and random only, -skills the number of skills
// of every method, and the defaults are those of the published table
// (d = 64; K = 128, or 64 for categorical).
func TestMethodConfigs(t *testing.T) {
	type dk struct{ dim, skills int }
	for _, tc := range []struct {
		args []string
		want map[string]dk
	}{
		{nil, map[string]dk{"vmf": {64, 128}, "categorical": {0, 64}, "random": {64, 128}, "given": {0, 128}}},
		{[]string{"-dim", "16"}, map[string]dk{"vmf": {16, 128}, "categorical": {0, 64}, "random": {16, 128}, "given": {0, 128}}},
		{[]string{"-skills", "10"}, map[string]dk{"vmf": {64, 10}, "categorical": {0, 10}, "random": {64, 10}, "given": {0, 10}}},
	} {
		o, err := parseFlags(tc.args, io.Discard)
		if err != nil {
			t.Fatal(err)
		}
		got := map[string]dk{}
		for _, c := range methodConfigs(o) {
			got[c.Method.String()] = dk{c.Dim, c.Skills}
		}
		if !reflect.DeepEqual(got, tc.want) {
			t.Errorf("%q: %v, want %v", tc.args, got, tc.want)
		}
	}
	for _, bad := range [][]string{{"-dim", "1"}, {"-skills", "-2"}, {"-explore", "nowhere"}} {
		if _, err := parseFlags(bad, io.Discard); !errors.Is(err, errUsage) {
			t.Errorf("%q: %v, want a usage error", bad, err)
		}
	}
}
