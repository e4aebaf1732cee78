package forest

import (
	"math"
	"slices"
	"strings"
	"testing"
)

// lineFit returns the least-squares slope of y on x and the share of y's variance the
// line explains (R²).
func lineFit(x, y []float64) (slope, r2 float64) {
	n := float64(len(x))
	mx, my := 0.0, 0.0
	for i := range x {
		mx += x[i] / n
		my += y[i] / n
	}
	sxy, sxx, syy := 0.0, 0.0, 0.0
	for i := range x {
		sxy += (x[i] - mx) * (y[i] - my)
		sxx += (x[i] - mx) * (x[i] - mx)
		syy += (y[i] - my) * (y[i] - my)
	}
	slope = sxy / sxx
	if syy == 0 {
		return slope, 1
	}
	return slope, sxy * sxy / (sxx * syy)
}

// Friedman #1 (Friedman 1991): y = 10 sin(π x1 x2) + 20 (x3 − ½)² + 10 x4 + 5 x5 + ε,
// with x6…x10 noise. Partial dependence on x4 is, up to a constant, the formula's own
// term 10·x4 (Friedman 2001, §8.2: for an additive term the partial dependence recovers
// it), so the boosted model's curve must be close to a line of slope 10: slope within
// 10 ± 1.5 and R² above 0.95 over the 20-point grid less its outermost point at each
// end (the trees flatten the curve at the data's edges, where few rows constrain it);
// likewise x5's slope 5 ± 0.75. A noise input's curve must be close to flat: its range
// under 0.5, against x4's 10 over the same span.
func TestDependenceFriedman1(t *testing.T) {
	tb := readTable(t, "friedman1_train.csv")
	m := train(t, tb.dataset(t, "y"), boostParams())
	cols := tb.columns(m)
	at := func(name string) int {
		return slices.IndexFunc(m.Features, func(f FeatureInfo) bool { return f.Name == name })
	}
	for _, c := range []struct {
		feature  string
		slope    float64
		flatness float64 // most the curve may move when flat
	}{
		{"x4", 10, 0},
		{"x5", 5, 0},
		{"x7", 0, 0.5},
		{"x10", 0, 0.5},
	} {
		t.Run(c.feature, func(t *testing.T) {
			f := at(c.feature)
			grid, err := m.DependenceGrid(f, 20)
			must(t, err)
			if len(grid) != 20 || !slices.IsSorted(grid) || grid[0] < 0 || grid[19] > 1 {
				t.Fatalf("grid %v: want 20 increasing values within the data's [0, 1]", grid)
			}
			mean := make([]float64, len(grid))
			must(t, m.Dependence(cols, f, grid, mean, nil, 2))
			inner := func(v []float64) []float64 { return v[1 : len(v)-1] }
			slope, r2 := lineFit(inner(grid), inner(mean))
			t.Logf("%s: slope %.3f, R² %.3f, curve %.3f", c.feature, slope, r2, mean)
			if c.slope != 0 {
				if math.Abs(slope-c.slope) > 0.15*c.slope || r2 < 0.95 {
					t.Fatalf("slope %.3f (R² %.3f); want a line of slope %g", slope, r2, c.slope)
				}
				return
			}
			if span := slices.Max(mean) - slices.Min(mean); span > c.flatness {
				t.Fatalf("a noise input's curve moves by %.3f; want under %g", span, c.flatness)
			}
		})
	}
}

// Partial dependence is the mean of the individual curves, and each individual curve is
// the prediction of the row with the feature replaced (the definition); the result does
// not depend on the thread count. Checked on a classification forest over mixed data,
// for a numeric and a categorical feature.
func TestDependenceDefinition(t *testing.T) {
	g := genMixed(31, 150, 3, false)
	p := DefaultParams(MethodForest)
	p.Trees, p.PermutationRows = 15, -1
	m := train(t, g.dataset(t, 3), p)
	cols := g.columns()
	W := m.Width()
	for _, f := range []int{0, 2} {
		t.Run(m.Features[f].Name, func(t *testing.T) {
			grid, err := m.DependenceGrid(f, 6)
			must(t, err)
			if m.Features[f].Kind == Categorical && !slices.Equal(grid, []float64{0, 1, 2, 3}) {
				t.Fatalf("grid %v; want the four levels seen in training (code 4 never occurs)", grid)
			}
			if m.Features[f].Kind == Numeric && len(grid) != 6 {
				t.Fatalf("grid %v; want 6 values", grid)
			}
			G := len(grid)
			mean, curves := make([]float64, G*W), make([]float64, g.rows*G*W)
			must(t, m.Dependence(cols, f, grid, mean, curves, 1))
			mean2 := make([]float64, G*W)
			must(t, m.Dependence(cols, f, grid, mean2, nil, 2))
			if !bitsEqual(mean, mean2) {
				t.Fatalf("one thread %v, two %v", mean, mean2)
			}
			want := make([]float64, G*W)
			pred := make([]float64, W)
			for i := range g.rows {
				row := g.row(i)
				for gi, v := range grid {
					row[f] = v
					m.PredictRow(row, pred)
					for k := range W {
						if got := curves[(i*G+gi)*W+k]; got != pred[k] {
							t.Fatalf("row %d grid %v: curve %v, prediction %v", i, v, got, pred[k])
						}
						want[gi*W+k] += pred[k] / float64(g.rows)
					}
				}
			}
			for i := range want {
				if math.Abs(mean[i]-want[i]) > 1e-12 {
					t.Fatalf("mean %v; the curves average %v", mean, want)
				}
			}
		})
	}
}

// Bad arguments name what is wrong.
func TestDependenceErrors(t *testing.T) {
	g := genMixed(32, 60, 2, false)
	p := DefaultParams(MethodTree)
	m := train(t, g.dataset(t, 2), p)
	cols := g.columns()
	for _, c := range []struct {
		name string
		err  func() error
		want string
	}{
		{"feature", func() error { _, err := m.DependenceGrid(9, 5); return err }, "feature 9 of 5"},
		{"points", func() error { _, err := m.DependenceGrid(0, 0); return err }, `feature "x0": 0 grid points`},
		{"columns", func() error { return m.Dependence(cols[:2], 0, []float64{1}, make([]float64, 2), nil, 1) }, "2 columns"},
		{"mean", func() error { return m.Dependence(cols, 0, []float64{1, 2}, make([]float64, 3), nil, 1) }, "mean holds 3 numbers, want 4"},
		{"curves", func() error {
			return m.Dependence(cols, 0, []float64{1}, make([]float64, 2), make([]float64, 5), 1)
		}, "curves hold 5 numbers, want 120"},
	} {
		t.Run(c.name, func(t *testing.T) {
			err := c.err()
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("error %v; want one containing %q", err, c.want)
			}
		})
	}
}
