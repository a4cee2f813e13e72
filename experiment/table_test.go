package experiment_test

import (
	"bytes"
	"errors"
	"math"
	"strings"
	"testing"

	"github.com/successor-go/successor/experiment"
)

func TestFormatFloat(t *testing.T) {
	for _, tc := range []struct {
		v      float64
		digits int
		want   string
	}{
		{0, 2, "0.00"},
		{math.Copysign(0, -1), 2, "0.00"},
		{-0.004, 2, "0.00"},
		{-0.005, 2, "-0.01"}, // -0.005 is stored as -0.005000000000000000104 (derived by hand: nearest float64), which rounds away from zero
		{-0.0049, 1, "0.0"},
		{-1.5, 0, "-2"},
		{0.125, 2, "0.12"}, // exact binary tie rounds to even (strconv, IEEE 754 round-half-even)
		{math.Inf(-1), 2, "-Inf"},
		{math.NaN(), 2, "NaN"},
	} {
		if got := experiment.FormatFloat(tc.v, tc.digits); got != tc.want {
			t.Errorf("FormatFloat(%v, %d) = %q, want %q", tc.v, tc.digits, got, tc.want)
		}
	}
}

// tableResults are hand-made results: two jobs, a pretrained variant and
// a baseline, the baseline without a summary for job "b".
func tableResults(n int) *experiment.Results {
	return &experiment.Results{
		Variants: []string{"vmf:usf+gpi", "q-learning"},
		VariantInfo: []experiment.VariantInfo{
			{Name: "vmf:usf+gpi", Method: "vmf"}, {Name: "q-learning"},
		},
		Summary: []experiment.Summary{
			{Variant: "vmf:usf+gpi", Job: "a", Budget: 10, Mean: 0.1, StdErr: 0.01, N: n},
			{Variant: "vmf:usf+gpi", Job: "a", Budget: 100, Mean: 0.5, StdErr: 0.25, RSquared: 0.9, N: n},
			{Variant: "vmf:usf+gpi", Job: "b", Budget: 100, Mean: -0.001, StdErr: 0.004, RSquared: 0.5, N: n},
			{Variant: "vmf:usf+gpi", Job: "mean", Budget: 100, Mean: 0.2495, StdErr: 0.1, RSquared: -0.0001, N: n},
			{Variant: "q-learning", Job: "a", Budget: 100, Mean: 1, StdErr: 0, N: n},
			{Variant: "q-learning", Job: "mean", Budget: 100, Mean: 1, N: n},
		},
	}
}

// TestWriteTable checks the table against hand-written expected text
// (derived by hand from tableResults): the largest budget by default, "-"
// for a missing cell and for a baseline's R^2, "n/a" standard errors with
// one seed, no "-0.00".
func TestWriteTable(t *testing.T) {
	for _, tc := range []struct {
		n    int
		opt  *experiment.TableOptions
		want string
	}{
		{2, nil, `Normalised return after 100 labelled steps (0 = uniform random policy, 1 = optimal; mean +- standard error over 2 seeds; column "mean": the per-seed mean over jobs)

      variant             a             b          mean  inference R^2
  vmf:usf+gpi  0.50 +- 0.25  0.00 +- 0.00  0.25 +- 0.10           0.00
   q-learning  1.00 +- 0.00             -  1.00 +- 0.00              -
`},
		{1, &experiment.TableOptions{Digits: 3}, `Normalised return after 100 labelled steps (0 = uniform random policy, 1 = optimal; one seed, so no standard error)

      variant             a              b          mean  inference R^2
  vmf:usf+gpi  0.500 +- n/a  -0.001 +- n/a  0.249 +- n/a          0.000
   q-learning  1.000 +- n/a              -  1.000 +- n/a              -
`},
		{3, &experiment.TableOptions{Budget: 10, Variants: []string{"vmf:usf+gpi"}}, `Normalised return after 10 labelled steps (0 = uniform random policy, 1 = optimal; mean +- standard error over 3 seeds; column "mean": the per-seed mean over jobs)

      variant             a  b  mean  inference R^2
  vmf:usf+gpi  0.10 +- 0.01  -     -              -
`},
	} {
		var buf bytes.Buffer
		if err := experiment.WriteTable(&buf, tableResults(tc.n), tc.opt); err != nil {
			t.Fatal(err)
		}
		// tabwriter pads every cell on the left by 2 and ends lines with
		// blanks; compare without the trailing ones.
		var lines []string
		for l := range strings.SplitSeq(buf.String(), "\n") {
			lines = append(lines, strings.TrimRight(l, " "))
		}
		if got := strings.Join(lines, "\n"); got != tc.want {
			t.Errorf("n=%d %+v:\n%s\nwant\n%s", tc.n, tc.opt, got, tc.want)
		}
	}
	if err := experiment.WriteTable(&bytes.Buffer{}, tableResults(2), &experiment.TableOptions{Budget: 7}); !errors.Is(err, experiment.ErrConfig) {
		t.Errorf("missing budget: got %v, want ErrConfig", err)
	}
	if err := experiment.WriteTable(failWriter{}, tableResults(2), nil); err == nil {
		t.Error("writer error not returned")
	}
}

type failWriter struct{}

func (failWriter) Write([]byte) (int, error) { return 0, errors.New("disk full") }
