package main

import (
	"bytes"
	"strconv"
	"strings"
	"testing"
)

// TestRun checks that the program runs, reports one line per budget, that
// the error at the largest budget is below 2% of the largest entry (see
// sf's TestTDRandomWalk for the same check), and that bad flags are errors.
func TestRun(t *testing.T) {
	var out, errb bytes.Buffer
	if err := run([]string{"-budgets", "1000,300000", "-target", "expected", "-power", "0.6"}, &out, &errb); err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSpace(out.String()), "\n")
	last := strings.Fields(lines[len(lines)-1])
	if len(last) != 4 || last[0] != "300000" {
		t.Fatalf("last line %q", lines[len(lines)-1])
	}
	if rel, err := strconv.ParseFloat(last[3], 64); err != nil || rel >= 0.02 {
		t.Errorf("relative error %s at 300000 transitions, want < 0.02", last[3])
	}
	for _, args := range [][]string{
		{"-target", "greedy"},
		{"-budgets", "10,5"},
		{"-budgets", "x"},
		{"-power", "0"},
		{"-seed", "-1"},
		{"extra"},
	} {
		if err := run(args, &out, &errb); err == nil {
			t.Errorf("%v: no error", args)
		}
	}
}
