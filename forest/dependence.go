package forest

import (
	"cmp"
	"errors"
	"fmt"
	"math"
	"slices"
)

// Partial dependence (Friedman 2001, §8.2): the model's mean prediction over a set of
// rows when one feature is set to a value for all of them, traced over a grid of values;
// with it, each row's own curve (an individual conditional expectation curve, Goldstein,
// Kapelner, Bleich & Pitkin 2015). Predictions are the model's usual output: class
// probabilities or values.

// DependenceGrid returns up to points values of feature f spread over its training
// distribution, in increasing order. For a numeric feature: one value per training bin
// when there are at most points bins, else the bins at evenly spaced quantiles of the
// training weight; each bin stands as the middle of its edges (the first bin as its upper
// edge, the last as just above its lower edge), so every value routes through the trees
// like the training values of its bin. For a categorical feature: the level codes seen in
// training, the heaviest points of them. Missing values are never on the grid.
func (m *Model) DependenceGrid(f, points int) ([]float64, error) {
	if f < 0 || f >= len(m.Features) {
		return nil, fmt.Errorf("forest: dependence: feature %d of %d", f, len(m.Features))
	}
	fi := &m.Features[f]
	if points < 1 {
		return nil, fmt.Errorf("forest: dependence: feature %q: %d grid points; want at least 1", fi.Name, points)
	}
	b := &fi.Binning
	if fi.Kind == Categorical {
		type lw struct {
			code int
			w    float64
		}
		var seen []lw
		for code, bin := range b.LevelBin {
			if bin != 0 && int(bin) < len(b.Counts) && b.Counts[bin] > 0 {
				seen = append(seen, lw{code, b.Counts[bin]})
			}
		}
		if len(seen) == 0 {
			return nil, fmt.Errorf("forest: dependence: feature %q keeps no training levels", fi.Name)
		}
		slices.SortStableFunc(seen, func(x, y lw) int { return cmp.Compare(y.w, x.w) })
		seen = seen[:min(points, len(seen))]
		grid := make([]float64, len(seen))
		for i, s := range seen {
			grid[i] = float64(s.code)
		}
		slices.Sort(grid)
		return grid, nil
	}
	total := 0.0
	var bins []int
	for bin := 1; bin < len(b.Counts); bin++ {
		if b.Counts[bin] > 0 {
			bins = append(bins, bin)
			total += b.Counts[bin]
		}
	}
	if len(bins) == 0 || len(b.Upper) < len(b.Counts)-1 {
		return nil, fmt.Errorf("forest: dependence: feature %q keeps no training values", fi.Name)
	}
	if len(bins) > points {
		var picked []int
		cum, k := 0.0, 0
		for j := range points {
			q := (float64(j) + 0.5) / float64(points) * total
			for ; k < len(bins)-1 && cum+b.Counts[bins[k]] < q; k++ {
				cum += b.Counts[bins[k]]
			}
			if len(picked) == 0 || picked[len(picked)-1] != bins[k] {
				picked = append(picked, bins[k])
			}
		}
		bins = picked
	}
	grid := make([]float64, len(bins))
	for i, bin := range bins {
		lo, hi := math.Inf(-1), b.Upper[bin-1]
		if bin >= 2 {
			lo = b.Upper[bin-2]
		}
		switch {
		case !math.IsInf(lo, 0) && !math.IsInf(hi, 0):
			grid[i] = lo + (hi-lo)/2
		case !math.IsInf(hi, 0):
			grid[i] = hi
		case !math.IsInf(lo, 0):
			grid[i] = math.Nextafter(lo, math.Inf(1))
		}
	}
	return grid, nil
}

// Dependence sets feature f to each grid value in turn for all rows (given column by
// column, coded as for Predict) and writes the mean prediction into mean, Width numbers
// per grid value (grid value g at mean[g*Width:]). When curves is not nil it also gets
// every row's predictions, row by row: row i at grid value g at
// curves[(i*len(grid)+g)*Width:]. It predicts on up to threads goroutines (0: one); the
// result does not depend on their number.
func (m *Model) Dependence(cols [][]float64, f int, grid, mean, curves []float64, threads int) error {
	if f < 0 || f >= len(m.Features) {
		return fmt.Errorf("forest: dependence: feature %d of %d", f, len(m.Features))
	}
	if len(cols) != len(m.Features) {
		return fmt.Errorf("forest: dependence: %d columns, the model has %d features", len(cols), len(m.Features))
	}
	n := len(cols[0])
	if n == 0 {
		return errors.New("forest: dependence: no rows")
	}
	W, G := m.Width(), len(grid)
	if len(mean) < G*W {
		return fmt.Errorf("forest: dependence: mean holds %d numbers, want %d", len(mean), G*W)
	}
	if curves != nil && len(curves) < n*G*W {
		return fmt.Errorf("forest: dependence: curves hold %d numbers, want %d", len(curves), n*G*W)
	}
	work := slices.Clone(cols)
	col := make([]float64, n)
	work[f] = col
	pred := make([]float64, n*W)
	for g, v := range grid {
		for i := range col {
			col[i] = v
		}
		if err := m.Predict(work, pred, threads); err != nil {
			return fmt.Errorf("forest: dependence: feature %q: %w", m.Features[f].Name, err)
		}
		out := mean[g*W : (g+1)*W]
		clear(out)
		for i := range n {
			for k := range out {
				out[k] += pred[i*W+k]
			}
		}
		for k := range out {
			out[k] /= float64(n)
		}
		if curves != nil {
			for i := range n {
				copy(curves[(i*G+g)*W:(i*G+g+1)*W], pred[i*W:(i+1)*W])
			}
		}
	}
	return nil
}
