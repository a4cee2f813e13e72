package experiment

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"runtime"
	"strconv"

	"github.com/successor-go/successor"
	"github.com/successor-go/successor/internal/fileio"
	"github.com/successor-go/successor/transfer"
)

// Variant names. A pretrained method m is scored in three variants, named
// m + one of the suffixes: SuffixGPI (the pure successor-feature method:
// GPI over the universal SFs at the skills nearest w), SuffixNoGPI (greedy
// on the single nearest skill's psi . w) and SuffixModelFit (GPI with the
// model-based Q(., ., w) of transfer.FitModel added to the candidates).
// The baselines are named VariantQLearning and VariantSFQLearning.
const (
	VariantQLearning   = "q-learning"
	VariantSFQLearning = "sf-q-learning"
	SuffixGPI          = ":usf+gpi"
	SuffixNoGPI        = ":usf-no-gpi"
	SuffixModelFit     = ":model-fit+gpi"
)

// VariantInfo states what a variant of the results is.
type VariantInfo struct {
	Name string `json:"name"`
	// Method is the pretraining method; empty for the baselines.
	Method string `json:"method,omitempty"`
	// GPI reports whether the policy takes GPI over several candidates,
	// and Fit whether the model-based candidate is among them.
	GPI         bool             `json:"gpi"`
	Fit         transfer.FitMode `json:"fit"`
	Description string           `json:"description"`
}

// methodVariants returns the three variants of method m under the
// resolved adaptation settings a. The variant SuffixGPI acts as a says
// (GPI unless a.GPI is GPIOff), SuffixNoGPI with GPI off, SuffixModelFit
// as a says with the model-based candidate.
func methodVariants(m transfer.Method, a transfer.AdaptConfig) []VariantInfo {
	gpi := a.GPI == transfer.GPIOn
	n := a.Candidates
	return []VariantInfo{
		{Name: m.String() + SuffixGPI, Method: m.String(), GPI: gpi, Fit: transfer.FitNone,
			Description: fmt.Sprintf("successor-feature transfer: GPI over psi(s, a, z) . w for the %d skills z nearest the inferred w (cosine)", n)},
		{Name: m.String() + SuffixNoGPI, Method: m.String(), GPI: false, Fit: transfer.FitNone,
			Description: "successor-feature transfer without GPI: greedy in psi(s, a, z) . w for the single skill z nearest the inferred w"},
		{Name: m.String() + SuffixModelFit, Method: m.String(), GPI: gpi, Fit: transfer.FitModel,
			Description: fmt.Sprintf("model-based evaluation of the inferred task on the empirical model of the reward-free data (value iteration on the counts of every reward-free transition), GPI with the %d nearest skills' psi . w", n)},
	}
}

var baselineVariants = []VariantInfo{
	{Name: VariantQLearning, Description: "tabular Q-learning from scratch on the labelled budget"},
	{Name: VariantSFQLearning, Description: "SF Q-learning from scratch with the given place features on the labelled budget"},
}

// Record is one scored policy.
type Record struct {
	Variant    string  `json:"variant"`
	Job        string  `json:"job"`
	Budget     int     `json:"budget"`
	Seed       uint64  `json:"seed"`
	Normalised float64 `json:"normalised"`
	Value      float64 `json:"value"`
	// RSquared and Residual are the task-inference fit (pretrained
	// variants only; 0 for the baselines).
	RSquared float64 `json:"r_squared"`
	Residual float64 `json:"residual"`
	// Rewarded is the number of labelled transitions with a non-zero
	// reward (pretrained variants only).
	Rewarded int `json:"rewarded"`
	// Lambda is the ridge penalty of the task inference.
	Lambda float64 `json:"lambda"`
}

// Summary is the mean and standard error over seeds of one (variant, job,
// budget); Job "mean" averages the per-seed job means.
type Summary struct {
	Variant  string  `json:"variant"`
	Job      string  `json:"job"`
	Budget   int     `json:"budget"`
	Mean     float64 `json:"mean"`
	StdErr   float64 `json:"std_err"`
	RSquared float64 `json:"r_squared"`
	N        int     `json:"n"`
}

// PretrainStats summarises the pretraining of one method over the seeds.
type PretrainStats struct {
	Method transfer.Method `json:"method"`
	// Seconds is the mean wall-clock time per run and StepsPerSecond the
	// mean throughput (these depend on the machine, unlike every other
	// figure). Both cover only the work done in the process that ran the
	// experiment: a run resumed from a checkpoint counts the time and the
	// steps it ran then, and runs that took no pretraining step then (read
	// back finished) are left out of StepsPerSecond, which is 0 if no run
	// took any.
	Seconds        float64 `json:"seconds"`
	StepsPerSecond float64 `json:"steps_per_second"`
	Steps          int     `json:"steps"`
	// FinalMI is the mean over seeds of the last reported MI estimate (VMF
	// and Categorical).
	FinalMI float64 `json:"final_mi"`
}

// Results is everything an experiment measured.
type Results struct {
	Records  []Record        `json:"records"`
	Summary  []Summary       `json:"summary"`
	Pretrain []PretrainStats `json:"pretrain"`
	// Variants lists the variants in table order, and VariantInfo says
	// what each is.
	Variants    []string      `json:"variants"`
	VariantInfo []VariantInfo `json:"variant_info"`
	// Resumed lists the runs that continued from Experiment.CheckpointDir,
	// in unit order (in the results file only when not empty: the figures
	// do not depend on it).
	Resumed []ResumedRun `json:"resumed,omitempty"`
}

// Lookup returns the summary of (variant, job, budget).
func (r *Results) Lookup(variant, job string, budget int) (Summary, bool) {
	for _, s := range r.Summary {
		if s.Variant == variant && s.Job == job && s.Budget == budget {
			return s, true
		}
	}
	return Summary{}, false
}

// Report is the content of results.json: the library and Go versions, the
// seeds, the resolved configuration and every figure.
type Report struct {
	Library string      `json:"library_version"`
	Go      string      `json:"go_version"`
	Seeds   []uint64    `json:"seeds"`
	Config  *Experiment `json:"config"`
	Results *Results    `json:"results"`
	// Notes carries free-form remarks of the program that ran the
	// experiment (for example what is invented data).
	Notes []string `json:"notes,omitempty"`
}

// NewReport returns the report of an experiment and its results, stamped
// with successor.Version and runtime.Version(). The configuration is the
// resolved experiment (Experiment.Resolve), so the file states the values
// that ran; an experiment that does not resolve is an error wrapping
// ErrConfig.
func NewReport(e *Experiment, r *Results, notes ...string) (*Report, error) {
	c, err := e.Resolve()
	if err != nil {
		return nil, err
	}
	return &Report{Library: successor.Version, Go: runtime.Version(), Seeds: c.Seeds, Config: c, Results: r, Notes: notes}, nil
}

// WriteJSON writes the report as indented JSON to path atomically.
func (rep *Report) WriteJSON(path string) error {
	b, err := json.MarshalIndent(rep, "", "  ")
	if err != nil {
		return fmt.Errorf("experiment: results json: %w", err)
	}
	if err := fileio.WriteAtomic(path, append(b, '\n'), 0o644); err != nil {
		return fmt.Errorf("experiment: results json: %w", err)
	}
	return nil
}

// WriteCSV writes one line per scored policy to path atomically, with the
// columns variant, job, budget, seed, normalised (the normalised return),
// value, r_squared and residual (of the task inference), rewarded (the
// number of labelled transitions with a non-zero reward) and lambda (the
// ridge penalty of the task inference), after a header line of these
// names.
func (rep *Report) WriteCSV(path string) error {
	var buf bytes.Buffer
	w := csv.NewWriter(&buf)
	w.Write([]string{"variant", "job", "budget", "seed", "normalised", "value", "r_squared", "residual", "rewarded", "lambda"})
	f := func(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }
	for _, r := range rep.Results.Records {
		w.Write([]string{r.Variant, r.Job, strconv.Itoa(r.Budget), strconv.FormatUint(r.Seed, 10),
			f(r.Normalised), f(r.Value), f(r.RSquared), f(r.Residual), strconv.Itoa(r.Rewarded), f(r.Lambda)})
	}
	w.Flush()
	if err := w.Error(); err != nil {
		return fmt.Errorf("experiment: results csv: %w", err)
	}
	if err := fileio.WriteAtomic(path, buf.Bytes(), 0o644); err != nil {
		return fmt.Errorf("experiment: results csv: %w", err)
	}
	return nil
}
