package experiment_test

import (
	"bytes"
	"context"
	"encoding/csv"
	"encoding/json"
	"errors"
	"os"
	"path/filepath"
	"reflect"
	"strconv"
	"testing"

	"github.com/successor-go/successor/experiment"
	"github.com/successor-go/successor/transfer"
)

// tinySweep is a grid of 2 feature dimensions x 2 concentrations of the
// tiny experiment with von Mises-Fisher skills and the baselines, 2 seeds.
func tinySweep(t testing.TB, dir string) *experiment.Sweep {
	e := tinyExperiment(t, 2)
	e.Methods = []transfer.PretrainConfig{{Method: transfer.VMF, Skills: 8, Steps: 1200, EpisodeSteps: 20}}
	return &experiment.Sweep{
		Base: e,
		Dir:  dir,
		Axes: []experiment.Axis{
			{Name: "dim", Values: []float64{4, 8}, Set: func(e *experiment.Experiment, v float64) error {
				for i := range e.Methods {
					if e.Methods[i].Method.Sphere() {
						e.Methods[i].Dim = int(v)
					}
				}
				return nil
			}},
			{Name: "kappa", Values: []float64{2, 7.5}, Set: func(e *experiment.Experiment, v float64) error {
				for i := range e.Methods {
					e.Methods[i].Kappa = v
				}
				return nil
			}},
		},
	}
}

// TestSweepShards runs a 2 x 2 sweep as three shards and checks that every
// setting's merged results equal its experiment run on its own, that the
// settings are recorded in sweep.json and with every row of sweep.csv, and
// that the grid is balanced over the shards as a whole.
func TestSweepShards(t *testing.T) {
	dir := t.TempDir()
	settings, err := tinySweep(t, dir).Settings()
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, s := range settings {
		names = append(names, s.Name)
	}
	if want := []string{"dim=4_kappa=2", "dim=4_kappa=7.5", "dim=8_kappa=2", "dim=8_kappa=7.5"}; !reflect.DeepEqual(names, want) {
		t.Fatalf("settings %v, want %v", names, want)
	}
	if settings[3].Experiment.Methods[0].Dim != 8 || settings[3].Experiment.Methods[0].Kappa != 7.5 || settings[0].Experiment.Methods[0].Dim != 4 {
		t.Errorf("values not set: %+v", settings[3].Experiment.Methods[0])
	}
	if b := tinySweep(t, dir).Base; b.Methods[0].Dim != 0 || b.Methods[0].Kappa != 0 {
		t.Errorf("the base was modified: %+v", b.Methods[0])
	}
	plan, err := tinySweep(t, dir).Plan(3)
	if err != nil {
		t.Fatal(err)
	}
	units, _ := tinySweep(t, dir).Units()
	if len(units) != 4*2*2 {
		t.Errorf("%d units, want 16", len(units))
	}
	for i := range 3 {
		rep, err := tinySweep(t, dir).RunShard(context.Background(), experiment.Shard{Index: i, Count: 3})
		if err != nil {
			t.Fatal(err)
		}
		if !reflect.DeepEqual(rep.Units, plan[i]) {
			t.Errorf("shard %d ran %v, plan %v", i, rep.Units, plan[i])
		}
		settingsOf := map[string]bool{}
		for _, u := range rep.Units {
			settingsOf[u.Setting] = true
		}
		if len(settingsOf) < 2 {
			t.Errorf("shard %d runs units of %d setting(s): the grid is not shared out as a whole", i, len(settingsOf))
		}
	}
	sw := tinySweep(t, dir)
	merged, err := sw.Merge()
	if err != nil {
		t.Fatal(err)
	}
	for i, sr := range merged {
		e := settings[i].Experiment
		e.CheckpointDir = ""
		single, err := e.Run()
		if err != nil {
			t.Fatal(err)
		}
		sameFigures(t, sr.Setting.Name, single, sr.Results)
		if i > 0 && reflect.DeepEqual(sr.Results.Records, merged[0].Results.Records) {
			t.Errorf("%s: the same figures as %s; the setting had no effect", sr.Setting.Name, merged[0].Setting.Name)
		}
	}

	out := filepath.Join(dir, "out")
	if err := sw.WriteFiles(out, merged, "invented data"); err != nil {
		t.Fatal(err)
	}
	f, err := os.Open(filepath.Join(out, "sweep.csv"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	total := 0
	for i, sr := range merged {
		total += len(sr.Results.Records)
		sub, err := os.ReadFile(filepath.Join(out, sr.Setting.Name, "results.csv"))
		if err != nil {
			t.Fatal(err)
		}
		subRows, _ := csv.NewReader(bytes.NewReader(sub)).ReadAll()
		// The setting's rows appear in sweep.csv with its values in front.
		for _, r := range subRows[1:] {
			want := append([]string{strconv.FormatFloat(settings[i].Values[0], 'g', -1, 64), strconv.FormatFloat(settings[i].Values[1], 'g', -1, 64)}, r...)
			if !containsRow(rows, want) {
				t.Fatalf("sweep.csv lacks %v", want)
			}
		}
		if !reflect.DeepEqual(rows[0][2:], subRows[0]) {
			t.Errorf("sweep.csv header %v, results.csv %v", rows[0], subRows[0])
		}
	}
	if rows[0][0] != "dim" || rows[0][1] != "kappa" || len(rows) != total+1 {
		t.Errorf("sweep.csv: header %v, %d rows, want %d", rows[0], len(rows)-1, total)
	}
	var sj struct {
		Axes []struct {
			Name   string
			Values []float64
		}
		Settings []struct {
			Name    string
			Values  []float64
			Results string
			Mean    []experiment.Summary
		}
	}
	b, err := os.ReadFile(filepath.Join(out, "sweep.json"))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &sj); err != nil {
		t.Fatal(err)
	}
	if len(sj.Axes) != 2 || sj.Axes[1].Name != "kappa" || !reflect.DeepEqual(sj.Axes[1].Values, []float64{2, 7.5}) || len(sj.Settings) != 4 {
		t.Fatalf("sweep.json: %+v", sj)
	}
	for i, s := range sj.Settings {
		if s.Name != names[i] || !reflect.DeepEqual(s.Values, settings[i].Values) || s.Results != names[i]+"/results.json" {
			t.Errorf("sweep.json setting %d: %+v", i, s)
		}
		if want, _ := merged[i].Results.Lookup("vmf"+experiment.SuffixGPI, "mean", 100); len(s.Mean) == 0 || s.Mean[0] != want {
			t.Errorf("sweep.json setting %d: means %+v, want first %+v", i, s.Mean, want)
		}
	}
}

func containsRow(rows [][]string, want []string) bool {
	for _, r := range rows {
		if reflect.DeepEqual(r, want) {
			return true
		}
	}
	return false
}

// TestSweepErrors checks the validation of a sweep and that a merge
// reports the folder of the setting whose records are missing.
func TestSweepErrors(t *testing.T) {
	dir := t.TempDir()
	set := func(e *experiment.Experiment, v float64) error { return nil }
	for _, tc := range []struct {
		name string
		f    func(s *experiment.Sweep)
	}{
		{"no axes", func(s *experiment.Sweep) { s.Axes = nil }},
		{"no folder", func(s *experiment.Sweep) { s.Dir = "" }},
		{"no base", func(s *experiment.Sweep) { s.Base = nil }},
		{"bad name", func(s *experiment.Sweep) { s.Axes[0].Name = "dim_x" }},
		{"digit first", func(s *experiment.Sweep) { s.Axes[0].Name = "2dim" }},
		{"same name twice", func(s *experiment.Sweep) { s.Axes[1].Name = "dim" }},
		{"no values", func(s *experiment.Sweep) { s.Axes[0].Values = nil }},
		{"repeated value", func(s *experiment.Sweep) { s.Axes[0].Values = []float64{4, 4} }},
		{"no set", func(s *experiment.Sweep) { s.Axes[0].Set = nil }},
		{"set fails", func(s *experiment.Sweep) {
			s.Axes[0].Set = func(*experiment.Experiment, float64) error { return errors.New("no such dim") }
		}},
		{"setting does not resolve", func(s *experiment.Sweep) {
			s.Axes = append(s.Axes, experiment.Axis{Name: "gamma", Values: []float64{0.5, 2}, Set: func(e *experiment.Experiment, v float64) error {
				e.TaskGamma = v
				return nil
			}})
		}},
	} {
		s := tinySweep(t, dir)
		s.Axes = append(s.Axes, experiment.Axis{Name: "spare", Values: []float64{1}, Set: set})
		tc.f(s)
		if _, err := s.Settings(); !errors.Is(err, experiment.ErrConfig) {
			t.Errorf("%s: %v, want ErrConfig", tc.name, err)
		}
		if _, err := s.RunShard(context.Background(), experiment.Shard{}); !errors.Is(err, experiment.ErrConfig) {
			t.Errorf("%s: run: %v, want ErrConfig", tc.name, err)
		}
	}
	s := tinySweep(t, dir)
	s.Axes[0].Values = []float64{4}
	if _, err := s.RunShard(context.Background(), experiment.Shard{Index: 0, Count: 2}); err != nil {
		t.Fatal(err)
	}
	_, err := s.Merge()
	var me *experiment.MergeError
	if !errors.As(err, &me) || me.Dir != filepath.Join(dir, "dim=4_kappa=2") && me.Dir != filepath.Join(dir, "dim=4_kappa=7.5") || len(me.Missing) == 0 {
		t.Errorf("merge of half a sweep: %v", err)
	}
	if _, err := s.RunShard(context.Background(), experiment.Shard{Index: 2, Count: 2}); !errors.Is(err, experiment.ErrConfig) {
		t.Errorf("shard 2/2: %v", err)
	}
}
