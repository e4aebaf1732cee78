package plots

import (
	"cmp"
	"fmt"
	"slices"

	"gonum.org/v1/plot/plotter"
)

// ROCPoint is one point of an ROC curve, as copse_roc returns it.
type ROCPoint struct {
	Threshold         float64
	TruePositiveRate  float64
	FalsePositiveRate float64
}

// ROCCurve is a named ROC curve: one model's on one source.
type ROCCurve struct {
	Name   string
	Points []ROCPoint
}

// AUC is the area under the ROC curve through points, by the trapezoid rule, with the
// corners (0, 0) and (1, 1) added when missing. Points may come in any order. Ties
// between scores are joined by a straight segment, which counts a tied pair as half
// right (common practice: the rank form of the AUC does the same).
func AUC(points []ROCPoint) float64 {
	pts := make([]plotter.XY, 0, len(points)+2)
	pts = append(pts, plotter.XY{})
	for _, p := range points {
		pts = append(pts, plotter.XY{X: p.FalsePositiveRate, Y: p.TruePositiveRate})
	}
	pts = append(pts, plotter.XY{X: 1, Y: 1})
	slices.SortStableFunc(pts, func(a, b plotter.XY) int {
		return cmp.Or(cmp.Compare(a.X, b.X), cmp.Compare(a.Y, b.Y))
	})
	area := 0.0
	for i := 1; i < len(pts); i++ {
		area += (pts[i].X - pts[i-1].X) * (pts[i].Y + pts[i-1].Y) / 2
	}
	return area
}

// ROC draws each curve (true positive rate against false positive rate) with the
// diagonal of a model that guesses. With one curve its AUC is in the title; with
// several each legend entry carries its own.
func ROC(l Labels, curves ...ROCCurve) (*Picture, error) {
	if len(curves) == 0 {
		return nil, fmt.Errorf("plots: roc: no curves to draw")
	}
	l = l.or(Labels{Title: "ROC curve", X: "false positive rate", Y: "true positive rate"})
	aucs := make([]float64, len(curves))
	for i, c := range curves {
		if len(c.Points) == 0 {
			return nil, fmt.Errorf("plots: roc: curve %q has no points", c.Name)
		}
		for _, p := range c.Points {
			if !finite(p.TruePositiveRate) || !finite(p.FalsePositiveRate) {
				return nil, fmt.Errorf("plots: roc: curve %q has a rate that is not a number (threshold %v)", c.Name, p.Threshold)
			}
		}
		aucs[i] = AUC(c.Points)
	}
	if len(curves) == 1 {
		l.Title = fmt.Sprintf("%s (AUC %.3f)", l.Title, aucs[0])
	}
	p := newPlot(l)
	unitAxes(p)
	p.Legend.Top, p.Legend.Left = false, false
	for i, c := range curves {
		xys := make(plotter.XYs, len(c.Points))
		for j, pt := range c.Points {
			xys[j] = plotter.XY{X: pt.FalsePositiveRate, Y: pt.TruePositiveRate}
		}
		slices.SortStableFunc(xys, func(a, b plotter.XY) int { return cmp.Or(cmp.Compare(a.X, b.X), cmp.Compare(a.Y, b.Y)) })
		line, err := plotter.NewLine(xys)
		if err != nil {
			return nil, fmt.Errorf("plots: roc: curve %q: %w", c.Name, err)
		}
		line.LineStyle = solid(colourOf(i))
		p.Add(line)
		name := c.Name
		if len(curves) > 1 {
			name = fmt.Sprintf("%s (AUC %.3f)", c.Name, aucs[i])
		}
		if name != "" {
			p.Legend.Add(name, line)
		}
	}
	chance := guide(0, 0, 1, 1, guideColour)
	p.Add(chance)
	p.Legend.Add("guessing (AUC 0.5)", chance)
	return &Picture{p: p}, nil
}
