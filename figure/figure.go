package figure

import (
	"bytes"
	"fmt"
	"image/color"
	"io"
	"path/filepath"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
	"gonum.org/v1/plot/vg/vgsvg"

	"github.com/successor-go/successor/internal/errs"
	"github.com/successor-go/successor/internal/fileio"
)

// Sentinel errors, the library's shared values.
var (
	// ErrConfig is wrapped by errors about invalid options or inputs that
	// cannot be drawn (no panels, an unknown variant, a missing name).
	ErrConfig = errs.Config
	// ErrDimension is wrapped when a value slice does not have one value
	// per state of the grid.
	ErrDimension = errs.Dimension
	// ErrNonFinite is wrapped when a value to draw is NaN or infinite.
	ErrNonFinite = errs.NonFinite
)

// Figure is a drawn figure: its caption, its colour scales and the drawing,
// ready to be saved as PNG or SVG. The caption is also drawn under the
// figure.
type Figure struct {
	// Caption says what is drawn: the quantity, its scale, what the bars
	// or colours mean and where the data come from.
	Caption string
	// Scales are the figure's colour bars (none for line plots).
	Scales []Scale
	// Width and Height are the figure's size.
	Width, Height vg.Length

	draw func(c draw.Canvas)
}

// Scale is the range of a colour bar: values from Min to Max are drawn
// from the darkest to the lightest colour of the map, on a log10 scale if
// Log is set (then values at or below Min get the darkest colour).
type Scale struct {
	Label    string
	Min, Max float64
	Log      bool
}

// String returns the scale as "label: min .. max (log)".
func (s Scale) String() string {
	kind := "linear"
	if s.Log {
		kind = "log"
	}
	return fmt.Sprintf("%s: %s .. %s (%s)", s.Label, tickLabel(s.Min), tickLabel(s.Max), kind)
}

// DPI is the resolution of PNG files.
const DPI = 150

// Save writes the figure to path as PNG (extension .png) or SVG (.svg),
// atomically (temporary file, then rename). Any other extension is an
// error wrapping ErrConfig.
func (f *Figure) Save(path string) error {
	format := strings.TrimPrefix(strings.ToLower(filepath.Ext(path)), ".")
	var buf bytes.Buffer
	if err := f.Encode(&buf, format); err != nil {
		return err
	}
	if err := fileio.WriteAtomic(path, buf.Bytes(), fileio.FileMode); err != nil {
		return fmt.Errorf("figure: %w", err)
	}
	return nil
}

// Encode writes the figure to w in the format "png" or "svg" (any other
// is an error wrapping ErrConfig).
func (f *Figure) Encode(w io.Writer, format string) error {
	var c vg.CanvasWriterTo
	switch format {
	case "png":
		img := vgimg.NewWith(vgimg.UseWH(f.Width, f.Height), vgimg.UseDPI(DPI))
		c = vgimg.PngCanvas{Canvas: img}
	case "svg":
		c = vgsvg.New(f.Width, f.Height)
	default:
		return fmt.Errorf("figure: format %q: want png or svg: %w", format, ErrConfig)
	}
	dc := draw.NewCanvas(c, f.Width, f.Height)
	dc.FillPolygon(color.White, []vg.Point{{X: 0, Y: 0}, {X: f.Width, Y: 0}, {X: f.Width, Y: f.Height}, {X: 0, Y: f.Height}})
	f.draw(dc)
	if _, err := c.WriteTo(w); err != nil {
		return fmt.Errorf("figure: %s: %w", format, err)
	}
	return nil
}

// style returns a text style of the sans-serif Liberation font.
func style(size vg.Length, c color.Color) text.Style {
	return text.Style{
		Color:   c,
		Font:    font.From(font.Font{Typeface: "Liberation", Variant: "Sans"}, size),
		XAlign:  draw.XLeft,
		YAlign:  draw.YBottom,
		Handler: plot.DefaultTextHandler,
	}
}

// sans sets every text of p to the sans-serif font at its size.
func sans(p *plot.Plot) {
	set := func(s *text.Style) {
		s.Font = font.From(font.Font{Typeface: "Liberation", Variant: "Sans"}, s.Font.Size)
	}
	set(&p.Title.TextStyle)
	set(&p.X.Label.TextStyle)
	set(&p.Y.Label.TextStyle)
	set(&p.X.Tick.Label)
	set(&p.Y.Tick.Label)
	set(&p.Legend.TextStyle)
}

// wrap splits s into lines no wider than width in style sty, breaking at
// spaces (and at explicit newlines).
func wrap(s string, sty text.Style, width vg.Length) []string {
	var lines []string
	for para := range strings.SplitSeq(s, "\n") {
		line := ""
		for _, w := range strings.Fields(para) {
			try := w
			if line != "" {
				try = line + " " + w
			}
			if line != "" && sty.Width(try) > width {
				lines = append(lines, line)
				line = w
				continue
			}
			line = try
		}
		lines = append(lines, line)
	}
	return lines
}

// captionHeight returns the height of the wrapped caption.
func captionHeight(lines []string, sty text.Style) vg.Length {
	return vg.Length(len(lines)) * lineHeight(sty)
}

func lineHeight(sty text.Style) vg.Length {
	return sty.FontExtents().Height * 1.15
}

// drawLines draws lines downwards from the top-left point (x, top).
func drawLines(c draw.Canvas, lines []string, sty text.Style, x, top vg.Length) {
	sty.YAlign = draw.YTop
	for i, l := range lines {
		c.FillText(sty, vg.Point{X: x, Y: top - vg.Length(i)*lineHeight(sty)}, l)
	}
}

// Figure layout constants.
const (
	margin      = 8 * vg.Millimeter / 2
	captionSize = 9
)
