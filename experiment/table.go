package experiment

import (
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"
	"text/tabwriter"
)

// MeanJob is the job name of the summaries that average over the jobs
// (the per-seed mean over jobs, then mean and standard error over seeds).
const MeanJob = "mean"

// TableOptions configures WriteTable. A nil *TableOptions or the zero
// value means: the largest budget of the results, every variant in
// results order, two decimals.
type TableOptions struct {
	// Budget is the labelled budget whose scores the table shows; 0 means
	// the largest budget in the results.
	Budget int
	// Variants are the rows, in order; nil means Results.Variants.
	Variants []string
	// Digits is the number of decimals of every figure; 0 means 2.
	Digits int
}

// tableColumns are the columns after the jobs and their mean, read from
// the summary of a row's variant at job MeanJob. A new per-variant figure
// of Summary needs one line here.
var tableColumns = []struct {
	head  string
	value func(s Summary, v VariantInfo, digits int) string
}{
	{"inference R^2", func(s Summary, v VariantInfo, d int) string {
		if v.Method == "" { // baselines infer no task
			return "-"
		}
		return FormatFloat(s.RSquared, d)
	}},
}

// WriteTable writes the variant x job table of the normalised return
// (0 = uniform random policy, 1 = optimal) at one budget to w: a heading
// that says what the cells are, then one row per variant with the mean
// +- standard error over seeds for every job, their mean over jobs (job
// MeanJob) and the columns of tableColumns (the task-inference R^2). The
// jobs are those of the summaries, in order. A standard error over one
// seed reads "n/a"; a cell without a summary reads "-"; no figure prints
// as a negative zero. It returns an error wrapping ErrConfig if the
// results have no summary at the budget, or w's error.
func WriteTable(w io.Writer, res *Results, opt *TableOptions) error {
	var o TableOptions
	if opt != nil {
		o = *opt
	}
	if o.Digits <= 0 {
		o.Digits = 2
	}
	var jobs []string
	var budgets []int
	for _, s := range res.Summary {
		if s.Job != MeanJob && !slices.Contains(jobs, s.Job) {
			jobs = append(jobs, s.Job)
		}
		if !slices.Contains(budgets, s.Budget) {
			budgets = append(budgets, s.Budget)
		}
	}
	if o.Budget == 0 && len(budgets) > 0 {
		o.Budget = slices.Max(budgets)
	}
	if !slices.Contains(budgets, o.Budget) {
		return fmt.Errorf("experiment: table: no results at budget %d: %w", o.Budget, ErrConfig)
	}
	if o.Variants == nil {
		o.Variants = res.Variants
	}
	info := map[string]VariantInfo{}
	for _, v := range res.VariantInfo {
		info[v.Name] = v
	}
	seeds := 0
	for _, s := range res.Summary {
		if s.Budget == o.Budget {
			seeds = max(seeds, s.N)
		}
	}
	ew := &errWriter{w: w}
	fmt.Fprintf(ew, "Normalised return after %d labelled steps (0 = uniform random policy, 1 = optimal; ", o.Budget)
	if seeds == 1 {
		fmt.Fprint(ew, "one seed, so no standard error)\n\n")
	} else {
		fmt.Fprintf(ew, "mean +- standard error over %d seeds; column %q: the per-seed mean over jobs)\n\n", seeds, MeanJob)
	}
	tw := tabwriter.NewWriter(ew, 0, 0, 2, ' ', tabwriter.AlignRight)
	head := append([]string{"variant"}, jobs...)
	head = append(head, MeanJob)
	for _, c := range tableColumns {
		head = append(head, c.head)
	}
	fmt.Fprintln(tw, strings.Join(head, "\t")+"\t")
	for _, v := range o.Variants {
		row := []string{v}
		for _, j := range append(slices.Clone(jobs), MeanJob) {
			s, ok := res.Lookup(v, j, o.Budget)
			row = append(row, cell(s, ok, o.Digits))
		}
		s, ok := res.Lookup(v, MeanJob, o.Budget)
		for _, c := range tableColumns {
			if !ok {
				row = append(row, "-")
				continue
			}
			row = append(row, c.value(s, info[v], o.Digits))
		}
		fmt.Fprintln(tw, strings.Join(row, "\t")+"\t")
	}
	tw.Flush()
	return ew.err
}

// cell formats a summary as "mean +- s.e.".
func cell(s Summary, ok bool, digits int) string {
	if !ok {
		return "-"
	}
	se := "n/a"
	if s.N > 1 {
		se = FormatFloat(s.StdErr, digits)
	}
	return FormatFloat(s.Mean, digits) + " +- " + se
}

// FormatFloat formats v with the given number of decimals, never as a
// negative zero: a value that rounds to zero prints without a sign
// ("0.00", not "-0.00").
func FormatFloat(v float64, digits int) string {
	s := strconv.FormatFloat(v, 'f', digits, 64)
	if strings.HasPrefix(s, "-") && strings.Trim(s, "-0.") == "" && !math.IsInf(v, 0) {
		return s[1:]
	}
	return s
}

// errWriter keeps the first error of w.
type errWriter struct {
	w   io.Writer
	err error
}

func (e *errWriter) Write(p []byte) (int, error) {
	if e.err != nil {
		return 0, e.err
	}
	n, err := e.w.Write(p)
	e.err = err
	return n, err
}
