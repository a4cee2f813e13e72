package experiment

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"github.com/successor-go/successor/transfer"
)

// MergeError lists what keeps Merge from returning results; every entry
// names a file of the folder Dir. It unwraps to ErrCheckpoint.
type MergeError struct {
	Dir string
	// Missing are the records of the runs that have none yet: the run has
	// not started, or its shard has not finished it.
	Missing []string
	// Unfinished are the records of runs that stopped after pretraining
	// and before their result rows were written.
	Unfinished []string
	// Foreign are records of another experiment: written with another
	// configuration, or of no run of this one (a method or seed it does
	// not have).
	Foreign []string
	// Unreadable are the errors of records that cannot be read: truncated
	// (for example half-written by an interrupted copy), corrupted, or of
	// an unknown format. Each names its file.
	Unreadable []error
	// Origins maps each build (library version, Go version, system and
	// architecture) to the records it wrote, when more than one build
	// wrote the folder's records: their figures may differ in the last
	// bits, so they are not merged.
	Origins map[string][]string
}

// Error lists every problem with the files it concerns.
func (e *MergeError) Error() string {
	var parts []string
	list := func(what string, names []string) {
		if len(names) > 0 {
			parts = append(parts, fmt.Sprintf("%d %s (%s)", len(names), what, strings.Join(names, ", ")))
		}
	}
	list("records missing", e.Missing)
	list("runs unfinished", e.Unfinished)
	list("records of another experiment (use one folder per experiment)", e.Foreign)
	for _, err := range e.Unreadable {
		parts = append(parts, err.Error())
	}
	if len(e.Origins) > 0 {
		keys := make([]string, 0, len(e.Origins))
		for k := range e.Origins {
			keys = append(keys, k)
		}
		slices.Sort(keys)
		var o []string
		for _, k := range keys {
			o = append(o, fmt.Sprintf("%s: %s", k, strings.Join(e.Origins[k], ", ")))
		}
		parts = append(parts, "records written by different builds, whose figures may differ in the last bits (rerun them with one build): "+strings.Join(o, "; "))
	}
	return fmt.Sprintf("experiment: cannot merge the records in %s: %s", e.Dir, strings.Join(parts, "; "))
}

// Unwrap returns ErrCheckpoint.
func (e *MergeError) Unwrap() error { return ErrCheckpoint }

// empty reports whether e lists no problem.
func (e *MergeError) empty() bool {
	return len(e.Missing) == 0 && len(e.Unfinished) == 0 && len(e.Foreign) == 0 && len(e.Unreadable) == 0 && len(e.Origins) == 0
}

// Merge reads the records of every run of the experiment from
// CheckpointDir, written by the shards of RunShard (or by RunContext), and
// returns the results of the whole experiment: the same figures, bit for
// bit, as RunContext of the same experiment on one machine. Only the
// timings differ: PretrainStats.Seconds and StepsPerSecond are those the
// records hold, measured where each run finished (the steps run there
// only, for a run resumed there). Results.Resumed is empty: the records
// do not say which runs were resumed. Merge only reads, so merging twice gives the same results.
//
// If Keep is set, Merge loads every pretrained agent from its checkpoint
// in the folder, checks it against the configuration, and hands it to Keep
// (for figures that need the agents), in the order of the results.
//
// Records that are missing, unfinished, of another experiment, unreadable
// or written by different builds give a *MergeError listing all of them
// by file name (it wraps ErrCheckpoint); every .run file of the folder
// must be a record of this experiment. An experiment without
// CheckpointDir, or one that does not resolve, is an error wrapping
// ErrConfig.
func (e *Experiment) Merge() (*Results, error) {
	r, err := e.Resolve()
	if err != nil {
		return nil, err
	}
	if r.CheckpointDir == "" {
		return nil, fmt.Errorf("experiment: merge needs the CheckpointDir of the records: %w", ErrConfig)
	}
	outs, err := r.readUnits()
	if err != nil {
		return nil, err
	}
	return r.assemble(outs), nil
}

// readUnits reads the record of every unit of the resolved experiment r
// from its CheckpointDir (see Merge).
func (r *Experiment) readUnits() ([]unitOut, error) {
	dir := r.CheckpointDir
	// A folder that does not exist holds no record: all are missing.
	entries, err := os.ReadDir(dir)
	if err != nil && !errors.Is(err, fs.ErrNotExist) {
		return nil, fmt.Errorf("experiment: merge: %w: %w", ErrCheckpoint, err)
	}
	me := &MergeError{Dir: dir}
	us := r.units()
	outs := make([]unitOut, len(us))
	expected := map[string]bool{}
	origins := map[string][]string{}
	explore := r.Explore
	if explore == nil {
		explore = r.Task
	}
	var baseKey string
	for ui, u := range us {
		var name, key string
		var m transfer.Method
		seed := r.Seeds[u.seed]
		if u.method < 0 {
			name = baselineFile(seed)
			if baseKey == "" {
				baseKey = r.baselineKey()
			}
			key = baseKey
		} else {
			m = r.Methods[u.method].Method
			_, name = RunFiles(m, seed)
			key = r.fingerprint(r.runConfig(r.Methods[u.method], seed), explore.NumStates(), explore.NumActions())
		}
		expected[name] = true
		rec, err := loadRunRecord(filepath.Join(dir, name))
		switch {
		case err != nil:
			me.Unreadable = append(me.Unreadable, err)
			continue
		case rec == nil:
			me.Missing = append(me.Missing, name)
			continue
		case rec.Key != key || rec.Seed != seed || rec.Baselines != (u.method < 0) || u.method >= 0 && (rec.Method == nil || *rec.Method != m):
			me.Foreign = append(me.Foreign, name)
			continue
		case rec.Records == nil:
			me.Unfinished = append(me.Unfinished, name)
			continue
		}
		if rec.Origin != "" {
			origins[rec.Origin] = append(origins[rec.Origin], name)
		}
		outs[ui] = unitOut{recs: rec.Records, seconds: rec.Seconds}
		if u.method >= 0 {
			outs[ui].steps, outs[ui].ran, outs[ui].mi = rec.Steps, rec.Steps, rec.FinalMI
			if rec.Ran != nil { // older records: all steps taken as run in Seconds
				outs[ui].ran = *rec.Ran
			}
		}
	}
	for _, en := range entries {
		if n := en.Name(); strings.HasSuffix(n, ".run") && !expected[n] {
			me.Foreign = append(me.Foreign, n)
		}
	}
	if len(origins) > 1 {
		me.Origins = origins
	}
	if !me.empty() {
		return nil, me
	}
	if r.Keep != nil {
		for _, u := range us {
			if u.method < 0 {
				continue
			}
			if err := r.keepRun(r.Methods[u.method], r.Seeds[u.seed]); err != nil {
				return nil, err
			}
		}
	}
	return outs, nil
}

// keepRun loads the checkpoint of run (mc, seed), checks it, and hands the
// agent to Keep. r is resolved.
func (r *Experiment) keepRun(mc transfer.PretrainConfig, seed uint64) error {
	c := r.runConfig(mc, seed)
	ck, _ := RunFiles(c.Method, seed)
	path := filepath.Join(r.CheckpointDir, ck)
	ag, err := transfer.Load(path)
	if errors.Is(err, fs.ErrNotExist) {
		return fmt.Errorf("experiment: merge: checkpoint %s is missing (Keep needs the agents): %w", path, ErrCheckpoint)
	}
	if err != nil {
		return fmt.Errorf("experiment: merge: %w", err)
	}
	if err := checkRun(ag, c, r, path); err != nil {
		return err
	}
	if ag.Steps() < c.Steps {
		return fmt.Errorf("experiment: merge: checkpoint %s is unfinished (step %d of %d): %w", path, ag.Steps(), c.Steps, ErrCheckpoint)
	}
	r.Keep(c.Method, seed, ag)
	return nil
}
