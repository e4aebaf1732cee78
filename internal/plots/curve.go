package plots

import (
	"fmt"

	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// CurvePoint is one metric's value after a number of trees (or boosting rounds), as
// copse_curve returns it.
type CurvePoint struct {
	Trees  int
	Metric string
	Value  float64 // NaN when not yet defined (no out-of-bag vote)
}

// Curve draws one line per metric (in order of first appearance, with a legend when
// there are several) of its value against the number of trees. Points whose value is
// not finite are left out.
func Curve(l Labels, pts []CurvePoint) (*Picture, error) {
	var metrics []string
	series := map[string]plotter.XYs{}
	for _, pt := range pts {
		if _, ok := series[pt.Metric]; !ok {
			metrics = append(metrics, pt.Metric)
			series[pt.Metric] = plotter.XYs{}
		}
		if finite(pt.Value) {
			series[pt.Metric] = append(series[pt.Metric], plotter.XY{X: float64(pt.Trees), Y: pt.Value})
		}
	}
	def := Labels{Title: "Error by number of trees", X: "trees", Y: "value"}
	if len(metrics) == 1 {
		def.Y = metrics[0]
	}
	l = l.or(def)
	p := newPlot(l)
	drawn := 0
	for i, m := range metrics {
		xys := series[m]
		if len(xys) == 0 {
			continue
		}
		line, err := plotter.NewLine(xys)
		if err != nil {
			return nil, fmt.Errorf("plots: curve %s: %w", m, err)
		}
		line.LineStyle = solid(colourOf(i))
		p.Add(line)
		if len(xys) <= 1 { // a line of one point draws nothing
			s, _ := plotter.NewScatter(xys)
			s.GlyphStyle = draw.GlyphStyle{Color: colourOf(i), Radius: vg.Points(3), Shape: draw.CircleGlyph{}}
			p.Add(s)
		}
		if len(metrics) > 1 { // one metric is named by the Y label
			p.Legend.Add(m, line)
		}
		drawn++
	}
	if drawn == 0 {
		return nil, fmt.Errorf("plots: curve: no finite values to draw")
	}
	return &Picture{p: p}, nil
}
