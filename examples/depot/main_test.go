package main

import (
	"bytes"
	"encoding/json"
	"errors"
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
	return v
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
