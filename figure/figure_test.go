package figure_test

import (
	"bytes"
	"errors"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/successor-go/successor/experiment"
	"github.com/successor-go/successor/figure"
	"github.com/successor-go/successor/linalg"
	"github.com/successor-go/successor/mdp"
)

func depot(t *testing.T) *mdp.Grid {
	t.Helper()
	g, err := mdp.Depot()
	if err != nil {
		t.Fatal(err)
	}
	return g
}

// TestOccupancy compares Occupancy with the start row of the dense
// successor matrix M = (I - gamma P)^-1 (linalg.Successor, dense LU), and
// checks that the occupancy sums to 1/(1 - gamma) on an MDP without
// terminal states (derived by hand: at every step t the agent is in
// exactly one state, so the visits sum to sum_t gamma^t).
func TestOccupancy(t *testing.T) {
	g := depot(t)
	for _, gamma := range []float64{0.5, 0.95, 0.99} {
		pi := mdp.Uniform{N: g.MDP.NumActions()}
		occ, err := figure.Occupancy(nil, g.MDP, pi, gamma, nil)
		if err != nil {
			t.Fatal(err)
		}
		p, err := g.MDP.ChainOf(pi)
		if err != nil {
			t.Fatal(err)
		}
		var m mat.Dense
		if err := linalg.Successor(&m, p.ToDense(), gamma); err != nil {
			t.Fatal(err)
		}
		start := slices.IndexFunc(g.MDP.Start(), func(p float64) bool { return p > 0 })
		var sum float64
		for s, v := range occ {
			// Tolerance: two exact solves, 1e-12 relative to 1/(1-gamma).
			if math.Abs(v-m.At(start, s)) > 1e-12/(1-gamma) {
				t.Errorf("gamma %v, state %d: %v, dense %v", gamma, s, v, m.At(start, s))
			}
			sum += v
		}
		if math.Abs(sum-1/(1-gamma)) > 1e-10/(1-gamma) {
			t.Errorf("gamma %v: visits sum to %v, want %v", gamma, sum, 1/(1-gamma))
		}
	}
	if _, err := figure.Occupancy(make([]float64, 3), g.MDP, mdp.Uniform{N: 5}, 0.9, nil); !errors.Is(err, figure.ErrDimension) {
		t.Errorf("short dst: %v", err)
	}
}

// TestSpread checks the farthest-point choice on points derived by hand:
// on a line at 0, 1, 2, 10 the mean is 3.25, so 10 (distance 6.75) comes
// first, then 0 (distance 10 from it), then 2 is nearest-chosen distance
// 2 and 1 only 1, so 2, then 1.
func TestSpread(t *testing.T) {
	xs := [][]float64{{0}, {1}, {2}, {10}}
	if got := figure.Spread(xs, 3); !slices.Equal(got, []int{3, 0, 2}) {
		t.Errorf("Spread = %v, want [3 0 2]", got)
	}
	if got := figure.Spread(xs, 9); !slices.Equal(got, []int{3, 0, 2, 1}) {
		t.Errorf("Spread all = %v", got)
	}
	if got := figure.Spread(xs, 0); got != nil {
		t.Errorf("Spread 0 = %v", got)
	}
}

func TestMaps(t *testing.T) {
	g := depot(t)
	n := g.NumStates()
	ramp := make([]float64, n)
	for s := range ramp {
		ramp[s] = float64(s)
	}
	f, err := figure.Maps(g, []figure.Map{{Title: "ramp", Values: ramp}}, &figure.MapOptions{Label: "index", Caption: "State index."})
	if err != nil {
		t.Fatal(err)
	}
	if sc := f.Scales[0]; sc.Min != 0 || sc.Max != float64(n-1) || sc.Log {
		t.Errorf("linear scale %v", sc)
	}
	for _, want := range []string{"State index.", "linear scale from 0 to 104", "Grey cells are walls", "B bench", "S start", "D dock"} {
		if !strings.Contains(f.Caption, want) {
			t.Errorf("caption %q lacks %q", f.Caption, want)
		}
	}
	ramp[0] = 0
	f, err = figure.Maps(g, []figure.Map{{Values: ramp}}, &figure.MapOptions{Log: true})
	if err != nil {
		t.Fatal(err)
	}
	if sc := f.Scales[0]; sc.Min != 0.104 || sc.Max != 104 || !sc.Log {
		t.Errorf("log scale %v, want 0.104 .. 104", sc)
	}
	if !strings.Contains(f.Caption, "values at or below 0.104 (1 of the 105 cells drawn, zeros included) get the darkest colour") {
		t.Errorf("caption %q does not explain the floor", f.Caption)
	}
	for _, tc := range []struct {
		maps []figure.Map
		opt  *figure.MapOptions
		want error
	}{
		{nil, nil, figure.ErrConfig},
		{[]figure.Map{{Values: ramp[:3]}}, nil, figure.ErrDimension},
		{[]figure.Map{{Values: append(slices.Clone(ramp[:n-1]), math.NaN())}}, nil, figure.ErrNonFinite},
		{[]figure.Map{{Values: make([]float64, n)}}, &figure.MapOptions{Log: true}, figure.ErrConfig},
		{[]figure.Map{{Values: ramp}}, &figure.MapOptions{Log: true, Floor: -1}, figure.ErrConfig},
	} {
		if _, err := figure.Maps(g, tc.maps, tc.opt); !errors.Is(err, tc.want) {
			t.Errorf("got %v, want %v", err, tc.want)
		}
	}
}

// TestSave writes a figure as PNG and SVG: the PNG decodes at DPI with a
// white corner, the SVG is an SVG document; another extension is refused.
func TestSave(t *testing.T) {
	g := depot(t)
	f, err := figure.Successor(g, []figure.Named{{Name: "uniform", Policy: mdp.Uniform{N: g.MDP.NumActions()}}}, &figure.SuccessorOptions{Log: true})
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	if err := f.Save(filepath.Join(dir, "s.png")); err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile(filepath.Join(dir, "s.png"))
	if err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(bytes.NewReader(b))
	if err != nil {
		t.Fatal(err)
	}
	wantW := int(math.Round(f.Width.Points() / 72 * figure.DPI))
	if w := img.Bounds().Dx(); w < wantW-1 || w > wantW+1 {
		t.Errorf("png width %d px, want %d", w, wantW)
	}
	if r, gg, bb, _ := img.At(0, 0).RGBA(); r != 0xffff || gg != 0xffff || bb != 0xffff {
		t.Errorf("corner not white")
	}
	if err := f.Save(filepath.Join(dir, "s.svg")); err != nil {
		t.Fatal(err)
	}
	if b, err := os.ReadFile(filepath.Join(dir, "s.svg")); err != nil || !bytes.Contains(b, []byte("<svg")) {
		t.Errorf("svg: %v", err)
	}
	if err := f.Save(filepath.Join(dir, "s.gif")); !errors.Is(err, figure.ErrConfig) {
		t.Errorf("gif: %v", err)
	}
}

// returnsResults are hand-made results: two methods of two variants, a
// baseline and a reference variant, two budgets.
func returnsResults(n int) *experiment.Results {
	res := &experiment.Results{}
	add := func(name, method string) {
		res.Variants = append(res.Variants, name)
		res.VariantInfo = append(res.VariantInfo, experiment.VariantInfo{Name: name, Method: method})
		for i, b := range []int{10, 100} {
			for _, j := range []string{"a", "b", experiment.MeanJob} {
				res.Summary = append(res.Summary, experiment.Summary{Variant: name, Job: j, Budget: b, Mean: 0.3 * float64(i+1), StdErr: 0.05, N: n})
			}
		}
	}
	add("m1:usf+gpi", "m1")
	add("m1:usf-no-gpi", "m1")
	add("m2:usf+gpi", "m2")
	add("m2:usf-no-gpi", "m2")
	add("q-learning", "")
	add("still", "")
	return res
}

func TestReturns(t *testing.T) {
	f, err := figure.Returns(returnsResults(5), &figure.ReturnsOptions{Reference: "still"})
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{
		"of the mean over the 2 jobs", "One panel per pretraining method", "(q-learning) in grey in every panel",
		"Black dashed line: still", "means over 5 seeds", "+-1 standard error over seeds of the per-seed mean over the 2 jobs",
		"shifted sideways",
	} {
		if !strings.Contains(f.Caption, want) {
			t.Errorf("caption %q lacks %q", f.Caption, want)
		}
	}
	if len(f.Scales) != 0 {
		t.Errorf("line plot with colour scales %v", f.Scales)
	}
	var buf bytes.Buffer
	if err := f.Encode(&buf, "png"); err != nil {
		t.Fatal(err)
	}
	f, err = figure.Returns(returnsResults(1), &figure.ReturnsOptions{Job: "a"})
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(f.Caption, `of job "a"`) || !strings.Contains(f.Caption, "no error bars") {
		t.Errorf("one seed, one job: caption %q", f.Caption)
	}
	if _, err := figure.Returns(returnsResults(2), &figure.ReturnsOptions{Reference: "nothing"}); !errors.Is(err, figure.ErrConfig) {
		t.Errorf("unknown reference: %v", err)
	}
	if _, err := figure.Returns(returnsResults(2), &figure.ReturnsOptions{Job: "c"}); !errors.Is(err, figure.ErrConfig) {
		t.Errorf("unknown job: %v", err)
	}
}
