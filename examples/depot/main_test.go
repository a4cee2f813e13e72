package main

import (
	"errors"
	"io"
	"os"
	"path/filepath"
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
