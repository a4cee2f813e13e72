package main

import (
	"bytes"
	"encoding/json"
	"errors"
	"io"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
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
	for _, f := range []string{"results.json", "results.csv", "returns.png", "successor.png", "skills-vmf.png"} {
		if st, err := os.Stat(filepath.Join(dir, f)); err != nil || st.Size() == 0 {
			t.Errorf("%s: %v", f, err)
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
