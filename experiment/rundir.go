package experiment

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"hash/crc32"
	"io/fs"
	"os"
	"path/filepath"
	"time"

	"github.com/successor-go/successor/internal/fileio"
	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/transfer"
)

// methodRun is what one pretraining unit of an experiment produced.
type methodRun struct {
	recs    []Record
	steps   int
	ran     int // steps run in this process
	mi      float64
	resumed *ResumedRun
}

// runConfig returns the pretraining configuration of run (m, seed): the
// method's resolved configuration with the run's seed. e is resolved.
func (e *Experiment) runConfig(m transfer.PretrainConfig, seed uint64) transfer.PretrainConfig {
	m.Seed = DeriveSeed(seed, uint64(m.Method))
	m.Progress = nil
	return m
}

// RunFiles returns the checkpoint and record file names of the pretraining
// run (m, seed) in Experiment.CheckpointDir (see there).
func RunFiles(m transfer.Method, seed uint64) (checkpoint, record string) {
	stem := fmt.Sprintf("%s-seed%d", m, seed)
	return stem + ".ckpt", stem + ".run"
}

// runMethod pretrains the method of configuration mc on seed (or
// continues it from the checkpoint folder) and adapts the agent to every
// job. e is resolved.
func (e *Experiment) runMethod(ctx context.Context, mc transfer.PretrainConfig, seed uint64, rewards []mdp.Reward, refs []*transfer.Reference, addSteps func(int)) (methodRun, error) {
	t0 := time.Now()
	c := e.runConfig(mc, seed)
	m := c.Method
	cfg := c
	explore := e.Explore
	if explore == nil {
		explore = e.Task
	}
	env := mdp.NewSampler(explore, c.EpisodeSteps)
	var out methodRun
	lastMI, last := 0.0, 0
	progress := func(p transfer.Progress) {
		if p.HasMI {
			lastMI = p.MI
		}
		addSteps(p.Steps - last)
		last = p.Steps
	}
	cfg.Progress = progress

	if e.CheckpointDir == "" {
		ag, err := transfer.PretrainContext(ctx, env, &cfg)
		if err != nil {
			return out, fmt.Errorf("pretrain %s: %w", m, err)
		}
		return e.adaptRun(ag, m, seed, lastMI, rewards, refs)
	}

	ckName, recName := RunFiles(m, seed)
	ckPath := filepath.Join(e.CheckpointDir, ckName)
	recPath := filepath.Join(e.CheckpointDir, recName)
	key := e.fingerprint(c, explore.NumStates(), explore.NumActions())
	rec, err := loadRunRecord(recPath)
	if err != nil {
		return out, err
	}
	if rec != nil && (rec.Key != key || rec.Method == nil || *rec.Method != m || rec.Seed != seed) {
		return out, fmt.Errorf("experiment: run record %s belongs to another configuration (use another checkpoint folder): %w", recPath, ErrCheckpoint)
	}
	ag, err := transfer.Load(ckPath)
	switch {
	case errors.Is(err, fs.ErrNotExist):
		ag = nil
	case err != nil:
		return out, fmt.Errorf("pretrain %s: %w", m, err)
	default:
		if err := checkRun(ag, c, e, ckPath); err != nil {
			return out, err
		}
	}

	if rec != nil && rec.Records != nil {
		// Finished and adapted: the rows stand.
		if e.Keep != nil {
			if ag == nil || ag.Steps() < c.Steps {
				return out, fmt.Errorf("experiment: run record %s is complete but checkpoint %s is missing or unfinished: %w", recPath, ckPath, ErrCheckpoint)
			}
			e.Keep(m, seed, ag)
		}
		addSteps(rec.Steps)
		return methodRun{recs: rec.Records, steps: rec.Steps, mi: rec.FinalMI,
			resumed: &ResumedRun{Method: m, Seed: seed, Steps: rec.Steps, Pretrained: true, Adapted: true}}, nil
	}

	// The record of a finished pretraining run is written at its last
	// progress report, before its final checkpoint, so a finished
	// checkpoint always has one.
	var recErr error
	cfg.Progress = func(p transfer.Progress) {
		progress(p)
		if p.Steps >= c.Steps && recErr == nil {
			recErr = saveRunRecord(recPath, &runRecord{Key: key, Method: &m, Seed: seed, Steps: p.Steps, FinalMI: lastMI})
		}
	}
	cfg.CheckpointPath = ckPath
	if cfg.CheckpointEvery == 0 {
		cfg.CheckpointEvery = max(c.Steps/5, 1)
	}
	var resumed *ResumedRun
	switch {
	case ag == nil:
		ag, err = transfer.PretrainContext(ctx, env, &cfg)
	case ag.Steps() >= c.Steps:
		if rec == nil {
			return out, fmt.Errorf("experiment: checkpoint %s is finished but its run record %s is missing: %w", ckPath, recPath, ErrCheckpoint)
		}
		resumed = &ResumedRun{Method: m, Seed: seed, Steps: ag.Steps(), Pretrained: true}
		lastMI = rec.FinalMI
		addSteps(ag.Steps())
	default:
		resumed = &ResumedRun{Method: m, Seed: seed, Steps: ag.Steps()}
		err = ag.Continue(ctx, env, &transfer.ResumeConfig{Steps: c.Steps, CheckpointEvery: cfg.CheckpointEvery,
			CheckpointPath: ckPath, ProgressEvery: c.ProgressEvery, Progress: cfg.Progress})
	}
	if err == nil {
		err = recErr
	}
	if err != nil {
		return out, fmt.Errorf("pretrain %s: %w", m, err)
	}
	out, err = e.adaptRun(ag, m, seed, lastMI, rewards, refs)
	if err != nil {
		return out, err
	}
	out.resumed = resumed
	if resumed != nil {
		out.ran = out.steps - resumed.Steps
	}
	ran := out.ran
	if err := saveRunRecord(recPath, &runRecord{Key: key, Method: &m, Seed: seed, Steps: out.steps, FinalMI: out.mi,
		Seconds: time.Since(t0).Seconds(), Ran: &ran, Origin: origin(), Records: out.recs}); err != nil {
		return out, err
	}
	if e.DropCheckpoints {
		if err := os.Remove(ckPath); err != nil && !errors.Is(err, fs.ErrNotExist) {
			return out, fmt.Errorf("experiment: drop checkpoint: %w", err)
		}
	}
	return out, nil
}

// adaptRun hands the pretrained agent to Keep and scores it on every job.
func (e *Experiment) adaptRun(ag *transfer.Agent, m transfer.Method, seed uint64, mi float64, rewards []mdp.Reward, refs []*transfer.Reference) (methodRun, error) {
	if e.Keep != nil {
		e.Keep(m, seed, ag)
	}
	recs, err := e.adaptAll(ag, seed, rewards, refs)
	return methodRun{recs: recs, steps: ag.Steps(), ran: ag.Steps(), mi: mi}, err
}

// checkRun returns an error wrapping ErrCheckpoint, naming the first
// difference, if the agent loaded from path was not trained with the
// configuration c (resolved, with the run's seed) on the experiment's MDP
// sizes and place features. The configurations are compared in their
// recorded (JSON) form, field by field.
func checkRun(ag *transfer.Agent, c transfer.PretrainConfig, e *Experiment, path string) error {
	diff := func(what string, got, want any) error {
		return fmt.Errorf("experiment: checkpoint %s belongs to another configuration: %s %v, this run %v (use another checkpoint folder): %w", path, what, got, want, ErrCheckpoint)
	}
	if ag.NumStates() != e.Task.NumStates() {
		return diff("states", ag.NumStates(), e.Task.NumStates())
	}
	if ag.NumActions() != e.Task.NumActions() {
		return diff("actions", ag.NumActions(), e.Task.NumActions())
	}
	got, want := configFields(ag.Config()), configFields(c)
	for i, f := range want {
		if i >= len(got) || got[i].key != f.key || string(got[i].val) != string(f.val) {
			g := ""
			if i < len(got) {
				g = string(got[i].val)
			}
			return diff(f.key, g, string(f.val))
		}
	}
	if c.Method == transfer.Given {
		row := make([]float64, c.Dim)
		have := make([]float64, c.Dim)
		for s := range ag.NumStates() {
			e.Places.Features(row, s, 0, s)
			ag.Phi(have, s)
			for i, v := range have {
				if v != row[i] {
					return diff(fmt.Sprintf("place feature %d of state %d", i, s), v, row[i])
				}
			}
		}
	}
	return nil
}

// field is one key and value of a JSON object.
type field struct {
	key string
	val json.RawMessage
}

// configFields returns the recorded (JSON) form of a pretraining
// configuration, field by field in the order of the struct.
func configFields(c transfer.PretrainConfig) []field {
	b, err := json.Marshal(c)
	if err != nil {
		panic("experiment: configuration json: " + err.Error()) // a resolved configuration is finite
	}
	d := json.NewDecoder(bytes.NewReader(b))
	var out []field
	if _, err := d.Token(); err != nil { // {
		panic("experiment: configuration json: " + err.Error())
	}
	for d.More() {
		k, err := d.Token()
		if err != nil {
			panic("experiment: configuration json: " + err.Error())
		}
		var v json.RawMessage
		if err := d.Decode(&v); err != nil {
			panic("experiment: configuration json: " + err.Error())
		}
		out = append(out, field{k.(string), v})
	}
	return out
}

// fingerprint returns the SHA-256 (hex) of everything the figures of a
// pretraining run with configuration c depend on, besides the MDPs'
// transition probabilities. e is resolved.
func (e *Experiment) fingerprint(c transfer.PretrainConfig, states, actions int) string {
	places := make([]float64, 0, states*e.Places.Dim())
	row := make([]float64, e.Places.Dim())
	for s := range states {
		e.Places.Features(row, s, 0, s)
		places = append(places, row...)
	}
	b, err := json.Marshal(struct {
		Pretrain   transfer.PretrainConfig `json:"pretrain"`
		Adapt      transfer.AdaptConfig    `json:"adapt"`
		Jobs       []Job                   `json:"jobs"`
		Budgets    []int                   `json:"budgets"`
		TaskGamma  float64                 `json:"task_gamma"`
		States     int                     `json:"states"`
		Actions    int                     `json:"actions"`
		TaskStates int                     `json:"task_states"`
		PlaceNames []string                `json:"place_names"`
		Places     []float64               `json:"places"`
	}{c, e.Adapt, e.Jobs, e.Budgets, e.TaskGamma, states, actions, e.Task.NumStates(), e.PlaceNames, places})
	if err != nil {
		panic("experiment: fingerprint: " + err.Error()) // finite configurations marshal
	}
	h := sha256.Sum256(b)
	return hex.EncodeToString(h[:])
}

// runRecord is the body of a .run file: the record of a pretraining run
// (Method set) or of the baselines of a seed (Baselines set). Seconds
// (the wall-clock time of the process that finished the run) and Origin
// (the build that wrote the rows, see origin) are new in version 2.
type runRecord struct {
	Key       string           `json:"key"`
	Method    *transfer.Method `json:"method,omitempty"`
	Baselines bool             `json:"baselines,omitempty"`
	Seed      uint64           `json:"seed"`
	Steps     int              `json:"steps"`
	FinalMI   float64          `json:"final_mi"`
	Seconds   float64          `json:"seconds,omitempty"`
	Ran       *int             `json:"ran,omitempty"` // pretraining steps run in Seconds; nil in older records
	Origin    string           `json:"origin,omitempty"`
	Records   []Record         `json:"records"`
}

// runEnvelope frames a runRecord with a format name, a version and the
// CRC-32 (Castagnoli) of the body's bytes.
type runEnvelope struct {
	Format  string          `json:"format"`
	Version int             `json:"version"`
	CRC     uint32          `json:"crc32c"`
	Body    json.RawMessage `json:"body"`
}

var crcTable = crc32.MakeTable(crc32.Castagnoli)

// The format of run records. Version 2 added the baselines' records and
// the fields seconds and origin; version 1 files are still read.
const (
	runFormat  = "successor experiment run record"
	runVersion = 2
)

func marshalRunRecord(r *runRecord) ([]byte, error) {
	body, err := json.Marshal(r)
	if err != nil {
		return nil, err
	}
	b, err := json.Marshal(runEnvelope{Format: runFormat, Version: runVersion, CRC: crc32.Checksum(body, crcTable), Body: body})
	if err != nil {
		return nil, err
	}
	return append(b, '\n'), nil
}

func saveRunRecord(path string, r *runRecord) error {
	b, err := marshalRunRecord(r)
	if err == nil {
		err = fileio.WriteAtomic(path, b, 0o600)
	}
	if err != nil {
		return fmt.Errorf("experiment: run record %s: %w", path, err)
	}
	return nil
}

// unmarshalRunRecord decodes a .run file; errors wrap ErrCheckpoint.
func unmarshalRunRecord(data []byte) (*runRecord, error) {
	var env runEnvelope
	d := json.NewDecoder(bytes.NewReader(data))
	d.DisallowUnknownFields()
	if err := d.Decode(&env); err != nil {
		return nil, fmt.Errorf("not a run record: %w: %w", ErrCheckpoint, err)
	}
	if env.Format != runFormat || env.Version != runVersion && env.Version != 1 {
		return nil, fmt.Errorf("run record format %q version %d, want %q version %d: %w", env.Format, env.Version, runFormat, runVersion, ErrCheckpoint)
	}
	if got := crc32.Checksum(env.Body, crcTable); got != env.CRC {
		return nil, fmt.Errorf("run record checksum %08x, want %08x: %w", got, env.CRC, ErrCheckpoint)
	}
	var r runRecord
	d = json.NewDecoder(bytes.NewReader(env.Body))
	d.DisallowUnknownFields()
	if err := d.Decode(&r); err != nil {
		return nil, fmt.Errorf("run record body: %w: %w", ErrCheckpoint, err)
	}
	if r.Steps < 0 || !(r.Seconds >= 0) {
		return nil, fmt.Errorf("run record: %d steps, %v seconds: %w", r.Steps, r.Seconds, ErrCheckpoint)
	}
	if (r.Method == nil) != r.Baselines {
		return nil, fmt.Errorf("run record: neither a method's nor the baselines': %w", ErrCheckpoint)
	}
	return &r, nil
}

// loadRunRecord reads the .run file at path; a missing file gives nil and
// no error.
func loadRunRecord(path string) (*runRecord, error) {
	data, err := os.ReadFile(path)
	if errors.Is(err, fs.ErrNotExist) {
		return nil, nil
	}
	if err != nil {
		return nil, fmt.Errorf("experiment: run record: %w", err)
	}
	r, err := unmarshalRunRecord(data)
	if err != nil {
		return nil, fmt.Errorf("experiment: %s: %w", path, err)
	}
	return r, nil
}
