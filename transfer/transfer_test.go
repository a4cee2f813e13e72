package transfer_test

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/sf"
	"github.com/successor-go/successor/skills"
	"github.com/successor-go/successor/transfer"
)

// tinyLayout is an invented 5 x 3 room with two labelled places.
const tinyLayout = `
#######
#A...B#
#.....#
#..S..#
#######
`

func tinyGrid(t testing.TB) (*mdp.Grid, *sf.Labels) {
	t.Helper()
	g, err := mdp.ParseGrid(tinyLayout, &mdp.GridConfig{Labels: map[rune]string{'A': "apple", 'B': "berry"}, Stay: true})
	if err != nil {
		t.Fatal(err)
	}
	f, err := sf.GridLabels(g, false)
	if err != nil {
		t.Fatal(err)
	}
	return g, f
}

// TestCheckpointResume checks that a run saved at N steps and resumed to 2N
// equals, bit for bit, an uninterrupted run of 2N steps; and that a
// corrupted or truncated checkpoint is rejected.
func TestCheckpointResume(t *testing.T) {
	g, f := tinyGrid(t)
	dir := t.TempDir()
	for _, tc := range []struct {
		m transfer.Method
		o skills.OptimMethod
	}{
		{transfer.VMF, skills.OptimAdam}, {transfer.Categorical, skills.OptimAdam},
		{transfer.VMF, skills.OptimSparseAdam}, {transfer.Categorical, skills.OptimSparseAdam},
		{transfer.Random, skills.OptimAdam}, {transfer.Given, skills.OptimAdam},
	} {
		m := tc.m
		t.Run(m.String()+"/"+tc.o.String(), func(t *testing.T) {
			cfg := transfer.PretrainConfig{Method: m, Features: f, Skills: 8, Steps: 600, EpisodeSteps: 15, Seed: 7, Replay: 500, ProgressEvery: 50, DiscOptim: tc.o}
			if m.Sphere() && m != transfer.Given {
				cfg.Dim = 4
			}
			env := mdp.NewSampler(g.MDP, 0)
			full, err := transfer.Pretrain(env, &cfg)
			if err != nil {
				t.Fatal(err)
			}
			half := cfg
			half.Steps = 300
			half.CheckpointPath = filepath.Join(dir, m.String()+tc.o.String()+".ckpt")
			if _, err := transfer.Pretrain(env, &half); err != nil {
				t.Fatal(err)
			}
			resumed, err := transfer.Resume(env, half.CheckpointPath, &transfer.ResumeConfig{Steps: 600})
			if err != nil {
				t.Fatal(err)
			}
			if resumed.Steps() != full.Steps() || resumed.Episodes() != full.Episodes() {
				t.Fatalf("resumed at %d steps %d episodes, uninterrupted %d, %d", resumed.Steps(), resumed.Episodes(), full.Steps(), full.Episodes())
			}
			if got := resumed.Config().DiscOptim; got != tc.o {
				t.Errorf("resumed discriminator optimiser %v, want %v", got, tc.o)
			}
			a := filepath.Join(dir, m.String()+tc.o.String()+"-a")
			b := filepath.Join(dir, m.String()+tc.o.String()+"-b")
			if err := full.Save(a); err != nil {
				t.Fatal(err)
			}
			if err := resumed.Save(b); err != nil {
				t.Fatal(err)
			}
			da, _ := os.ReadFile(a)
			db, _ := os.ReadFile(b)
			// The saved configurations differ only in the checkpoint path,
			// which is not saved; the bytes must be equal.
			if string(da) != string(db) {
				t.Fatal("resumed run differs from the uninterrupted run")
			}
		})
	}

	cfg := transfer.PretrainConfig{Dim: 4, Skills: 8, Steps: 200, EpisodeSteps: 15, Seed: 3, Replay: 300}
	ag, err := transfer.Pretrain(mdp.NewSampler(g.MDP, 0), &cfg)
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(dir, "good")
	if err := ag.Save(path); err != nil {
		t.Fatal(err)
	}
	data, _ := os.ReadFile(path)
	if _, err := transfer.Unmarshal(data); err != nil {
		t.Fatalf("good checkpoint rejected: %v", err)
	}
	for _, tc := range []struct {
		name string
		mut  func([]byte) []byte
	}{
		{"bit flip in payload", func(b []byte) []byte { b[len(b)/2] ^= 0x10; return b }},
		{"bit flip in checksum", func(b []byte) []byte { b[len(b)-1] ^= 1; return b }},
		{"truncated", func(b []byte) []byte { return b[:len(b)-9] }},
		{"empty", func(b []byte) []byte { return nil }},
		{"bad magic", func(b []byte) []byte { b[0] = 'X'; return b }},
		{"other version", func(b []byte) []byte { b[8] = 99; return b }},
	} {
		bad := tc.mut(append([]byte(nil), data...))
		p := filepath.Join(dir, "bad")
		os.WriteFile(p, bad, 0o644)
		if _, err := transfer.Load(p); !errors.Is(err, transfer.ErrCheckpoint) {
			t.Errorf("%s: got %v, want ErrCheckpoint", tc.name, err)
		}
	}
}

// FuzzUnmarshal checks that decoding arbitrary bytes never panics and that
// whatever decodes re-encodes to the same bytes.
func FuzzUnmarshal(f *testing.F) {
	g, _ := tinyGrid(f)
	ag, err := transfer.Pretrain(mdp.NewSampler(g.MDP, 0), &transfer.PretrainConfig{Dim: 3, Skills: 4, Steps: 50, EpisodeSteps: 10, Replay: 64})
	if err != nil {
		f.Fatal(err)
	}
	path := filepath.Join(f.TempDir(), "seed")
	if err := ag.Save(path); err != nil {
		f.Fatal(err)
	}
	data, _ := os.ReadFile(path)
	f.Add(data)
	f.Add(data[:40])
	f.Fuzz(func(t *testing.T, b []byte) {
		a, err := transfer.Unmarshal(b)
		if err != nil {
			if !errors.Is(err, transfer.ErrCheckpoint) {
				t.Fatalf("error does not wrap ErrCheckpoint: %v", err)
			}
			return
		}
		p := filepath.Join(t.TempDir(), "x")
		if err := a.Save(p); err != nil {
			t.Fatal(err)
		}
		again, _ := os.ReadFile(p)
		if string(again) != string(b) {
			t.Fatal("round trip changed the bytes")
		}
	})
}

func TestConfigErrors(t *testing.T) {
	g, _ := tinyGrid(t)
	env := mdp.NewSampler(g.MDP, 0)
	for _, cfg := range []transfer.PretrainConfig{
		{Method: transfer.Given}, // no features
		{SkillGamma: 1},
		{SkillGamma: -0.5},
		{Kappa: -1},
		{Dim: 1},
		{Steps: -5},
		{Epsilon: 2},
		{StepSize: 3},
		{Method: 9},
		{DiscOptim: 7},
		{Method: transfer.Categorical, Skills: 4, Dim: 4}, // categorical features have K+1 = 5 entries
		{Skills: -1},
		{Batch: -1},
	} {
		if _, err := transfer.Pretrain(env, &cfg); !errors.Is(err, transfer.ErrConfig) {
			t.Errorf("%+v: got %v, want ErrConfig", cfg, err)
		}
	}
	if _, err := transfer.ParseMethod("nope"); !errors.Is(err, transfer.ErrConfig) {
		t.Errorf("ParseMethod: got %v", err)
	}
	ag, err := transfer.Pretrain(env, &transfer.PretrainConfig{Dim: 3, Skills: 4, Steps: 40, EpisodeSteps: 10})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := transfer.Adapt(ag, nil, &transfer.AdaptConfig{}); !errors.Is(err, transfer.ErrNoData) {
		t.Errorf("Adapt without data: got %v, want ErrNoData", err)
	}
}

// TestCollect checks the labelled budget is exact under both rules and that
// uniform exploration needs no agent.
func TestCollect(t *testing.T) {
	g, _ := tinyGrid(t)
	w, _ := g.Weights(map[string]float64{"apple": 1})
	r, _ := g.PlaceReward(w)
	env := mdp.NewSampler(g.MDP, 0)
	for _, k := range []int{0, 1, 37, 200} {
		lab, err := transfer.Collect(env, nil, r, k, &transfer.AdaptConfig{Explore: transfer.ExploreUniform, EpisodeSteps: 15}, rand.New(rand.NewPCG(1, 2)))
		if err != nil {
			t.Fatal(err)
		}
		if len(lab) != k {
			t.Errorf("uniform: %d transitions, want %d", len(lab), k)
		}
		for _, l := range lab {
			if l.Reward != r(l.S, l.A, l.Next) {
				t.Fatalf("transition %+v mislabelled", l)
			}
		}
	}
	if _, err := transfer.Collect(env, nil, r, 5, &transfer.AdaptConfig{}, rand.New(rand.NewPCG(1, 2))); !errors.Is(err, transfer.ErrConfig) {
		t.Errorf("skills without an agent: got %v, want ErrConfig", err)
	}
	if _, err := transfer.Collect(env, nil, r, -1, &transfer.AdaptConfig{Explore: transfer.ExploreUniform}, rand.New(rand.NewPCG(1, 2))); !errors.Is(err, transfer.ErrConfig) {
		t.Errorf("negative budget: got %v, want ErrConfig", err)
	}
	if _, err := transfer.Collect(env, nil, r, 5, &transfer.AdaptConfig{Explore: transfer.ExploreUniform}, nil); !errors.Is(err, transfer.ErrConfig) {
		t.Errorf("nil rng: %v, want ErrConfig", err)
	}
	if _, _, err := transfer.MonteCarlo(env, func(int) int { return 0 }, r, 0.9, 10, 10, nil); !errors.Is(err, transfer.ErrConfig) {
		t.Errorf("monte carlo, nil rng: %v, want ErrConfig", err)
	}
}

// TestResumeMismatch checks that a checkpoint cannot be resumed on an
// environment of another size.
func TestResumeMismatch(t *testing.T) {
	g, _ := tinyGrid(t)
	path := filepath.Join(t.TempDir(), "ck")
	if _, err := transfer.Pretrain(mdp.NewSampler(g.MDP, 0), &transfer.PretrainConfig{Dim: 3, Skills: 4, Steps: 50, EpisodeSteps: 10, CheckpointPath: path}); err != nil {
		t.Fatal(err)
	}
	d, err := mdp.Depot()
	if err != nil {
		t.Fatal(err)
	}
	if _, err := transfer.Resume(mdp.NewSampler(d.MDP, 0), path, &transfer.ResumeConfig{Steps: 100}); !errors.Is(err, transfer.ErrConfig) {
		t.Errorf("got %v, want ErrConfig", err)
	}
}

// TestCollectPrefix checks the documented prefix property: the first j
// transitions of a collection of k equal a collection of j, for every rule
// (so the budget curve can use prefixes of one collection).
func TestCollectPrefix(t *testing.T) {
	g, _ := tinyGrid(t)
	w, _ := g.Weights(map[string]float64{"berry": 1})
	r, _ := g.PlaceReward(w)
	env := mdp.NewSampler(g.MDP, 0)
	ag, err := transfer.Pretrain(mdp.NewSampler(g.MDP, 0), &transfer.PretrainConfig{Dim: 4, Skills: 8, Steps: 500, EpisodeSteps: 15, Seed: 2})
	if err != nil {
		t.Fatal(err)
	}
	for _, ex := range []transfer.Explore{transfer.ExploreSkills, transfer.ExploreUniform, transfer.ExploreGreedy} {
		cfg := transfer.AdaptConfig{Explore: ex, EpisodeSteps: 30, SwitchEvery: 10, Warmup: 40}
		long, err := transfer.Collect(env, ag, r, 150, &cfg, rand.New(rand.NewPCG(3, 2)))
		if err != nil {
			t.Fatal(err)
		}
		short, err := transfer.Collect(env, ag, r, 77, &cfg, rand.New(rand.NewPCG(3, 2)))
		if err != nil {
			t.Fatal(err)
		}
		if !reflect.DeepEqual(long[:77], short) {
			t.Errorf("rule %d: prefix of a longer collection differs", ex)
		}
	}
}

// TestResolveIdempotent checks that filling in the defaults twice gives
// the configuration of filling them in once, for the zero value, for the
// "off" settings (negative Relabel and Epsilon, GPIOff, RidgeFixed with
// lambda 0) and for explicit values.
func TestResolveIdempotent(t *testing.T) {
	_, f := tinyGrid(t)
	for _, c := range []transfer.PretrainConfig{
		{},
		{Relabel: -1, Epsilon: -0.5},
		{Relabel: -7, Epsilon: -1},
		{Method: transfer.Categorical, Skills: 6},
		{Method: transfer.Categorical, Skills: 6, Dim: 7},
		{Method: transfer.Given, Features: f},
		{Method: transfer.Random, Dim: 3, Skills: 5, Kappa: 2, Relabel: 2, Steps: 70, EpisodeSteps: 9, SkillGamma: 0.5,
			Epsilon: 0.3, Batch: 4, Replay: 99, StepSize: 0.7, DiscStepSize: 0.1, DiscOptim: skills.OptimSparseAdam, Seed: 4, ProgressEvery: 3},
	} {
		once, err := c.Resolve()
		if err != nil {
			t.Fatalf("%+v: %v", c, err)
		}
		twice, err := once.Resolve()
		if err != nil {
			t.Fatalf("%+v resolved again: %v", once, err)
		}
		if !reflect.DeepEqual(once, twice) {
			t.Errorf("pretrain config resolved once %+v, twice %+v", once, twice)
		}
	}
	for _, c := range []transfer.AdaptConfig{
		{},
		{GPI: transfer.GPIOff},
		{Ridge: transfer.RidgeFixed},
		{Ridge: transfer.RidgeFixed, Lambda: 0.5},
		{RidgeGrid: []float64{2, 1}},
		{Epsilon: -0.1, Explore: transfer.ExploreGreedy, Fit: transfer.FitModel},
		{Candidates: 3, FitSweeps: 10, Epsilon: 0.5, EpisodeSteps: 20, SwitchEvery: 5, Warmup: 7},
	} {
		once, err := c.Resolve()
		if err != nil {
			t.Fatalf("%+v: %v", c, err)
		}
		twice, err := once.Resolve()
		if err != nil {
			t.Fatalf("%+v resolved again: %v", once, err)
		}
		if !reflect.DeepEqual(once, twice) {
			t.Errorf("adapt config resolved once %+v, twice %+v", once, twice)
		}
	}
	if _, err := (&transfer.AdaptConfig{Candidates: -1}).Resolve(); !errors.Is(err, transfer.ErrConfig) {
		t.Errorf("negative candidates: %v, want ErrConfig (GPI is switched off by GPIOff)", err)
	}
	if _, err := (&transfer.AdaptConfig{Ridge: transfer.RidgeFixed, Lambda: -1}).Resolve(); !errors.Is(err, transfer.ErrConfig) {
		t.Errorf("negative lambda: %v, want ErrConfig", err)
	}
}

// resolvedJSON returns the JSON object of a resolved configuration.
func resolvedJSON(t *testing.T, c interface{ resolve() (any, error) }) map[string]any {
	t.Helper()
	v, err := c.resolve()
	if err != nil {
		t.Fatal(err)
	}
	b, err := json.Marshal(v)
	if err != nil {
		t.Fatal(err)
	}
	var m map[string]any
	if err := json.Unmarshal(b, &m); err != nil {
		t.Fatal(err)
	}
	return m
}

type pre transfer.PretrainConfig

func (c pre) resolve() (any, error) { return transfer.PretrainConfig(c).Resolve() }

type ada transfer.AdaptConfig

func (c ada) resolve() (any, error) { return transfer.AdaptConfig(c).Resolve() }

// TestConfigJSON checks the recorded form of resolved configurations:
// snake_case keys, enumerations as text, every default filled in, and "off"
// written differently from "default".
func TestConfigJSON(t *testing.T) {
	p := resolvedJSON(t, pre{})
	want := map[string]any{
		"method": "vmf", "skills": 32.0, "dim": 8.0, "kappa": 5.0, "relabel": 4.0, "steps": 100000.0,
		"episode_steps": 50.0, "skill_gamma": 0.95, "epsilon": 0.2, "batch": 16.0, "replay": 50000.0,
		"step_size": 0.2, "disc_step_size": 0.03, "disc_optim": "adam", "seed": 0.0, "progress_every": 1000.0,
	}
	if !reflect.DeepEqual(p, want) {
		t.Errorf("pretrain config json %v,\nwant %v", p, want)
	}
	a := resolvedJSON(t, ada{})
	wantA := map[string]any{
		"ridge": "cv", "lambda": 0.0, "ridge_grid": []any{1e-3, 1e-2, 0.1, 0.3, 1.0, 3.0, 10.0, 30.0, 100.0},
		"gpi": "on", "candidates": 8.0, "fit": "none", "fit_sweeps": 2000.0, "explore": "skills",
		"epsilon": 0.2, "episode_steps": 1000.0, "switch_every": 40.0, "warmup": 200.0,
	}
	if !reflect.DeepEqual(a, wantA) {
		t.Errorf("adapt config json %v,\nwant %v", a, wantA)
	}
	for _, tc := range []struct {
		name    string
		off, on interface{ resolve() (any, error) }
		key     string
	}{
		{"plain least squares", ada{Ridge: transfer.RidgeFixed}, ada{}, "ridge"},
		{"gpi off", ada{GPI: transfer.GPIOff}, ada{}, "gpi"},
		{"no random labelled actions", ada{Epsilon: -1}, ada{}, "epsilon"},
		{"no relabelling", pre{Relabel: -1}, pre{}, "relabel"},
		{"no random actions", pre{Epsilon: -1}, pre{}, "epsilon"},
	} {
		off, on := resolvedJSON(t, tc.off), resolvedJSON(t, tc.on)
		if reflect.DeepEqual(off[tc.key], on[tc.key]) {
			t.Errorf("%s: %q is %v both off and by default", tc.name, tc.key, off[tc.key])
		}
	}
	if b, _ := json.Marshal(&transfer.PretrainConfig{Method: transfer.Categorical}); !strings.Contains(string(b), `"method":"categorical"`) {
		t.Errorf("method not written as text: %s", b)
	}
	var back transfer.AdaptConfig
	if err := json.Unmarshal([]byte(`{"ridge":"fixed","gpi":"off","fit":"model","explore":"greedy"}`), &back); err != nil ||
		back.Ridge != transfer.RidgeFixed || back.GPI != transfer.GPIOff || back.Fit != transfer.FitModel || back.Explore != transfer.ExploreGreedy {
		t.Errorf("enumerations read back as %+v (%v)", back, err)
	}
}

// TestPretrainContext stops a pretraining run through its context from a
// progress report, checks that it stopped at an episode end with an error
// wrapping context.Canceled that names the step, and saved a checkpoint
// there; and that resuming that checkpoint (ResumeContext) to the full
// length equals the uninterrupted run bit for bit.
func TestPretrainContext(t *testing.T) {
	g, _ := tinyGrid(t)
	dir := t.TempDir()
	cfg := transfer.PretrainConfig{Dim: 4, Skills: 8, Steps: 800, EpisodeSteps: 15, Seed: 5, Replay: 500, ProgressEvery: 100}
	full, err := transfer.Pretrain(mdp.NewSampler(g.MDP, 0), &cfg)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	stopCfg := cfg
	stopCfg.CheckpointPath = filepath.Join(dir, "stopped")
	stopCfg.Progress = func(p transfer.Progress) {
		if p.Steps >= 300 {
			cancel()
		}
	}
	ag, err := transfer.PretrainContext(ctx, mdp.NewSampler(g.MDP, 0), &stopCfg)
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("got %v, want context.Canceled", err)
	}
	if ag == nil || ag.Steps() < 300 || ag.Steps() >= 800 {
		t.Fatalf("stopped agent %v", ag)
	}
	if want := fmt.Sprintf("stopped at step %d:", ag.Steps()); !strings.Contains(err.Error(), want) {
		t.Errorf("error %q does not say %q", err, want)
	}
	saved, err := transfer.Load(stopCfg.CheckpointPath)
	if err != nil {
		t.Fatal(err)
	}
	if saved.Steps() != ag.Steps() {
		t.Errorf("checkpoint at step %d, stopped at %d", saved.Steps(), ag.Steps())
	}
	resumed, err := transfer.ResumeContext(context.Background(), mdp.NewSampler(g.MDP, 0), stopCfg.CheckpointPath, &transfer.ResumeConfig{})
	if err != nil {
		t.Fatal(err)
	}
	a, b := filepath.Join(dir, "a"), filepath.Join(dir, "b")
	if err := full.Save(a); err != nil {
		t.Fatal(err)
	}
	if err := resumed.Save(b); err != nil {
		t.Fatal(err)
	}
	da, _ := os.ReadFile(a)
	db, _ := os.ReadFile(b)
	if string(da) != string(db) {
		t.Error("stopped and resumed run differs from the uninterrupted run")
	}
}
