package transfer

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"runtime"
	"strconv"

	"github.com/successor-go/successor"
	"github.com/successor-go/successor/internal/fileio"
)

// Report is the content of results.json: the library and Go versions, the
// seeds, the full configuration and every figure.
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
// with successor.Version and runtime.Version().
//
// The configuration is written with every default applied, so the file
// states the values that ran.
func NewReport(e *Experiment, r *Results, notes ...string) *Report {
	c := *e
	c.Pretrain.Features = e.Places
	if p, err := c.Pretrain.withDefaults(); err == nil {
		c.Pretrain = p
	}
	c.Pretrain.Method = 0 // set per run from Methods
	if a, err := c.Adapt.withDefaults(); err == nil {
		c.Adapt = a
	}
	if b, err := c.Baseline.withDefaults(); err == nil {
		c.Baseline = b
	}
	c.Gamma = e.gamma()
	c.Baseline.Gamma = c.Gamma
	return &Report{Library: successor.Version, Go: runtime.Version(), Seeds: e.Seeds, Config: &c, Results: r, Notes: notes}
}

// WriteJSON writes the report as indented JSON to path atomically.
func (rep *Report) WriteJSON(path string) error {
	b, err := json.MarshalIndent(rep, "", "  ")
	if err != nil {
		return fmt.Errorf("transfer: results json: %w", err)
	}
	if err := fileio.WriteAtomic(path, append(b, '\n'), 0o644); err != nil {
		return fmt.Errorf("transfer: results json: %w", err)
	}
	return nil
}

// WriteCSV writes one line per scored policy (variant, job, budget, seed,
// normalised return, value, R^2 and residual of the task inference, and
// the number of labelled transitions with a non-zero reward) to path
// atomically.
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
		return fmt.Errorf("transfer: results csv: %w", err)
	}
	if err := fileio.WriteAtomic(path, buf.Bytes(), 0o644); err != nil {
		return fmt.Errorf("transfer: results csv: %w", err)
	}
	return nil
}
