package figure

import (
	"fmt"
	"image/color"
	"math"
	"slices"
	"strconv"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"github.com/successor-go/successor/mdp"
)

// Map is one panel of a map figure: a value for every state of a grid.
type Map struct {
	// Title is drawn above the panel.
	Title string
	// Values has one value per state (len g.NumStates()).
	Values []float64
}

// MapOptions configures Maps. A nil *MapOptions or the zero value means a
// linear colour scale over the range of all the values, up to four panels
// per row, no caption text of the caller.
type MapOptions struct {
	// Log colours by log10 of the value, from Floor to the largest value.
	Log bool
	// Floor is the lower end of a log scale: values at or below it
	// (zeros included) get the darkest colour, and the caption says so. 0
	// means the largest value / 1000 (three decades).
	Floor float64
	// Min and Max fix a linear scale when Max > Min; otherwise the scale
	// spans the values (every panel on one scale).
	Min, Max float64
	// Label names the quantity of the colour bar (drawn beside it).
	Label string
	// Caption says what the panels show; Maps adds the scale, the walls
	// and the place codes.
	Caption string
	// Cols is the number of panels per row; 0 means min(len(maps), 4).
	Cols int
}

// wallColor is the fill of wall cells: a neutral light grey, unlike any
// colour of the map.
var wallColor = color.RGBA{0xc8, 0xc8, 0xc8, 0xff}

// Maps draws per-state values over the layout of grid g, one panel per
// map, all on one colour scale (the viridis map, Viridis) with a colour
// bar, walls in grey and every place cell marked with its layout code
// (the caption lists the codes with their names). The figure's caption is
// opt.Caption followed by the scale and the legend of the codes.
//
// Errors wrap ErrConfig (no maps, a log scale with no positive value, a
// negative Floor), ErrDimension (a map without one value per state) or
// ErrNonFinite (a NaN or infinite value).
func Maps(g *mdp.Grid, maps []Map, opt *MapOptions) (*Figure, error) {
	var o MapOptions
	if opt != nil {
		o = *opt
	}
	if len(maps) == 0 {
		return nil, fmt.Errorf("figure: maps: no panels: %w", ErrConfig)
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, m := range maps {
		if len(m.Values) != g.NumStates() {
			return nil, fmt.Errorf("figure: maps: %q has %d values for %d states: %w", m.Title, len(m.Values), g.NumStates(), ErrDimension)
		}
		for _, v := range m.Values {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, fmt.Errorf("figure: maps: %q: %w", m.Title, ErrNonFinite)
			}
			lo, hi = math.Min(lo, v), math.Max(hi, v)
		}
	}
	sc := Scale{Label: o.Label, Log: o.Log}
	var below int // cells at or under a log floor
	switch {
	case o.Log:
		if !(hi > 0) {
			return nil, fmt.Errorf("figure: maps: log scale needs a positive value: %w", ErrConfig)
		}
		if o.Floor < 0 || math.IsNaN(o.Floor) {
			return nil, fmt.Errorf("figure: maps: floor %v: %w", o.Floor, ErrConfig)
		}
		sc.Min, sc.Max = o.Floor, hi
		if sc.Min == 0 {
			sc.Min = hi / 1000
		}
		if sc.Min >= sc.Max {
			sc.Min = sc.Max / 10
		}
		for _, m := range maps {
			for _, v := range m.Values {
				if v <= sc.Min {
					below++
				}
			}
		}
	case o.Max > o.Min:
		sc.Min, sc.Max = o.Min, o.Max
	default:
		sc.Min, sc.Max = lo, hi
		if !(sc.Max > sc.Min) {
			sc.Max = sc.Min + 1
		}
	}
	t := func(v float64) float64 {
		if sc.Log {
			return (math.Log10(math.Max(v, sc.Min)) - math.Log10(sc.Min)) / (math.Log10(sc.Max) - math.Log10(sc.Min))
		}
		return (v - sc.Min) / (sc.Max - sc.Min)
	}

	// The caption: the caller's text, the scale, walls, place codes.
	var cap strings.Builder
	cap.WriteString(strings.TrimSpace(o.Caption))
	if sc.Log {
		fmt.Fprintf(&cap, " Colour: %s on a log scale from %s to %s", labelOr(sc.Label, "the value"), tickLabel(sc.Min), tickLabel(sc.Max))
		if below > 0 {
			fmt.Fprintf(&cap, "; values at or below %s (%d of the %d cells drawn, zeros included) get the darkest colour", tickLabel(sc.Min), below, len(maps)*g.NumStates())
		}
		cap.WriteString(".")
	} else {
		fmt.Fprintf(&cap, " Colour: %s on a linear scale from %s to %s.", labelOr(sc.Label, "the value"), tickLabel(sc.Min), tickLabel(sc.Max))
	}
	cap.WriteString(" Grey cells are walls.")
	if leg := placeLegend(g); leg != "" {
		cap.WriteString(" Letters mark places: " + leg + ".")
	}
	caption := strings.TrimSpace(cap.String())

	// Layout.
	n := len(maps)
	cols := o.Cols
	if cols <= 0 {
		cols = min(n, 4)
	}
	cols = min(cols, n)
	rows := (n + cols - 1) / cols
	cs := vg.Length(math.Min(18, 230/float64(g.Cols))) // cell size
	gridW, gridH := cs*vg.Length(g.Cols), cs*vg.Length(g.Rows)
	titleSty := style(9, color.Black)
	titleH := lineHeight(titleSty) + 2
	gap := 4 * vg.Millimeter
	panelH := titleH + gridH
	barW := 22 * vg.Millimeter
	width := 2*margin + vg.Length(cols)*gridW + vg.Length(cols-1)*gap + gap + barW
	capSty := style(captionSize, color.Black)
	lines := wrap(caption, capSty, width-2*margin)
	capH := captionHeight(lines, capSty)
	height := 2*margin + vg.Length(rows)*panelH + vg.Length(rows-1)*gap + gap + capH

	labelSty := style(cs*0.55, color.Black)
	labelSty.XAlign, labelSty.YAlign = draw.XCenter, draw.YCenter
	drawFn := func(c draw.Canvas) {
		top := height - margin
		for i, m := range maps {
			r, k := i/cols, i%cols
			x0 := margin + vg.Length(k)*(gridW+gap)
			y1 := top - vg.Length(r)*(panelH+gap) // panel top
			ts := titleSty
			ts.XAlign, ts.YAlign = draw.XCenter, draw.YTop
			c.FillText(ts, vg.Point{X: x0 + gridW/2, Y: y1}, fitText(m.Title, ts, gridW+gap*0.9))
			gy1 := y1 - titleH // grid top
			for row := range g.Rows {
				for col := range g.Cols {
					cx, cy := x0+vg.Length(col)*cs, gy1-vg.Length(row+1)*cs
					// Cells overlap their neighbours by a hairline so that
					// anti-aliasing leaves no seams.
					const o = 0.3
					box := []vg.Point{{X: cx, Y: cy}, {X: cx + cs + o, Y: cy}, {X: cx + cs + o, Y: cy + cs + o}, {X: cx, Y: cy + cs + o}}
					s, ok := g.StateAt(row, col)
					if !ok {
						c.FillPolygon(wallColor, box)
						continue
					}
					fill := Viridis(t(m.Values[s]))
					c.FillPolygon(fill, box)
					if code := g.Code(s); code != mdp.CellFree {
						ls := labelSty
						ls.Color = textOn(fill)
						c.FillText(ls, vg.Point{X: cx + cs/2, Y: cy + cs/2}, string(code))
					}
				}
			}
		}
		// The colour bar spans the panels' grids.
		barTop := top - titleH
		barBottom := top - vg.Length(rows-1)*(panelH+gap) - panelH
		bx := margin + vg.Length(cols)*gridW + vg.Length(cols-1)*gap + gap
		drawColorBar(c, sc, bx, barBottom, barTop)
		drawLines(c, lines, capSty, margin, margin+capH)
	}
	return &Figure{Caption: caption, Scales: []Scale{sc}, Width: width, Height: height, draw: drawFn}, nil
}

// drawColorBar draws a vertical colour bar for sc between heights y0 and
// y1 at x, with ticks and labels on its right and the scale's label
// beside them.
func drawColorBar(c draw.Canvas, sc Scale, x, y0, y1 vg.Length) {
	const steps = 128
	w := 4 * vg.Millimeter
	for i := range steps {
		a := y0 + (y1-y0)*vg.Length(i)/steps
		b := y0 + (y1-y0)*vg.Length(i+1)/steps
		col := Viridis((float64(i) + 0.5) / steps)
		c.FillPolygon(col, []vg.Point{{X: x, Y: a}, {X: x + w, Y: a}, {X: x + w, Y: b + 0.3}, {X: x, Y: b + 0.3}})
	}
	line := draw.LineStyle{Color: color.Black, Width: 0.5}
	c.StrokeLines(line, []vg.Point{{X: x, Y: y0}, {X: x + w, Y: y0}, {X: x + w, Y: y1}, {X: x, Y: y1}, {X: x, Y: y0}})
	pos := func(v float64) vg.Length {
		var f float64
		if sc.Log {
			f = (math.Log10(v) - math.Log10(sc.Min)) / (math.Log10(sc.Max) - math.Log10(sc.Min))
		} else {
			f = (v - sc.Min) / (sc.Max - sc.Min)
		}
		return y0 + (y1-y0)*vg.Length(f)
	}
	sty := style(7.5, color.Black)
	sty.YAlign = draw.YCenter
	var maxW vg.Length
	for _, tk := range scaleTicks(sc) {
		y := pos(tk.Value)
		l := 1.5 * vg.Millimeter
		if tk.Label == "" {
			l = 0.8 * vg.Millimeter
		}
		c.StrokeLine2(line, x+w, y, x+w+l, y)
		if tk.Label != "" {
			c.FillText(sty, vg.Point{X: x + w + 2*vg.Millimeter, Y: y}, tk.Label)
			maxW = max(maxW, sty.Width(tk.Label))
		}
	}
	if sc.Label != "" {
		ls := style(8, color.Black)
		ls.Rotation = math.Pi / 2
		ls.XAlign, ls.YAlign = draw.XCenter, draw.YTop
		lbl := sc.Label
		if sc.Log {
			lbl += " (log scale)"
		}
		c.FillText(ls, vg.Point{X: x + w + 2.5*vg.Millimeter + maxW, Y: (y0 + y1) / 2}, fitText(lbl, ls, y1-y0))
	}
}

// scaleTicks returns the ticks of a colour bar: gonum/plot's default ticks
// on a linear scale; on a log scale the decades (labelled) and 2..9 times
// them (unlabelled), or 1, 2 and 5 times the decades (labelled) when the
// range holds fewer than two decades. Both ends are labelled when no
// labelled tick is near them.
func scaleTicks(sc Scale) []plot.Tick {
	var ticks []plot.Tick
	in := func(v float64) bool { return v >= sc.Min*(1-1e-9) && v <= sc.Max*(1+1e-9) }
	if !sc.Log {
		for _, tk := range (plot.DefaultTicks{}).Ticks(sc.Min, sc.Max) {
			if tk.Label != "" {
				tk.Label = tickLabel(tk.Value)
			}
			ticks = append(ticks, tk)
		}
	} else {
		k0, k1 := int(math.Floor(math.Log10(sc.Min))), int(math.Ceil(math.Log10(sc.Max)))
		decades := 0
		for k := k0; k <= k1; k++ {
			if in(math.Pow(10, float64(k))) {
				decades++
			}
		}
		for k := k0; k <= k1; k++ {
			d := math.Pow(10, float64(k))
			for m := 1; m <= 9; m++ {
				v := float64(m) * d
				if !in(v) {
					continue
				}
				label := ""
				if m == 1 || decades < 2 && (m == 2 || m == 5) {
					label = tickLabel(v)
				}
				ticks = append(ticks, plot.Tick{Value: v, Label: label})
			}
		}
	}
	// Label the ends unless a labelled tick is within 8% of the bar.
	frac := func(v float64) float64 {
		if sc.Log {
			return (math.Log10(v) - math.Log10(sc.Min)) / (math.Log10(sc.Max) - math.Log10(sc.Min))
		}
		return (v - sc.Min) / (sc.Max - sc.Min)
	}
	for _, end := range []float64{sc.Min, sc.Max} {
		near := slices.ContainsFunc(ticks, func(tk plot.Tick) bool {
			return tk.Label != "" && math.Abs(frac(tk.Value)-frac(end)) < 0.08
		})
		if !near {
			ticks = append(ticks, plot.Tick{Value: end, Label: tickLabel(end)})
		}
	}
	return ticks
}

// tickLabel formats v with three significant digits, in plain notation
// between 0.001 and 100000, never as a negative zero.
func tickLabel(v float64) string {
	if v == 0 {
		return "0"
	}
	a := math.Abs(v)
	if a >= 1e-3 && a < 1e5 {
		r, _ := strconv.ParseFloat(strconv.FormatFloat(v, 'g', 3, 64), 64)
		return strconv.FormatFloat(r, 'f', -1, 64)
	}
	return strconv.FormatFloat(v, 'g', 3, 64)
}

// fitText shortens s with an ellipsis until it fits width.
func fitText(s string, sty interface{ Width(string) vg.Length }, width vg.Length) string {
	if sty.Width(s) <= width {
		return s
	}
	r := []rune(s)
	for len(r) > 1 && sty.Width(string(r)+"…") > width {
		r = r[:len(r)-1]
	}
	return string(r) + "…"
}

// placeLegend returns "code name" for every code of g's layout other than
// free cells, sorted by code: S start, T terminal and the label codes
// with their label names.
func placeLegend(g *mdp.Grid) string {
	var parts []string
	seen := map[rune]bool{}
	for s := range g.NumStates() {
		code := g.Code(s)
		if code == mdp.CellFree || seen[code] {
			continue
		}
		seen[code] = true
		name := g.Label(s)
		switch {
		case code == mdp.CellStart:
			name = "start"
		case code == mdp.CellTerminal:
			name = "terminal"
		}
		parts = append(parts, string(code)+" "+name)
	}
	slices.Sort(parts)
	return strings.Join(parts, ", ")
}

func labelOr(s, def string) string {
	if s == "" {
		return def
	}
	return s
}
