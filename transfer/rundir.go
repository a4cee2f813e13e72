package transfer

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

	"github.com/successor-go/successor/internal/fileio"
	"github.com/successor-go/successor/mdp"
)

// methodRun is what one pretraining unit of an experiment produced.
type methodRun struct {
	recs    []Record
	steps   int
	mi      float64
	resumed *ResumedRun
}

// runConfig returns the pretraining configuration of run (m, seed), with
// and without defaults.
func (e *Experiment) runConfig(m Method, seed uint64) (cfg, c PretrainConfig) {
	cfg = e.Pretrain
	cfg.Method = m
	cfg.Features = e.Places
	cfg.Seed = DeriveSeed(seed, uint64(m))
	cfg.Progress = nil
	c, _ = cfg.withDefaults()
	return cfg, c
}

// RunFiles returns the checkpoint and record file names of the pretraining
// run (m, seed) in Experiment.CheckpointDir (see there).
func RunFiles(m Method, seed uint64) (checkpoint, record string) {
	stem := fmt.Sprintf("%s-seed%d", m, seed)
	return stem + ".ckpt", stem + ".run"
}

// runMethod pretrains method m on seed (or continues it from the
// checkpoint folder) and adapts the agent to every job.
func (e *Experiment) runMethod(ctx context.Context, m Method, seed uint64, rewards []mdp.Reward, refs []*Reference, addSteps func(int)) (methodRun, error) {
	cfg, c := e.runConfig(m, seed)
	cfg.stop = ctx.Err
	explore := e.Explore
	if explore == nil {
		explore = e.Task
	}
	env := mdp.NewSampler(explore, c.EpisodeSteps)
	var out methodRun
	lastMI, last := 0.0, 0
	progress := func(p Progress) {
		if p.HasMI {
			lastMI = p.MI
		}
		addSteps(p.Steps - last)
		last = p.Steps
	}
	cfg.Progress = progress

	if e.CheckpointDir == "" {
		ag, err := Pretrain(env, cfg)
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
	if rec != nil && (rec.Key != key || rec.Method != m || rec.Seed != seed) {
		return out, fmt.Errorf("transfer: run record %s belongs to another configuration (use another checkpoint folder): %w", recPath, ErrCheckpoint)
	}
	ag, err := Load(ckPath)
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
			if ag == nil || ag.steps < c.Steps {
				return out, fmt.Errorf("transfer: run record %s is complete but checkpoint %s is missing or unfinished: %w", recPath, ckPath, ErrCheckpoint)
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
	cfg.Progress = func(p Progress) {
		progress(p)
		if p.Steps >= c.Steps && recErr == nil {
			recErr = saveRunRecord(recPath, &runRecord{Key: key, Method: m, Seed: seed, Steps: p.Steps, FinalMI: lastMI})
		}
	}
	cfg.CheckpointPath = ckPath
	if cfg.CheckpointEvery == 0 {
		cfg.CheckpointEvery = max(c.Steps/5, 1)
	}
	var resumed *ResumedRun
	switch {
	case ag == nil:
		ag, err = Pretrain(env, cfg)
	case ag.steps >= c.Steps:
		if rec == nil {
			return out, fmt.Errorf("transfer: checkpoint %s is finished but its run record %s is missing: %w", ckPath, recPath, ErrCheckpoint)
		}
		resumed = &ResumedRun{Method: m, Seed: seed, Steps: ag.steps, Pretrained: true}
		lastMI = rec.FinalMI
		addSteps(ag.steps)
	default:
		resumed = &ResumedRun{Method: m, Seed: seed, Steps: ag.steps}
		err = ag.resume(env, ckPath, cfg)
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
	if err := saveRunRecord(recPath, &runRecord{Key: key, Method: m, Seed: seed, Steps: out.steps, FinalMI: out.mi, Records: out.recs}); err != nil {
		return out, err
	}
	return out, nil
}

// adaptRun hands the pretrained agent to Keep and scores it on every job.
func (e *Experiment) adaptRun(ag *Agent, m Method, seed uint64, mi float64, rewards []mdp.Reward, refs []*Reference) (methodRun, error) {
	if e.Keep != nil {
		e.Keep(m, seed, ag)
	}
	recs, err := e.adaptAll(ag, seed, rewards, refs)
	return methodRun{recs: recs, steps: ag.Steps(), mi: mi}, err
}

// checkRun returns an error wrapping ErrCheckpoint, naming the first
// difference, if the agent loaded from path was not trained with the
// configuration c (defaults applied) on the experiment's MDP sizes and
// place features.
func checkRun(ag *Agent, c PretrainConfig, e *Experiment, path string) error {
	g := ag.cfg
	diff := func(what string, got, want any) error {
		return fmt.Errorf("transfer: checkpoint %s belongs to another configuration: %s %v, this run %v (use another checkpoint folder): %w", path, what, got, want, ErrCheckpoint)
	}
	for _, f := range []struct {
		name      string
		got, want any
	}{
		{"method", g.Method, c.Method},
		{"states", ag.n, e.Task.NumStates()},
		{"actions", ag.a, e.Task.NumActions()},
		{"dim", g.Dim, c.Dim},
		{"kappa", g.Kappa, c.Kappa},
		{"relabel", g.Relabel, c.Relabel},
		{"steps", g.Steps, c.Steps},
		{"episode steps", g.EpisodeSteps, c.EpisodeSteps},
		{"gamma", g.Gamma, c.Gamma},
		{"epsilon", g.Epsilon, c.Epsilon},
		{"batch", g.Batch, c.Batch},
		{"replay", g.Replay, c.Replay},
		{"learn rate", g.LearnRate, c.LearnRate},
		{"disc rate", g.DiscRate, c.DiscRate},
		{"disc optimiser", g.DiscOptim, c.DiscOptim},
		{"seed", g.Seed, c.Seed},
		{"progress every", g.ProgressEvery, c.ProgressEvery},
	} {
		if f.got != f.want {
			return diff(f.name, f.got, f.want)
		}
	}
	if c.Method != Categorical && ag.k != c.Skills {
		return diff("skills", ag.k, c.Skills)
	}
	if c.Method == Given {
		row := make([]float64, c.Dim)
		for s := range ag.n {
			e.Places.Features(row, s, 0, s)
			for i, v := range ag.fixed.Row(s) {
				if v != row[i] {
					return diff(fmt.Sprintf("place feature %d of state %d", i, s), v, row[i])
				}
			}
		}
	}
	return nil
}

// fingerprint returns the SHA-256 (hex) of everything the figures of a
// pretraining run with configuration c depend on, besides the MDPs'
// transition probabilities.
func (e *Experiment) fingerprint(c PretrainConfig, states, actions int) string {
	c.Features, c.Progress, c.stop = nil, nil, nil
	c.CheckpointEvery, c.CheckpointPath = 0, ""
	ac, _ := e.Adapt.withDefaults()
	places := make([]float64, 0, states*e.Places.Dim())
	row := make([]float64, e.Places.Dim())
	for s := range states {
		e.Places.Features(row, s, 0, s)
		places = append(places, row...)
	}
	b, err := json.Marshal(struct {
		Pretrain        PretrainConfig
		Adapt           AdaptConfig
		NoCV            bool
		Jobs            []Job
		Budgets         []int
		Gamma           float64
		States, Actions int
		TaskStates      int
		PlaceNames      []string
		Places          []float64
	}{c, ac, ac.noCV, e.Jobs, e.Budgets, e.gamma(), states, actions, e.Task.NumStates(), e.PlaceNames, places})
	if err != nil {
		panic("transfer: fingerprint: " + err.Error()) // finite configurations marshal
	}
	h := sha256.Sum256(b)
	return hex.EncodeToString(h[:])
}

// runRecord is the body of a .run file.
type runRecord struct {
	Key     string   `json:"key"`
	Method  Method   `json:"method"`
	Seed    uint64   `json:"seed"`
	Steps   int      `json:"steps"`
	FinalMI float64  `json:"final_mi"`
	Records []Record `json:"records"`
}

// runEnvelope frames a runRecord with a format name, a version and the
// CRC-32 (Castagnoli) of the body's bytes.
type runEnvelope struct {
	Format  string          `json:"format"`
	Version int             `json:"version"`
	CRC     uint32          `json:"crc32c"`
	Body    json.RawMessage `json:"body"`
}

const (
	runFormat  = "successor transfer run record"
	runVersion = 1
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
		return fmt.Errorf("transfer: run record %s: %w", path, err)
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
	if env.Format != runFormat || env.Version != runVersion {
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
	if r.Steps < 0 {
		return nil, fmt.Errorf("run record: %d steps: %w", r.Steps, ErrCheckpoint)
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
		return nil, fmt.Errorf("transfer: run record: %w", err)
	}
	r, err := unmarshalRunRecord(data)
	if err != nil {
		return nil, fmt.Errorf("transfer: %s: %w", path, err)
	}
	return r, nil
}
