package plots

import (
	"fmt"
	"math"
	"strconv"
)

// ImportanceRow is one feature's importance, as copse_importance returns it.
type ImportanceRow struct {
	Feature    string
	Importance float64
	Std        float64 // spread of the importance (permutation); NaN when there is none
}

// MaxBars is the most rows a bar chart shows; more would not be readable at a glance,
// and the rows past it are the least important ones.
const MaxBars = 30

// Importance draws a horizontal bar per feature, in the given order (most important
// first, on top), with ±Std error bars where Std is finite and the value at each bar's
// end. Rows past MaxBars are left out, and the title says so.
func Importance(l Labels, rows []ImportanceRow) (*Picture, error) {
	if len(rows) == 0 {
		return nil, fmt.Errorf("plots: importance: no features to draw")
	}
	l = l.or(Labels{Title: "Feature importance", X: "importance"})
	if len(rows) > MaxBars {
		l.Title = fmt.Sprintf("%s (top %d of %d)", l.Title, MaxBars, len(rows))
		rows = rows[:MaxBars]
	}
	decimals := noteDecimals(rows)
	b := &hbars{values: make([]float64, len(rows)), errs: make([]float64, len(rows)), notes: make([]string, len(rows))}
	names := make([]string, len(rows))
	for i, r := range rows {
		if !finite(r.Importance) {
			return nil, fmt.Errorf("plots: importance: feature %q has importance %v", r.Feature, r.Importance)
		}
		names[i] = r.Feature
		b.values[i], b.errs[i] = r.Importance, r.Std
		b.notes[i] = strconv.FormatFloat(r.Importance, 'f', decimals, 64)
		if finite(r.Std) {
			b.notes[i] += " ± " + strconv.FormatFloat(math.Abs(r.Std), 'f', decimals, 64)
		}
	}
	p := newPlot(l)
	p.Add(b)
	p.NominalY(rowNames(names)...)
	return &Picture{p: p}, nil
}

// noteDecimals is the number of decimals that shows the largest importance with three
// significant digits; the other rows use as many, so that the notes line up.
func noteDecimals(rows []ImportanceRow) int {
	top := 0.0
	for _, r := range rows {
		top = max(top, math.Abs(r.Importance))
	}
	if top == 0 || !finite(top) {
		return 3
	}
	return max(0, 2-int(math.Floor(math.Log10(top))))
}
