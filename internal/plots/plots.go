package plots

import (
	"errors"
	"fmt"
	"image/color"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
	"gonum.org/v1/plot/vg/vgsvg"
)

// The size of every picture: 8 × 5 inches fits a slide or a page at full width; at
// 120 dots per inch a PNG is 960 × 600 pixels, sharp on a screen and small on disk.
const (
	Width  = 8 * vg.Inch
	Height = 5 * vg.Inch
	DPI    = 120
)

// Format is a picture file format.
type Format string

// The formats a picture is written in.
const (
	PNG Format = "png"
	SVG Format = "svg"
)

// ErrFormat reports an output file whose extension names no supported format.
var ErrFormat = errors.New("plots: unknown picture format")

// FormatOf returns the format named by path's extension (.png or .svg, any case).
func FormatOf(path string) (Format, error) {
	switch ext := strings.ToLower(filepath.Ext(path)); ext {
	case ".png":
		return PNG, nil
	case ".svg":
		return SVG, nil
	case "":
		return "", fmt.Errorf("%w: %q has no extension; want .png or .svg", ErrFormat, path)
	default:
		return "", fmt.Errorf("%w: %q ends in %s; want .png or .svg", ErrFormat, path, ext)
	}
}

// Labels are a picture's title and axis labels. An empty field takes the kind's
// default.
type Labels struct {
	Title string
	X, Y  string
}

func (l Labels) or(def Labels) Labels {
	if l.Title == "" {
		l.Title = def.Title
	}
	if l.X == "" {
		l.X = def.X
	}
	if l.Y == "" {
		l.Y = def.Y
	}
	return l
}

// Picture is a drawn plot, ready to be written. It is not safe for concurrent use.
type Picture struct {
	p *plot.Plot
}

// margin is the white border around every picture, so that nothing touches its edge.
const margin = 0.15 * vg.Inch

// WriteTo writes the picture to w in format f.
func (pic *Picture) WriteTo(w io.Writer, f Format) error {
	var c vg.CanvasWriterTo
	switch f {
	case PNG:
		img := vgimg.NewWith(vgimg.UseWH(Width, Height), vgimg.UseDPI(DPI))
		c = vgimg.PngCanvas{Canvas: img}
	case SVG:
		c = vgsvg.New(Width, Height)
	default:
		return fmt.Errorf("%w: %q; want png or svg", ErrFormat, string(f))
	}
	dc := draw.New(c)
	pic.p.Draw(draw.Crop(dc, margin, -margin, margin, -margin))
	_, err := c.WriteTo(w)
	return err
}

// Save writes the picture to the file at path, in the format its extension names
// (FormatOf). A file left half-written by an error is removed.
func (pic *Picture) Save(path string) (err error) {
	f, err := FormatOf(path)
	if err != nil {
		return err
	}
	out, err := os.Create(path)
	if err != nil {
		return fmt.Errorf("plots: %w", err)
	}
	defer func() {
		if cerr := out.Close(); err == nil && cerr != nil {
			err = fmt.Errorf("plots: %w", cerr)
		}
		if err != nil {
			os.Remove(path)
		}
	}()
	if err := pic.WriteTo(out, f); err != nil {
		return fmt.Errorf("plots: write %s: %w", path, err)
	}
	return nil
}

// Fonts and sizes, in points: the title stands out, axis labels read at arm's length,
// tick labels and legends are one step smaller.
var sans = font.Font{Typeface: "Liberation", Variant: "Sans"}

const (
	titleSize = 15
	labelSize = 12
	tickSize  = 10
	noteSize  = 9 // text beside the data: values, bin sizes
)

// Colours: a small palette distinguishable in colour and, mostly, in grey.
var (
	palette = []color.Color{
		color.RGBA{R: 0x1f, G: 0x5f, B: 0xa8, A: 0xff}, // blue
		color.RGBA{R: 0xd9, G: 0x6c, B: 0x06, A: 0xff}, // orange
		color.RGBA{R: 0x2a, G: 0x8c, B: 0x3c, A: 0xff}, // green
		color.RGBA{R: 0x8e, G: 0x3b, B: 0x9e, A: 0xff}, // purple
		color.RGBA{R: 0xb8, G: 0x2e, B: 0x2e, A: 0xff}, // red
		color.RGBA{R: 0x55, G: 0x55, B: 0x55, A: 0xff}, // grey
	}
	barColour   = palette[0]
	guideColour = color.RGBA{R: 0x88, G: 0x88, B: 0x88, A: 0xff}
	gridColour  = color.RGBA{R: 0xe2, G: 0xe2, B: 0xe2, A: 0xff}
	inkColour   = color.RGBA{R: 0x22, G: 0x22, B: 0x22, A: 0xff}
)

func colourOf(i int) color.Color { return palette[i%len(palette)] }

// newPlot makes a plot in the house style with labels l and a light grid.
func newPlot(l Labels) *plot.Plot {
	p := plot.New()
	p.Title.Text = l.Title
	p.Title.TextStyle.Font = font.From(sans, titleSize)
	p.Title.Padding = vg.Points(10)
	p.X.Label.Text, p.Y.Label.Text = l.X, l.Y
	for _, a := range []*plot.Axis{&p.X, &p.Y} {
		a.Label.TextStyle.Font = font.From(sans, labelSize)
		a.Label.Padding = vg.Points(6)
		a.Tick.Label.Font = font.From(sans, tickSize)
		a.Tick.Length = vg.Points(5)
		a.Tick.Marker = ticks{}
	}
	p.Legend.TextStyle.Font = font.From(sans, tickSize)
	p.Legend.Top = true
	p.Legend.Padding = vg.Points(3)
	p.Legend.ThumbnailWidth = vg.Points(24)
	g := plotter.NewGrid()
	g.Vertical.Color, g.Horizontal.Color = gridColour, gridColour
	p.Add(g)
	return p
}

// finite reports whether v is neither NaN nor infinite.
func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// dashed is the style of guides: diagonals and thresholds.
func dashed(c color.Color) draw.LineStyle {
	return draw.LineStyle{Color: c, Width: vg.Points(1.2), Dashes: []vg.Length{vg.Points(6), vg.Points(4)}}
}

// solid is the style of data lines.
func solid(c color.Color) draw.LineStyle {
	return draw.LineStyle{Color: c, Width: vg.Points(2)}
}

// guide returns a dashed straight line from (x0, y0) to (x1, y1).
func guide(x0, y0, x1, y1 float64, c color.Color) *plotter.Line {
	l, _ := plotter.NewLine(plotter.XYs{{X: x0, Y: y0}, {X: x1, Y: y1}}) // finite by construction
	l.LineStyle = dashed(c)
	return l
}

// unitAxes fixes both axes to [0, 1], the range of rates and probabilities.
func unitAxes(p *plot.Plot) {
	p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = 0, 1, 0, 1
}
