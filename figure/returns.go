package figure

import (
	"fmt"
	"image/color"
	"math"
	"slices"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"github.com/successor-go/successor/experiment"
)

// ReturnsOptions configures Returns. A nil *ReturnsOptions or the zero
// value means the mean over jobs, no reference line, two panels per row.
type ReturnsOptions struct {
	// Job is the job whose scores are drawn; "" means experiment.MeanJob
	// (the per-seed mean over jobs).
	Job string
	// Reference, if not empty, is the name of a variant drawn as a black
	// dashed reference line in every panel, without markers or bars (for
	// example a policy that does nothing). It must be one of the results'
	// variants.
	Reference string
	// Cols is the number of panels per row; 0 means 2.
	Cols int
}

// Colours of the variants of a method, in order: the Okabe-Ito palette
// for colour-blind readers (Okabe and Ito 2008, "Color Universal Design"):
// blue, vermillion, bluish green, reddish purple, orange, sky blue.
var seriesColors = []color.Color{
	color.RGBA{0x00, 0x72, 0xb2, 0xff}, color.RGBA{0xd5, 0x5e, 0x00, 0xff}, color.RGBA{0x00, 0x9e, 0x73, 0xff},
	color.RGBA{0xcc, 0x79, 0xa7, 0xff}, color.RGBA{0xe6, 0x9f, 0x00, 0xff}, color.RGBA{0x56, 0xb4, 0xe9, 0xff},
}

// Greys and dash patterns of the baselines shown in every panel.
var (
	sharedColors = []color.Color{color.RGBA{0x55, 0x55, 0x55, 0xff}, color.RGBA{0x99, 0x99, 0x99, 0xff}, color.RGBA{0x33, 0x33, 0x33, 0xff}}
	sharedDashes = [][]vg.Length{{vg.Points(4), vg.Points(2)}, {vg.Points(1), vg.Points(1.5)}, {vg.Points(6), vg.Points(2), vg.Points(1), vg.Points(2)}}
)

// series is one variant's curve.
type series struct {
	name, label string
	pts         plotter.XYs
	errs        plotter.YErrors
	color       color.Color
	dashes      []vg.Length
	shape       draw.GlyphDrawer
	reference   bool
}

// Returns draws the normalised return (0 = uniform random policy,
// 1 = optimal) against the labelled budget (log scale) for every variant
// of res: one panel per pretraining method (VariantInfo.Method) with its
// variants in colour, the variants without a method (the from-scratch
// baselines) in grey in every panel, and opt.Reference as a dashed
// reference line. Points are means over seeds and bars one standard
// error over seeds (of the per-seed mean over jobs for experiment.MeanJob);
// points at one budget are shifted sideways (dodged) so their bars do not
// overlap. The caption says all this. Every panel has the same axes.
//
// Errors wrap ErrConfig: no summaries for the job, or a Reference that is
// not a variant of res.
func Returns(res *experiment.Results, opt *ReturnsOptions) (*Figure, error) {
	var o ReturnsOptions
	if opt != nil {
		o = *opt
	}
	if o.Job == "" {
		o.Job = experiment.MeanJob
	}
	if o.Cols <= 0 {
		o.Cols = 2
	}
	if o.Reference != "" && !slices.Contains(res.Variants, o.Reference) {
		return nil, fmt.Errorf("figure: returns: reference %q is not a variant of the results: %w", o.Reference, ErrConfig)
	}
	info := map[string]experiment.VariantInfo{}
	for _, v := range res.VariantInfo {
		info[v.Name] = v
	}
	var budgets []int
	seeds := 0
	jobs := map[string]bool{}
	for _, s := range res.Summary {
		if s.Job != experiment.MeanJob {
			jobs[s.Job] = true
		}
		if s.Job == o.Job {
			if !slices.Contains(budgets, s.Budget) {
				budgets = append(budgets, s.Budget)
			}
			seeds = max(seeds, s.N)
		}
	}
	if len(budgets) == 0 {
		return nil, fmt.Errorf("figure: returns: no summaries for job %q: %w", o.Job, ErrConfig)
	}
	slices.Sort(budgets)

	curve := func(v string) series {
		s := series{name: v, label: v}
		for _, b := range budgets {
			if sm, ok := res.Lookup(v, o.Job, b); ok {
				s.pts = append(s.pts, plotter.XY{X: float64(b), Y: sm.Mean})
				se := sm.StdErr
				if sm.N < 2 {
					se = 0
				}
				s.errs = append(s.errs, struct{ Low, High float64 }{se, se})
			}
		}
		return s
	}
	// Panels: one per method; shared: the variants without a method.
	var methods []string
	var shared []series
	var ref *series
	for _, v := range res.Variants {
		m := info[v].Method
		switch {
		case v == o.Reference:
			s := curve(v)
			s.reference, s.color, s.dashes = true, color.Black, []vg.Length{vg.Points(5), vg.Points(3)}
			ref = &s
		case m == "":
			s := curve(v)
			j := len(shared)
			s.color, s.dashes = sharedColors[j%len(sharedColors)], sharedDashes[j%len(sharedDashes)]
			s.shape = shapes[(len(shapes)-1-j)%len(shapes)]
			shared = append(shared, s)
		case !slices.Contains(methods, m):
			methods = append(methods, m)
		}
	}
	type panel struct {
		title  string
		series []series
	}
	var panels []panel
	for _, m := range methods {
		p := panel{title: "pretrained: " + m}
		for _, v := range res.Variants {
			if info[v].Method != m || v == o.Reference {
				continue
			}
			s := curve(v)
			i := len(p.series)
			s.label = strings.TrimPrefix(strings.TrimPrefix(v, m), ":")
			s.color, s.shape = seriesColors[i%len(seriesColors)], shapes[i%len(shapes)]
			p.series = append(p.series, s)
		}
		p.series = append(p.series, shared...)
		panels = append(panels, p)
	}
	if len(panels) == 0 {
		// Only variants without a method: one panel, in colour.
		p := panel{title: "from scratch"}
		for i, s := range shared {
			s.color, s.dashes, s.shape = seriesColors[i%len(seriesColors)], nil, shapes[i%len(shapes)]
			p.series = append(p.series, s)
		}
		panels = append(panels, p)
		shared = nil
	}

	// One y range for all panels, covering 0, 1 and every bar.
	ylo, yhi := 0.0, 1.0
	for _, p := range panels {
		for _, s := range p.series {
			for i, pt := range s.pts {
				ylo = math.Min(ylo, pt.Y-s.errs[i].Low)
				yhi = math.Max(yhi, pt.Y+s.errs[i].High)
			}
		}
	}
	if ref != nil {
		for _, pt := range ref.pts {
			ylo, yhi = math.Min(ylo, pt.Y), math.Max(yhi, pt.Y)
		}
	}
	pad := 0.05 * (yhi - ylo)
	ylo, yhi = ylo-pad, yhi+pad
	// Dodge: series i of k at b * 10^(delta (i - (k-1)/2)), the k points
	// spread over at most a fifth of the narrowest budget gap (in decades)
	// and at most 0.06 decades (15%).
	gapDec := 1.0
	for i := 1; i < len(budgets); i++ {
		gapDec = math.Min(gapDec, math.Log10(float64(budgets[i])/float64(budgets[i-1])))
	}
	xlo, xhi := float64(budgets[0])/math.Pow(10, 0.12), float64(budgets[len(budgets)-1])*math.Pow(10, 0.12)
	var ticks []plot.Tick
	for _, b := range budgets {
		ticks = append(ticks, plot.Tick{Value: float64(b), Label: fmt.Sprint(b)})
	}

	plots := make([]*plot.Plot, len(panels))
	for pi, pn := range panels {
		p := plot.New()
		sans(p)
		p.Title.Text = pn.title
		p.Title.TextStyle.Font.Size = 10
		p.X.Label.TextStyle.Font.Size, p.Y.Label.TextStyle.Font.Size = 9, 9
		p.X.Tick.Label.Font.Size, p.Y.Tick.Label.Font.Size = 8, 8
		p.X.Label.Text = "labelled transitions (log scale)"
		p.Y.Label.Text = "normalised return"
		p.X.Scale = plot.LogScale{}
		p.X.Tick.Marker = plot.ConstantTicks(ticks)
		p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = xlo, xhi, ylo, yhi
		grid := plotter.NewGrid()
		grid.Vertical.Color = color.Gray{0xe8}
		grid.Horizontal.Color = color.Gray{0xe8}
		p.Add(grid)
		for _, y := range []float64{0, 1} {
			l, err := plotter.NewLine(plotter.XYs{{X: xlo, Y: y}, {X: xhi, Y: y}})
			if err != nil {
				return nil, fmt.Errorf("figure: returns: %w", err)
			}
			l.Color, l.Width = color.Gray{0xb0}, vg.Points(1)
			p.Add(l)
		}
		k := len(pn.series)
		delta := math.Min(0.06, 0.2*gapDec) / float64(max(k, 1))
		for i, s := range pn.series {
			shift := math.Pow(10, delta*(float64(i)-float64(k-1)/2))
			pts := make(plotter.XYs, len(s.pts))
			for j, pt := range s.pts {
				pts[j] = plotter.XY{X: pt.X * shift, Y: pt.Y}
			}
			if err := addSeries(p, s, pts); err != nil {
				return nil, err
			}
		}
		if ref != nil {
			if err := addSeries(p, *ref, ref.pts); err != nil {
				return nil, err
			}
		}
		plots[pi] = p
	}

	// Legend entries: the method variants by label (same colours in every
	// panel), then the shared ones and the reference.
	var legend []series
	for _, pn := range panels {
		for _, s := range pn.series {
			if !slices.ContainsFunc(legend, func(l series) bool { return l.label == s.label }) {
				legend = append(legend, s)
			}
		}
	}
	if ref != nil {
		legend = append(legend, *ref)
	}

	what := fmt.Sprintf("job %q", o.Job)
	barsOf := "over seeds"
	if o.Job == experiment.MeanJob {
		what = fmt.Sprintf("the mean over the %d jobs", len(jobs))
		barsOf = fmt.Sprintf("over seeds of the per-seed mean over the %d jobs", len(jobs))
	}
	var cap strings.Builder
	fmt.Fprintf(&cap, "Normalised return (0 = uniform random policy, 1 = optimal; thin grey lines) of %s against the number of reward-labelled transitions (log scale).", what)
	if len(methods) > 0 {
		cap.WriteString(" One panel per pretraining method, its variants in colour")
		if len(shared) > 0 {
			var names []string
			for _, s := range shared {
				names = append(names, s.name)
			}
			fmt.Fprintf(&cap, "; the from-scratch variants (%s) in grey in every panel", strings.Join(names, ", "))
		}
		cap.WriteString(".")
	}
	if ref != nil {
		fmt.Fprintf(&cap, " Black dashed line: %s, a reference.", ref.name)
	}
	if seeds < 2 {
		cap.WriteString(" Points are the scores of one seed (no error bars: one seed has no standard error).")
	} else {
		fmt.Fprintf(&cap, " Points are means over %d seeds; bars are +-1 standard error %s.", seeds, barsOf)
	}
	if seeds < 2 {
		cap.WriteString(" Points at one budget are shifted sideways so they do not hide each other.")
	} else {
		cap.WriteString(" Points at one budget are shifted sideways so their bars do not overlap.")
	}
	caption := cap.String()

	// Layout: panels in a grid, legend on the right, caption below.
	cols := min(o.Cols, len(plots))
	rows := (len(plots) + cols - 1) / cols
	pw, ph := 9*vg.Centimeter, 6.5*vg.Centimeter
	legSty := style(8.5, color.Black)
	var legW vg.Length
	for _, s := range legend {
		legW = max(legW, legSty.Width(s.label))
	}
	legW += 12 * vg.Millimeter
	width := 2*margin + vg.Length(cols)*pw + legW
	capSty := style(captionSize, color.Black)
	lines := wrap(caption, capSty, width-2*margin)
	capH := captionHeight(lines, capSty)
	rowGap := 4 * vg.Millimeter
	height := 2*margin + vg.Length(rows)*ph + vg.Length(rows-1)*rowGap + 2*vg.Millimeter + capH

	drawFn := func(c draw.Canvas) {
		top := height - margin
		for i, p := range plots {
			r, k := i/cols, i%cols
			x0 := margin + vg.Length(k)*pw
			y1 := top - vg.Length(r)*(ph+rowGap)
			sub := draw.Canvas{Canvas: c.Canvas, Rectangle: vg.Rectangle{Min: vg.Point{X: x0, Y: y1 - ph}, Max: vg.Point{X: x0 + pw - 2*vg.Millimeter, Y: y1}}}
			p.Draw(sub)
		}
		// Legend.
		lx := margin + vg.Length(cols)*pw
		ly := top - 8*vg.Millimeter
		hdr := style(8.5, color.Black)
		hdr.YAlign = draw.YCenter
		c.FillText(hdr, vg.Point{X: lx, Y: ly}, "variant")
		ls := legSty
		ls.YAlign = draw.YCenter
		for i, s := range legend {
			y := ly - vg.Length(i+1)*lineHeight(legSty)*1.3
			line := draw.LineStyle{Color: s.color, Width: vg.Points(1.5), Dashes: s.dashes}
			c.StrokeLine2(line, lx, y, lx+8*vg.Millimeter, y)
			if s.shape != nil {
				c.DrawGlyph(draw.GlyphStyle{Color: s.color, Radius: vg.Points(2.5), Shape: s.shape}, vg.Point{X: lx + 4*vg.Millimeter, Y: y})
			}
			c.FillText(ls, vg.Point{X: lx + 10*vg.Millimeter, Y: y}, s.label)
		}
		drawLines(c, lines, capSty, margin, margin+capH)
	}
	return &Figure{Caption: caption, Width: width, Height: height, draw: drawFn}, nil
}

// shapes are the markers of the series, in order.
var shapes = []draw.GlyphDrawer{draw.CircleGlyph{}, draw.SquareGlyph{}, draw.TriangleGlyph{}, draw.RingGlyph{}, draw.BoxGlyph{}, draw.PyramidGlyph{}, draw.CrossGlyph{}, draw.PlusGlyph{}}

// addSeries adds a series' line, markers and error bars at pts.
func addSeries(p *plot.Plot, s series, pts plotter.XYs) error {
	if len(pts) == 0 {
		return nil
	}
	l, err := plotter.NewLine(pts)
	if err != nil {
		return fmt.Errorf("figure: returns: %s: %w", s.name, err)
	}
	l.Color, l.Width, l.Dashes = s.color, vg.Points(1.5), s.dashes
	p.Add(l)
	if s.reference {
		return nil
	}
	sc, err := plotter.NewScatter(pts)
	if err != nil {
		return fmt.Errorf("figure: returns: %s: %w", s.name, err)
	}
	sc.Color, sc.Shape, sc.Radius = s.color, s.shape, vg.Points(2.5)
	eb, err := plotter.NewYErrorBars(struct {
		plotter.XYer
		plotter.YErrorer
	}{pts, s.errs})
	if err != nil {
		return fmt.Errorf("figure: returns: %s: %w", s.name, err)
	}
	eb.LineStyle.Color, eb.LineStyle.Width, eb.CapWidth = s.color, vg.Points(1), vg.Points(4)
	p.Add(eb, sc)
	return nil
}
