package experiment

import (
	"bytes"
	"context"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"

	"github.com/successor-go/successor"
	"github.com/successor-go/successor/internal/fileio"
)

// Axis is one setting a sweep varies: its name, its values, and how a
// value is set in an experiment.
type Axis struct {
	// Name names the setting in folder names and in sweep.csv and
	// sweep.json: a letter, then letters, digits and '-'.
	Name string `json:"name"`
	// Values are the values of the setting, distinct and finite, in the
	// order of the sweep.
	Values []float64 `json:"values"`
	// Set sets value v in e, a copy of the sweep's base experiment (its
	// slices copied too) in which the earlier axes are already set; an
	// error is reported with the setting's name. For example, the feature
	// dimension of every sphere method:
	//
	//	func(e *Experiment, v float64) error {
	//		for i := range e.Methods {
	//			if e.Methods[i].Method.Sphere() { e.Methods[i].Dim = int(v) }
	//		}
	//		return nil
	//	}
	Set func(e *Experiment, v float64) error `json:"-"`
}

// Sweep is a grid of settings of one experiment: every combination of the
// values of its axes is an experiment of its own (a Setting), with every
// method and seed of the base. Its runs are the units of all its settings;
// they are shared out to shards together (Plan, RunShard), so a job array
// balances the whole grid, and merged per setting (Merge), each setting's
// results equal to those of its experiment run on one machine.
type Sweep struct {
	// Base is the experiment every setting starts from. Its Workers and
	// Progress apply to the whole sweep; its CheckpointDir and Keep are
	// not used (Keep could not tell the settings apart: each setting's
	// agents can be loaded from its folder with Setting.Experiment's Keep
	// and Merge).
	Base *Experiment
	// Axes are the settings varied; the first varies slowest.
	Axes []Axis
	// Dir is the folder of the records: setting s keeps the files of its
	// runs (Experiment.CheckpointDir) in the subfolder Dir/<s.Name>.
	Dir string
}

// Setting is one point of a sweep's grid.
type Setting struct {
	// Name is "<axis>=<value>" for every axis, joined by "_" (for example
	// "dim=16_skills=32"): the subfolder of its records.
	Name string
	// Values holds the value of every axis, in the order of the axes.
	Values []float64
	// Experiment is the base with the values set, CheckpointDir Dir/Name
	// and no Keep.
	Experiment *Experiment
}

// SettingResults are the merged results of one setting of a sweep.
type SettingResults struct {
	Setting Setting
	Results *Results
}

// Settings returns every setting of the sweep, the first axis varying
// slowest. A sweep without Base, Dir or axes, an axis with a bad name, no
// values, repeated or non-finite values or no Set, a Set that fails, or a
// setting that does not resolve is an error wrapping ErrConfig.
func (s *Sweep) Settings() ([]Setting, error) {
	if s.Base == nil || s.Dir == "" || len(s.Axes) == 0 {
		return nil, fmt.Errorf("experiment: a sweep needs a base experiment, a folder and at least one axis: %w", ErrConfig)
	}
	names := map[string]bool{}
	for _, a := range s.Axes {
		if !axisName(a.Name) || names[a.Name] {
			return nil, fmt.Errorf("experiment: sweep axis name %q: want a letter, then letters, digits and '-', each name once: %w", a.Name, ErrConfig)
		}
		names[a.Name] = true
		if len(a.Values) == 0 || a.Set == nil {
			return nil, fmt.Errorf("experiment: sweep axis %s needs values and a Set function: %w", a.Name, ErrConfig)
		}
		seen := map[float64]bool{}
		for _, v := range a.Values {
			if math.IsNaN(v) || math.IsInf(v, 0) || seen[v] {
				return nil, fmt.Errorf("experiment: sweep axis %s: value %v repeated or not finite: %w", a.Name, v, ErrConfig)
			}
			seen[v] = true
		}
	}
	var out []Setting
	idx := make([]int, len(s.Axes))
	for {
		st := Setting{Values: make([]float64, len(s.Axes)), Experiment: cloneExperiment(s.Base)}
		parts := make([]string, len(s.Axes))
		for k, a := range s.Axes {
			v := a.Values[idx[k]]
			st.Values[k] = v
			parts[k] = a.Name + "=" + strconv.FormatFloat(v, 'g', -1, 64)
		}
		st.Name = strings.Join(parts, "_")
		for k, a := range s.Axes {
			if err := a.Set(st.Experiment, st.Values[k]); err != nil {
				return nil, fmt.Errorf("experiment: setting %s: %w: %w", st.Name, ErrConfig, err)
			}
		}
		st.Experiment.CheckpointDir = filepath.Join(s.Dir, st.Name)
		st.Experiment.Keep = nil
		if _, err := st.Experiment.Resolve(); err != nil {
			return nil, fmt.Errorf("experiment: setting %s: %w", st.Name, err)
		}
		out = append(out, st)
		k := len(idx) - 1
		for ; k >= 0; k-- {
			if idx[k]++; idx[k] < len(s.Axes[k].Values) {
				break
			}
			idx[k] = 0
		}
		if k < 0 {
			return out, nil
		}
	}
}

// axisName reports whether name is a letter followed by letters, digits
// and '-'.
func axisName(name string) bool {
	for i, c := range name {
		letter := c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z'
		if !letter && (i == 0 || !(c >= '0' && c <= '9' || c == '-')) {
			return false
		}
	}
	return name != ""
}

// cloneExperiment returns a copy of e whose slices (jobs and their
// weights, methods, seeds, budgets, place names) are its own.
func cloneExperiment(e *Experiment) *Experiment {
	c := *e
	c.PlaceNames = append([]string(nil), e.PlaceNames...)
	c.Jobs = append([]Job(nil), e.Jobs...)
	for i := range c.Jobs {
		c.Jobs[i].Weights = append([]float64(nil), c.Jobs[i].Weights...)
	}
	c.Methods = append(c.Methods[:0:0], e.Methods...)
	c.Seeds = append([]uint64(nil), e.Seeds...)
	c.Budgets = append([]int(nil), e.Budgets...)
	return &c
}

// sweepUnits returns the resolved experiment of every setting and the
// units of the whole sweep, setting after setting, with the setting of
// each (index into settings).
func (s *Sweep) sweepUnits() (settings []Setting, resolved []*Experiment, pub []Unit, us []unit, of []int, err error) {
	settings, err = s.Settings()
	if err != nil {
		return nil, nil, nil, nil, nil, err
	}
	resolved = make([]*Experiment, len(settings))
	for i, st := range settings {
		r, err := st.Experiment.Resolve()
		if err != nil {
			return nil, nil, nil, nil, nil, err
		}
		resolved[i] = r
		for _, u := range r.units() {
			pub = append(pub, r.publicUnit(u, st.Name))
			us = append(us, u)
			of = append(of, i)
		}
	}
	return settings, resolved, pub, us, of, nil
}

// Units returns every unit of the sweep: the units of each setting (see
// Experiment.Units) with their Setting, setting after setting.
func (s *Sweep) Units() ([]Unit, error) {
	_, _, pub, _, _, err := s.sweepUnits()
	return pub, err
}

// Plan returns the units of each of n shards of the whole sweep, assigned
// as Experiment.Plan assigns the runs of one experiment.
func (s *Sweep) Plan(n int) ([][]Unit, error) {
	if n < 1 {
		return nil, fmt.Errorf("experiment: %d shards: %w", n, ErrConfig)
	}
	pub, err := s.Units()
	if err != nil {
		return nil, err
	}
	return planUnits(pub, n), nil
}

// RunShard runs shard sh of the sweep, Plan(sh.Count)[sh.Index], as
// Experiment.RunShard runs the shard of an experiment: on Base.Workers
// goroutines, every run keeping its checkpoint and record in the folder
// of its setting.
func (s *Sweep) RunShard(ctx context.Context, sh Shard) (*ShardReport, error) {
	if err := sh.check(); err != nil {
		return nil, err
	}
	settings, resolved, pub, us, of, err := s.sweepUnits()
	if err != nil {
		return nil, err
	}
	rep := &ShardReport{Shard: sh}
	var tasks []task
	scs := make([]*scoring, len(settings))
	for _, i := range planIndices(pub, sh.count())[sh.Index] {
		k := of[i]
		if scs[k] == nil {
			if scs[k], err = resolved[k].prepare(); err != nil {
				return nil, fmt.Errorf("experiment: setting %s: %w", settings[k].Name, err)
			}
		}
		tasks = append(tasks, task{r: resolved[k], sc: scs[k], u: us[i], label: "setting " + settings[k].Name + ": "})
		rep.Units = append(rep.Units, pub[i])
	}
	outs, err := runTasks(ctx, tasks, s.Base.Workers, s.Base.Progress)
	if err != nil {
		return nil, err
	}
	for _, o := range outs {
		if o.resumed != nil {
			rep.Resumed = append(rep.Resumed, *o.resumed)
		}
	}
	return rep, nil
}

// Merge reads the records of every setting (Experiment.Merge of each) and
// returns the results of every setting in the order of Settings. The
// errors of all settings are joined; each names its folder and files.
func (s *Sweep) Merge() ([]SettingResults, error) {
	settings, err := s.Settings()
	if err != nil {
		return nil, err
	}
	out := make([]SettingResults, len(settings))
	var errs []error
	for i, st := range settings {
		res, err := st.Experiment.Merge()
		if err != nil {
			errs = append(errs, err)
			continue
		}
		out[i] = SettingResults{Setting: st, Results: res}
	}
	if len(errs) > 0 {
		return nil, errors.Join(errs...)
	}
	return out, nil
}

// Run runs the whole sweep in this process (RunShard of shard 0/1) and
// merges it.
func (s *Sweep) Run(ctx context.Context) ([]SettingResults, error) {
	if _, err := s.RunShard(ctx, Shard{}); err != nil {
		return nil, err
	}
	return s.Merge()
}

// sweepFile is the content of sweep.json.
type sweepFile struct {
	Library  string         `json:"library_version"`
	Go       string         `json:"go_version"`
	Axes     []Axis         `json:"axes"`
	Settings []sweepSetting `json:"settings"`
	Notes    []string       `json:"notes,omitempty"`
}

// sweepSetting is a setting in sweep.json: its name (the folder of its
// results.json and results.csv), its values in the order of the axes, and
// its summaries across jobs ("mean") at the largest budget.
type sweepSetting struct {
	Name    string    `json:"name"`
	Values  []float64 `json:"values"`
	Results string    `json:"results"`
	Mean    []Summary `json:"mean"`
}

// WriteFiles writes the merged results of a sweep into dir (created if
// missing):
//
//	<setting>/results.json, <setting>/results.csv
//	            each setting's report (NewReport with notes), the files a
//	            run of its experiment on one machine writes;
//	sweep.csv   every row of every setting's results.csv, preceded by the
//	            value of every axis (one column per axis, named as it);
//	sweep.json  library and Go versions, the axes, and per setting its
//	            name, values, results file and its summaries across jobs
//	            (job "mean") at the largest budget, and the notes.
//
// Every file is written atomically. dir may be the sweep's Dir.
func (s *Sweep) WriteFiles(dir string, res []SettingResults, notes ...string) error {
	sf := sweepFile{Library: successor.Version, Go: runtime.Version(), Axes: s.Axes, Notes: notes}
	var table [][]string
	for _, sr := range res {
		if sr.Results == nil {
			return fmt.Errorf("experiment: sweep files: setting %s has no results: %w", sr.Setting.Name, ErrConfig)
		}
		sub := filepath.Join(dir, sr.Setting.Name)
		if err := os.MkdirAll(sub, 0o755); err != nil {
			return fmt.Errorf("experiment: sweep files: %w", err)
		}
		rep, err := NewReport(sr.Setting.Experiment, sr.Results, notes...)
		if err != nil {
			return err
		}
		if err := rep.WriteJSON(filepath.Join(sub, "results.json")); err != nil {
			return err
		}
		csvPath := filepath.Join(sub, "results.csv")
		if err := rep.WriteCSV(csvPath); err != nil {
			return err
		}
		rows, err := readCSV(csvPath)
		if err != nil {
			return err
		}
		if len(rows) == 0 {
			return fmt.Errorf("experiment: sweep files: %s has no header: %w", csvPath, ErrConfig)
		}
		if len(table) == 0 {
			var head []string
			for _, a := range s.Axes {
				if slices.Contains(rows[0], a.Name) {
					return fmt.Errorf("experiment: sweep files: axis %s is also a column of results.csv: %w", a.Name, ErrConfig)
				}
				head = append(head, a.Name)
			}
			table = append(table, append(head, rows[0]...))
		} else if !slices.Equal(table[0][len(s.Axes):], rows[0]) {
			return fmt.Errorf("experiment: sweep files: %s has other columns than the settings before it: %w", csvPath, ErrConfig)
		}
		lead := make([]string, len(sr.Setting.Values))
		for k, v := range sr.Setting.Values {
			lead[k] = strconv.FormatFloat(v, 'g', -1, 64)
		}
		for _, row := range rows[1:] {
			table = append(table, append(append([]string(nil), lead...), row...))
		}
		last := rep.Config.Budgets[len(rep.Config.Budgets)-1]
		st := sweepSetting{Name: sr.Setting.Name, Values: sr.Setting.Values, Results: filepath.ToSlash(filepath.Join(sr.Setting.Name, "results.json"))}
		for _, m := range sr.Results.Summary {
			if m.Job == "mean" && m.Budget == last {
				st.Mean = append(st.Mean, m)
			}
		}
		sf.Settings = append(sf.Settings, st)
	}
	var buf bytes.Buffer
	w := csv.NewWriter(&buf)
	if err := w.WriteAll(table); err != nil {
		return fmt.Errorf("experiment: sweep csv: %w", err)
	}
	if err := fileio.WriteAtomic(filepath.Join(dir, "sweep.csv"), buf.Bytes(), fileio.FileMode); err != nil {
		return fmt.Errorf("experiment: sweep csv: %w", err)
	}
	b, err := json.MarshalIndent(sf, "", "  ")
	if err != nil {
		return fmt.Errorf("experiment: sweep json: %w", err)
	}
	if err := fileio.WriteAtomic(filepath.Join(dir, "sweep.json"), append(b, '\n'), fileio.FileMode); err != nil {
		return fmt.Errorf("experiment: sweep json: %w", err)
	}
	return nil
}

// readCSV reads the rows of a CSV file.
func readCSV(path string) ([][]string, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("experiment: sweep csv: %w", err)
	}
	rows, err := csv.NewReader(bytes.NewReader(data)).ReadAll()
	if err != nil {
		return nil, fmt.Errorf("experiment: sweep csv: %s: %w", path, err)
	}
	return rows, nil
}
