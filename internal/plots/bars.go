package plots

import (
	"image/color"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// hbars draws one horizontal bar per row from 0 to its value, the first row at the
// top, with an optional error bar (value ± err) and a note after the bar's end.
// Horizontal bars leave room for long feature names on the Y axis. Rows with a value
// that is not finite get no bar.
type hbars struct {
	values  []float64
	errs    []float64     // nil, or per row (NaN: none)
	colours []color.Color // nil (all barColour), or per row
	notes   []string      // nil, or per row
}

// barHalf is half a bar's thickness as a share of the row pitch.
const barHalf = 0.35

// noteRoom is the share of the X range added on the right for notes.
const noteRoom = 0.22

// y is the plot Y coordinate of row i: the first row is on top.
func (b *hbars) y(i int) float64 { return float64(len(b.values) - 1 - i) }

func (b *hbars) err(i int) float64 {
	if b.errs == nil || !finite(b.errs[i]) {
		return 0
	}
	return math.Abs(b.errs[i])
}

// Plot implements plot.Plotter.
func (b *hbars) Plot(c draw.Canvas, p *plot.Plot) {
	trX, trY := p.Transforms(&c)
	half := (trY(1) - trY(0)) * barHalf
	errStyle := draw.LineStyle{Color: inkColour, Width: vg.Points(1.2)}
	noteStyle := text.Style{Color: inkColour, Font: font.From(sans, noteSize), XAlign: draw.XLeft, YAlign: draw.YCenter, Handler: p.TextHandler}
	for i, v := range b.values {
		y := trY(b.y(i))
		end := trX(0)
		if finite(v) {
			x0, x1 := trX(0), trX(v)
			col := color.Color(barColour)
			if b.colours != nil {
				col = b.colours[i]
			}
			c.FillPolygon(col, c.ClipPolygonXY([]vg.Point{{X: x0, Y: y - half}, {X: x1, Y: y - half}, {X: x1, Y: y + half}, {X: x0, Y: y + half}}))
			end = max(x0, x1)
			if e := b.err(i); e > 0 {
				lo, hi := trX(v-e), trX(v+e)
				capH := half / 2
				c.StrokeLines(errStyle, c.ClipLinesXY(
					[]vg.Point{{X: lo, Y: y}, {X: hi, Y: y}},
					[]vg.Point{{X: lo, Y: y - capH}, {X: lo, Y: y + capH}},
					[]vg.Point{{X: hi, Y: y - capH}, {X: hi, Y: y + capH}})...)
				end = max(end, hi)
			}
		}
		if b.notes != nil && b.notes[i] != "" {
			c.FillText(noteStyle, vg.Point{X: end + vg.Points(4), Y: y}, b.notes[i])
		}
	}
}

// DataRange implements plot.DataRanger: 0 and every bar's end (with its error bar),
// plus room on the right for the notes.
func (b *hbars) DataRange() (xmin, xmax, ymin, ymax float64) {
	for i, v := range b.values {
		if !finite(v) {
			continue
		}
		e := b.err(i)
		xmin, xmax = min(xmin, v-e), max(xmax, v+e)
	}
	if xmax == xmin {
		xmax = xmin + 1
	}
	if b.notes != nil {
		xmax += noteRoom * (xmax - xmin)
	}
	return xmin, xmax, -0.5, float64(len(b.values)) - 0.5
}

// swatch is a filled square for a legend entry.
type swatch struct{ c color.Color }

// Thumbnail implements plot.Thumbnailer.
func (s swatch) Thumbnail(c *draw.Canvas) {
	r := c.Rectangle
	c.FillPolygon(s.c, []vg.Point{r.Min, {X: r.Max.X, Y: r.Min.Y}, r.Max, {X: r.Min.X, Y: r.Max.Y}})
}

// rowNames returns names in plot Y order (the first row on top) for NominalY.
func rowNames(names []string) []string {
	out := make([]string, len(names))
	for i, n := range names {
		out[len(names)-1-i] = n
	}
	return out
}
