package main

import (
	"fmt"
	"image/color"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/palette/moreland"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/plotutil"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"

	"github.com/successor-go/successor/experiment"
	"github.com/successor-go/successor/linalg"
	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/transfer"
)

// drawFigures writes the PNG figures and returns their file names.
func drawFigures(dir string, g *mdp.Grid, e *experiment.Experiment, res *experiment.Results, kept map[transfer.Method]*transfer.Agent) ([]string, error) {
	var files []string
	if err := drawReturns(filepath.Join(dir, "returns.png"), e, res); err != nil {
		return nil, err
	}
	files = append(files, "returns.png")
	if err := drawSuccessor(filepath.Join(dir, "successor.png"), g, e, kept); err != nil {
		return nil, err
	}
	files = append(files, "successor.png")
	for _, mc := range e.Methods {
		m := mc.Method
		ag := kept[m]
		if ag == nil {
			continue
		}
		name := fmt.Sprintf("skills-%s.png", m)
		if err := drawSkills(filepath.Join(dir, name), g, ag, e.Seeds[0]); err != nil {
			return nil, err
		}
		files = append(files, name)
	}
	return files, nil
}

// lineColors are ten distinguishable colours (Tableau 10), one per variant.
var lineColors = []color.Color{
	color.RGBA{31, 119, 180, 255}, color.RGBA{255, 127, 14, 255}, color.RGBA{44, 160, 44, 255},
	color.RGBA{214, 39, 40, 255}, color.RGBA{148, 103, 189, 255}, color.RGBA{140, 86, 75, 255},
	color.RGBA{227, 119, 194, 255}, color.RGBA{127, 127, 127, 255}, color.RGBA{188, 189, 34, 255},
	color.RGBA{23, 190, 207, 255},
}

// drawReturns plots the normalised return, averaged over jobs, against the
// labelled budget for every variant, with standard-error bars over seeds.
func drawReturns(path string, e *experiment.Experiment, res *experiment.Results) error {
	p := plot.New()
	p.Title.Text = "Depot jobs: normalised return vs labelled steps"
	p.X.Label.Text = "labelled transitions (log scale)"
	p.Y.Label.Text = "normalised return (0 random, 1 optimal)"
	p.X.Scale = plot.LogScale{}
	var ticks []plot.Tick
	for _, b := range e.Budgets {
		ticks = append(ticks, plot.Tick{Value: float64(b), Label: fmt.Sprint(b)})
	}
	p.X.Tick.Marker = plot.ConstantTicks(ticks)
	p.Add(plotter.NewGrid())
	leg := plot.New()
	leg.HideAxes()
	leg.Legend.Top = true
	leg.Legend.Left = true
	leg.Legend.TextStyle.Font.Size = vg.Points(10)
	for i, v := range res.Variants {
		pts := make(plotter.XYs, 0, len(e.Budgets))
		errs := make(plotter.YErrors, 0, len(e.Budgets))
		for _, b := range e.Budgets {
			s, ok := res.Lookup(v, "mean", b)
			if !ok {
				continue
			}
			pts = append(pts, plotter.XY{X: float64(b), Y: s.Mean})
			errs = append(errs, struct{ Low, High float64 }{s.StdErr, s.StdErr})
		}
		line, sc, err := plotter.NewLinePoints(pts)
		if err != nil {
			return err
		}
		// One colour per method (solid: USF + GPI, dashed: GPI off,
		// dotted: model fit), then one per baseline.
		info := res.VariantInfo[i]
		ci := len(e.Methods) + i - 3*len(e.Methods)
		if info.Method != "" {
			ci = i / 3
		}
		c := lineColors[ci%len(lineColors)]
		line.Color = c
		line.Width = vg.Points(1.5)
		switch {
		case info.Method != "" && info.Fit == transfer.FitModel:
			line.Dashes = []vg.Length{vg.Points(1), vg.Points(2)}
		case info.Method != "" && !info.GPI:
			line.Dashes = []vg.Length{vg.Points(4), vg.Points(2)}
		}
		sc.Color = c
		sc.Shape = plotutil.Shape(i)
		eb, err := plotter.NewYErrorBars(struct {
			plotter.XYer
			plotter.YErrorer
		}{pts, errs})
		if err != nil {
			return err
		}
		eb.Color = c
		p.Add(line, sc, eb)
		leg.Legend.Add(v, line, sc)
	}
	p.Y.Min = math.Min(p.Y.Min, -0.1)
	p.Y.Max = 1.05
	img := vgimg.New(25*vg.Centimeter, 13*vg.Centimeter)
	dc := draw.New(img)
	left := draw.Crop(dc, 0, -7*vg.Centimeter, 0, 0)
	right := draw.Crop(dc, 18.5*vg.Centimeter, 0, 0, 0)
	p.Draw(left)
	leg.Draw(right)
	return writePNG(path, img)
}

// layoutGrid is a heat-map grid over the depot layout; walls are NaN.
type layoutGrid struct {
	g *mdp.Grid
	v []float64 // per state
}

func (l layoutGrid) Dims() (c, r int) { return l.g.Cols, l.g.Rows }
func (l layoutGrid) X(c int) float64  { return float64(c) }
func (l layoutGrid) Y(r int) float64  { return float64(r) }
func (l layoutGrid) Z(c, r int) float64 {
	s, ok := l.g.StateAt(l.g.Rows-1-r, c)
	if !ok {
		return math.NaN()
	}
	return l.v[s]
}

// heat returns a plot of per-state values drawn over the layout, with the
// place codes written on their cells.
func heat(g *mdp.Grid, v []float64, title string) (*plot.Plot, error) {
	p := plot.New()
	p.Title.Text = title
	p.Title.TextStyle.Font.Size = vg.Points(9)
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, x := range v {
		if math.IsNaN(x) {
			return nil, fmt.Errorf("depot: %s: NaN value", title)
		}
		lo, hi = math.Min(lo, x), math.Max(hi, x)
	}
	if !(hi > lo) {
		hi = lo + 1
	}
	pal := moreland.ExtendedBlackBody()
	pal.SetMin(lo)
	pal.SetMax(hi)
	h := plotter.NewHeatMap(layoutGrid{g, v}, pal.Palette(255))
	h.Min, h.Max = lo, hi
	h.NaN = color.RGBA{R: 90, G: 110, B: 140, A: 255}
	p.Add(h)
	var xys plotter.XYs
	var labels []string
	for s := range g.NumStates() {
		code := g.Code(s)
		if code == '.' || code == mdp.CellFree {
			continue
		}
		r, c := g.Cell(s)
		xys = append(xys, plotter.XY{X: float64(c), Y: float64(g.Rows - 1 - r)})
		labels = append(labels, string(code))
	}
	if len(xys) > 0 {
		lb, err := plotter.NewLabels(plotter.XYLabels{XYs: xys, Labels: labels})
		if err != nil {
			return nil, err
		}
		for i := range lb.TextStyle {
			lb.TextStyle[i].Color = color.RGBA{R: 40, G: 200, B: 255, A: 255}
			lb.TextStyle[i].XAlign = draw.XCenter
			lb.TextStyle[i].YAlign = draw.YCenter
			lb.TextStyle[i].Font.Size = vg.Points(7)
		}
		p.Add(lb)
	}
	p.HideAxes()
	p.X.Min, p.X.Max = -0.5, float64(g.Cols)-0.5
	p.Y.Min, p.Y.Max = -0.5, float64(g.Rows)-0.5
	return p, nil
}

// saveTiles draws plots in a rows x cols arrangement into a PNG.
func saveTiles(path string, plots [][]*plot.Plot, w, h vg.Length) error {
	img := vgimg.New(w, h)
	dc := draw.New(img)
	t := draw.Tiles{Rows: len(plots), Cols: len(plots[0]), PadX: vg.Millimeter, PadY: vg.Millimeter,
		PadTop: vg.Millimeter, PadBottom: vg.Millimeter, PadLeft: vg.Millimeter, PadRight: vg.Millimeter}
	canvases := plot.Align(plots, t, dc)
	for r := range plots {
		for c, p := range plots[r] {
			if p != nil {
				p.Draw(canvases[r][c])
			}
		}
	}
	return writePNG(path, img)
}

// occupancy returns the discounted state occupancy from the start state
// start under policy pi: row start of M = (I - gamma P_pi)^-1, the
// successor representation (linalg.Successor).
func occupancy(m *mdp.Finite, pi mdp.Policy, gamma float64, start int) ([]float64, error) {
	p, err := m.ChainOf(pi)
	if err != nil {
		return nil, err
	}
	var sr mat.Dense
	if err := linalg.Successor(&sr, p, gamma); err != nil {
		return nil, err
	}
	return mat.Row(nil, start, &sr), nil
}

// drawSuccessor draws the successor representation of the start cell: under
// the uniform random policy (exact), and under the vMF (or first) agent's
// policy for the first job.
func drawSuccessor(path string, g *mdp.Grid, e *experiment.Experiment, kept map[transfer.Method]*transfer.Agent) error {
	start := slices.IndexFunc(g.MDP.Start(), func(p float64) bool { return p > 0 })
	r, c := g.Cell(start)
	gamma := e.TaskGamma
	sr, err := occupancy(g.MDP, mdp.Uniform{N: g.MDP.NumActions()}, gamma, start)
	if err != nil {
		return err
	}
	p1, err := heat(g, sr, fmt.Sprintf("SR of the start cell (%d,%d), uniform random policy", r, c))
	if err != nil {
		return err
	}
	row := []*plot.Plot{p1}
	var ag *transfer.Agent
	for _, mc := range e.Methods {
		if kept[mc.Method] != nil {
			ag = kept[mc.Method]
			break
		}
	}
	if ag != nil {
		job := e.Jobs[0]
		reward := func(s, a, next int) float64 {
			f := make([]float64, e.Places.Dim())
			e.Places.Features(f, s, a, next)
			var v float64
			for i := range f {
				v += f[i] * job.Weights[i]
			}
			return v
		}
		env := mdp.NewSampler(g.MDP, 100)
		budget := e.Budgets[len(e.Budgets)-1]
		lab, err := transfer.Collect(env, ag, reward, budget, &e.Adapt, experiment.CollectRand(e.Seeds[0], 0))
		if err != nil {
			return err
		}
		pol, err := transfer.Adapt(ag, lab, &e.Adapt)
		if err != nil {
			return err
		}
		sr2, err := occupancy(g.MDP, pol, gamma, start)
		if err != nil {
			return err
		}
		p2, err := heat(g, sr2, fmt.Sprintf("SR of the start cell, %s agent adapted to %q", ag.Method(), job.Name))
		if err != nil {
			return err
		}
		row = append(row, p2)
	}
	return saveTiles(path, [][]*plot.Plot{row}, vg.Length(len(row))*11*vg.Centimeter, 9*vg.Centimeter)
}

// drawSkills draws where skills go: the discounted occupancy from the start
// cell under the policy of each of 8 skills (greedy in psi(s,.,z).z).
func drawSkills(path string, g *mdp.Grid, ag *transfer.Agent, seed uint64) error {
	start := slices.IndexFunc(g.MDP.Start(), func(p float64) bool { return p > 0 })
	const rows, cols = 2, 4
	rng := rand.New(rand.NewPCG(seed, 99))
	ks := rng.Perm(ag.NumSkills())
	plots := make([][]*plot.Plot, rows)
	gamma := ag.Config().SkillGamma
	for i := range rows * cols {
		if i%cols == 0 {
			plots[i/cols] = make([]*plot.Plot, cols)
		}
		if i >= len(ks) {
			continue
		}
		k := ks[i]
		pol := make(mdp.Deterministic, g.NumStates())
		q := make([]float64, ag.NumActions())
		for s := range pol {
			ag.Q(q, s, ag.Skill(k), ag.Skill(k))
			best := 0
			for a := range q {
				if q[a] > q[best] {
					best = a
				}
			}
			pol[s] = best
		}
		occ, err := occupancy(g.MDP, pol, gamma, start)
		if err != nil {
			return err
		}
		for i, v := range occ {
			occ[i] = math.Sqrt(math.Max(v, 0)) // round-off can leave -1e-17
		}
		p, err := heat(g, occ, fmt.Sprintf("%s skill %d from S (sqrt occupancy)", ag.Method(), k))
		if err != nil {
			return err
		}
		plots[i/cols][i%cols] = p
	}
	return saveTiles(path, plots, 4*10*vg.Centimeter, 2*8*vg.Centimeter)
}

// writePNG encodes img as PNG into path.
func writePNG(path string, img *vgimg.Canvas) error {
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	if _, err := (vgimg.PngCanvas{Canvas: img}).WriteTo(f); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}
