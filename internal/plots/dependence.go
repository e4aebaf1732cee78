package plots

import (
	"fmt"
	"math"
	"strconv"

	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// DependencePoint is one grid value's average prediction, as copse_dependence returns
// it: Value is the feature value as text (a level name, or a number), Output the
// class whose probability Average is ("" for one output, as in regression).
type DependencePoint struct {
	Value   string
	Output  string
	Average float64
}

// Dependence draws partial dependence: the average prediction against the feature's
// value, one series per output (in order of first appearance; a legend names them when
// there are several). When every value reads as a number the feature is taken as
// numeric and drawn as lines with a point per grid value; otherwise each level gets a
// bar (grouped by output when there are several), in the order given.
func Dependence(l Labels, pts []DependencePoint) (*Picture, error) {
	if len(pts) == 0 {
		return nil, fmt.Errorf("plots: dependence: no points to draw")
	}
	l = l.or(Labels{Title: "Partial dependence", X: "feature value", Y: "average prediction"})
	var outputs, levels []string
	seenOut, seenLevel := map[string]bool{}, map[string]bool{}
	numeric := true
	for _, pt := range pts {
		if !finite(pt.Average) {
			return nil, fmt.Errorf("plots: dependence: value %q has average prediction %v", pt.Value, pt.Average)
		}
		if !seenOut[pt.Output] {
			seenOut[pt.Output] = true
			outputs = append(outputs, pt.Output)
		}
		if !seenLevel[pt.Value] {
			seenLevel[pt.Value] = true
			levels = append(levels, pt.Value)
		}
		if v, err := strconv.ParseFloat(pt.Value, 64); err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
			numeric = false
		}
	}
	p := newPlot(l)
	legend := len(outputs) > 1 // one output is named by the Y label
	if numeric {
		for i, out := range outputs {
			var xys plotter.XYs
			for _, pt := range pts {
				if pt.Output == out {
					x, _ := strconv.ParseFloat(pt.Value, 64)
					xys = append(xys, plotter.XY{X: x, Y: pt.Average})
				}
			}
			line, points, err := plotter.NewLinePoints(xys)
			if err != nil {
				return nil, fmt.Errorf("plots: dependence: %w", err)
			}
			line.LineStyle = solid(colourOf(i))
			points.GlyphStyle = draw.GlyphStyle{Color: colourOf(i), Radius: vg.Points(2.5), Shape: draw.CircleGlyph{}}
			p.Add(line, points)
			if legend {
				p.Legend.Add(out, line, points)
			}
		}
		return &Picture{p: p}, nil
	}
	at := make(map[string]int, len(levels))
	for i, lv := range levels {
		at[lv] = i
	}
	// The bars of one level fill about 70% of its share of the plot's width (about 7
	// inches of the 8), so that groups stay apart.
	width := 0.7 * 7 * vg.Inch / vg.Length(len(levels)*len(outputs))
	width = min(max(width, vg.Points(3)), vg.Points(60))
	for i, out := range outputs {
		vals := make(plotter.Values, len(levels))
		for _, pt := range pts {
			if pt.Output == out {
				vals[at[pt.Value]] = pt.Average
			}
		}
		bars, err := plotter.NewBarChart(vals, width)
		if err != nil {
			return nil, fmt.Errorf("plots: dependence: %w", err)
		}
		bars.Color = colourOf(i)
		bars.LineStyle.Width = 0
		bars.Offset = width * vg.Length(float64(i)-float64(len(outputs)-1)/2)
		p.Add(bars)
		if legend {
			p.Legend.Add(out, bars)
		}
	}
	p.NominalX(levels...)
	if len(levels) > 6 { // long rows of level names overlap unless tilted
		p.X.Tick.Label.Rotation = math.Pi / 6
		p.X.Tick.Label.XAlign = draw.XRight
		p.X.Tick.Label.YAlign = draw.YCenter
	}
	p.X.Min, p.X.Max = -0.5, float64(len(levels))-0.5 // room for the outer groups' bars
	p.Y.Min = min(p.Y.Min, 0)
	headroom := 0.05 // the highest bar stays below the frame
	if legend {
		headroom = 0.2 // and below the legend
	}
	p.Y.Max += headroom * (p.Y.Max - p.Y.Min)
	return &Picture{p: p}, nil
}
