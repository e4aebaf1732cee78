package plots

import (
	"fmt"

	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// CalibrationBin is one bin of predicted probabilities, as copse_calibration returns
// it.
type CalibrationBin struct {
	Bin           int
	MeanPredicted float64 // NaN for an empty bin
	ObservedRate  float64 // NaN for an empty bin
	Rows          int
}

// Calibration draws the observed rate against the mean predicted probability of each
// non-empty bin, joined in bin order, with each bin's number of rows beside its point
// and the diagonal on which a calibrated model lies.
func Calibration(l Labels, bins []CalibrationBin) (*Picture, error) {
	l = l.or(Labels{Title: "Calibration", X: "mean predicted probability", Y: "observed rate"})
	var xys plotter.XYs
	var notes []string
	for _, b := range bins {
		if b.Rows == 0 || !finite(b.MeanPredicted) || !finite(b.ObservedRate) {
			continue
		}
		xys = append(xys, plotter.XY{X: b.MeanPredicted, Y: b.ObservedRate})
		notes = append(notes, fmt.Sprintf("n=%d", b.Rows))
	}
	if len(xys) == 0 {
		return nil, fmt.Errorf("plots: calibration: every bin is empty")
	}
	p := newPlot(l)
	unitAxes(p)
	p.Legend.Left = true
	diag := guide(0, 0, 1, 1, guideColour)
	p.Add(diag)
	p.Legend.Add("calibrated", diag)
	line, points, err := plotter.NewLinePoints(xys)
	if err != nil {
		return nil, fmt.Errorf("plots: calibration: %w", err)
	}
	line.LineStyle = solid(colourOf(0))
	points.GlyphStyle = draw.GlyphStyle{Color: colourOf(0), Radius: vg.Points(3.5), Shape: draw.CircleGlyph{}}
	p.Add(line, points)
	p.Legend.Add("bins (n = rows)", line, points)
	// Bin sizes go to the lower right of their points, or, near the right edge where
	// they would leave the plot, to the upper left (the line comes from the lower left).
	var right, left plotter.XYLabels
	for i, xy := range xys {
		side := &right
		if xy.X > 0.85 {
			side = &left
		}
		side.XYs = append(side.XYs, xy)
		side.Labels = append(side.Labels, notes[i])
	}
	for _, side := range []struct {
		xyl    plotter.XYLabels
		xAlign draw.XAlignment
		yAlign draw.YAlignment
		offset vg.Point
	}{
		{right, draw.XLeft, draw.YTop, vg.Point{X: vg.Points(5), Y: -vg.Points(4)}},
		{left, draw.XRight, draw.YBottom, vg.Point{X: -vg.Points(5), Y: vg.Points(4)}},
	} {
		if len(side.xyl.XYs) == 0 {
			continue
		}
		labels, err := plotter.NewLabels(side.xyl)
		if err != nil {
			return nil, fmt.Errorf("plots: calibration: %w", err)
		}
		for i := range labels.TextStyle {
			labels.TextStyle[i] = text.Style{Color: inkColour, Font: font.From(sans, noteSize), XAlign: side.xAlign, YAlign: side.yAlign, Handler: p.TextHandler}
		}
		labels.Offset = side.offset
		p.Add(labels)
	}
	unitAxes(p) // the notes must not widen the unit square
	return &Picture{p: p}, nil
}
