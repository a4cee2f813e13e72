package experiment

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"path/filepath"
	"runtime"
	"time"

	"github.com/successor-go/successor"
)

// origin names the build that writes a run record: library version, Go
// version, operating system and architecture. Go may fuse a multiply and
// an add into one instruction on some architectures (the language
// specification allows it), so only records of one origin are certain to
// merge into the figures of a single run.
func origin() string {
	return fmt.Sprintf("successor %s %s %s/%s", successor.Version, runtime.Version(), runtime.GOOS, runtime.GOARCH)
}

// baselineFile returns the record file name of the baselines of seed.
func baselineFile(seed uint64) string {
	return fmt.Sprintf("baselines-seed%d.run", seed)
}

// baselineKey returns the SHA-256 (hex) of everything the baselines'
// figures depend on besides the seed and the MDP's transition
// probabilities: the recorded (JSON) form of the resolved experiment
// without its methods and seeds, the task MDP's sizes and the place
// features at every state. Being the whole recorded experiment, it covers
// every setting a later version adds to it. r is resolved.
func (r *Experiment) baselineKey() string {
	c := *r
	c.Methods, c.Seeds = nil, nil
	n := r.Task.NumStates()
	places := make([]float64, 0, n*r.Places.Dim())
	row := make([]float64, r.Places.Dim())
	for s := range n {
		r.Places.Features(row, s, 0, s)
		places = append(places, row...)
	}
	b, err := json.Marshal(struct {
		Experiment *Experiment `json:"experiment"`
		States     int         `json:"states"`
		Actions    int         `json:"actions"`
		Places     []float64   `json:"places"`
	}{&c, n, r.Task.NumActions(), places})
	if err != nil {
		panic("experiment: baseline key: " + err.Error()) // a resolved experiment marshals
	}
	h := sha256.Sum256(b)
	return hex.EncodeToString(h[:])
}

// baselineUnit runs the baselines of seed. With a CheckpointDir their rows
// are kept in the record baselines-seed<s>.run: a record of this
// configuration is taken as it is, one of another configuration is an
// error wrapping ErrCheckpoint, and a missing one is written once the rows
// are computed. r is resolved.
func (r *Experiment) baselineUnit(seed uint64, sc *scoring) ([]Record, error) {
	if r.CheckpointDir == "" {
		return r.runBaselines(seed, sc.rewards, sc.refs)
	}
	t0 := time.Now()
	path := filepath.Join(r.CheckpointDir, baselineFile(seed))
	key := r.baselineKey()
	rec, err := loadRunRecord(path)
	if err != nil {
		return nil, err
	}
	if rec != nil {
		if rec.Key != key || !rec.Baselines || rec.Seed != seed {
			return nil, fmt.Errorf("experiment: run record %s belongs to another configuration (use another checkpoint folder): %w", path, ErrCheckpoint)
		}
		if rec.Records != nil {
			return rec.Records, nil
		}
	}
	recs, err := r.runBaselines(seed, sc.rewards, sc.refs)
	if err != nil {
		return nil, err
	}
	if err := saveRunRecord(path, &runRecord{Key: key, Baselines: true, Seed: seed,
		Seconds: time.Since(t0).Seconds(), Origin: origin(), Records: recs}); err != nil {
		return nil, err
	}
	return recs, nil
}
