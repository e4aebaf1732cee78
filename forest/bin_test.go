package forest

import (
	"math"
	"slices"
	"testing"
)

// Numeric features are cut into at most Bins roughly equal-frequency bins (quantile
// binning, common practice for histogram trees), a value that fills more than a bin's
// share keeps a bin of its own, and missing values have bin 0. With no more distinct
// values than Bins, every value has its own bin and edges fall halfway between
// neighbouring values.
func TestNumericBinning(t *testing.T) {
	r := newRand(51)
	const n = 1000
	uniform, heavy := make([]float64, n), make([]float64, n)
	for i := range n {
		uniform[i] = r.Float64()
		heavy[i] = r.Float64()
		if i%5 < 2 {
			heavy[i] = 0.5 // 40 % of the rows
		}
		if i%20 == 0 {
			uniform[i] = math.NaN() // 50 missing
		}
	}
	y := make([]float64, n)
	for i := range y {
		y[i] = r.NormFloat64()
	}
	d := NewDataset(n)
	must(t, d.AddNumeric("uniform", uniform))
	must(t, d.AddNumeric("heavy", heavy))
	must(t, d.SetRegressionTarget("y", y))
	p := DefaultParams(MethodTree)
	p.Bins = 10
	p.MaxDepth = 1
	m := train(t, d, p)

	for _, f := range m.Features {
		b := f.Binning
		if len(b.Upper) > p.Bins || !math.IsInf(b.Upper[len(b.Upper)-1], 1) {
			t.Errorf("%s: %d edges, last %v; want at most %d, ending at +Inf", f.Name, len(b.Upper), b.Upper[len(b.Upper)-1], p.Bins)
		}
		if !slices.IsSorted(b.Upper) || len(slices.Compact(slices.Clone(b.Upper))) != len(b.Upper) {
			t.Errorf("%s: edges not strictly increasing: %v", f.Name, b.Upper)
		}
		if b.NumBins() != len(b.Upper)+1 {
			t.Errorf("%s: %d bins for %d edges", f.Name, b.NumBins(), len(b.Upper))
		}
		if s := sum(b.Counts); s != n {
			t.Errorf("%s: bin counts sum to %v, want %d", f.Name, s, n)
		}
	}
	u := m.Features[0].Binning
	if u.Counts[0] != 50 {
		t.Errorf("uniform: missing bin holds %v, want 50", u.Counts[0])
	}
	share := float64(n-50) / float64(len(u.Upper))
	for b, c := range u.Counts[1:] {
		if math.Abs(c-share) > 0.1*share {
			t.Errorf("uniform: bin %d holds %v rows, want about %v", b+1, c, share)
		}
	}
	h := m.Features[1].Binning
	hb := h.binOf(0.5)
	if h.Counts[hb] != 400 {
		t.Errorf("heavy: the bin of 0.5 holds %v rows, want exactly its 400", h.Counts[hb])
	}
	for _, v := range heavy {
		if v != 0.5 && h.binOf(v) == hb {
			t.Fatalf("heavy: %v shares a bin with the heavy value 0.5", v)
		}
	}

	// Few distinct values: one bin each, edges at midpoints.
	small := NewDataset(6)
	must(t, small.AddNumeric("x", []float64{3, 1, 2, 2, 10, 1}))
	must(t, small.SetRegressionTarget("y", []float64{1, 2, 3, 4, 5, 6}))
	sb := train(t, small, DefaultParams(MethodTree)).Features[0].Binning
	if want := []float64{1.5, 2.5, 6.5, math.Inf(1)}; !slices.Equal(sb.Upper, want) {
		t.Errorf("edges %v, want %v", sb.Upper, want)
	}
	if want := []float64{0, 2, 2, 1, 1}; !slices.Equal(sb.Counts, want) {
		t.Errorf("counts %v, want %v", sb.Counts, want)
	}
}

// A tree on one numeric feature can cut only at bin edges: with Bins = 4 it has at most
// 4 leaves, however many distinct values there are.
func TestBinsLimitSplits(t *testing.T) {
	r := newRand(52)
	const n = 500
	x, y := make([]float64, n), make([]float64, n)
	for i := range n {
		x[i] = r.Float64()
		y[i] = math.Sin(6*x[i]) + 0.1*r.NormFloat64()
	}
	for _, bins := range []int{2, 4, 16} {
		d := NewDataset(n)
		must(t, d.AddNumeric("x", x))
		must(t, d.SetRegressionTarget("y", y))
		p := DefaultParams(MethodTree)
		p.Bins = bins
		tr := train(t, d, p).Trees[0]
		if tr.Leaves() != bins {
			// Fully grown on noisy data: every edge is used.
			t.Errorf("bins %d: %d leaves, want %d", bins, tr.Leaves(), bins)
		}
	}
}

// Categorical features with more levels than Bins keep the Bins−1 heaviest levels apart
// (ties to the lower code) and put the rest in one shared bin; levels never seen in
// training map to the missing bin 0.
func TestCategoricalBinCap(t *testing.T) {
	levels := []string{"l0", "l1", "l2", "l3", "l4", "l5", "l6", "l7", "l8", "l9"}
	// Rows per level; l9 never occurs, l5 and l1 tie.
	count := []int{2, 7, 1, 9, 3, 7, 1, 2, 4, 0}
	var codes []int32
	var y []float64
	for l, c := range count {
		for k := range c {
			codes = append(codes, int32(l))
			y = append(y, float64(l+k))
		}
	}
	d := NewDataset(len(codes))
	must(t, d.AddCategorical("c", codes, levels))
	must(t, d.SetRegressionTarget("y", y))
	p := DefaultParams(MethodTree)
	p.Bins = 4
	m := train(t, d, p)
	b := m.Features[0].Binning
	// Heaviest: l3 (9), then l1 and l5 (7 each). Kept levels are numbered in code order.
	want := []uint16{4, 1, 4, 2, 4, 3, 4, 4, 4, 0}
	if !slices.Equal(b.LevelBin, want) {
		t.Errorf("level bins %v, want %v", b.LevelBin, want)
	}
	if wantCounts := []float64{0, 7, 9, 7, 13}; !slices.Equal(b.Counts, wantCounts) {
		t.Errorf("bin counts %v, want %v", b.Counts, wantCounts)
	}
	// Levels that share a bin go the same way at every split.
	tr := m.Trees[0]
	shared := []int{0, 2, 4, 6, 7, 8}
	for i, nd := range tr.Nodes {
		if nd.IsLeaf() {
			continue
		}
		for _, l := range shared[1:] {
			if tr.levelGoesLeft(&tr.Nodes[i], float64(l)) != tr.levelGoesLeft(&tr.Nodes[i], float64(shared[0])) {
				t.Errorf("node %d: levels l%d and l%d share a bin but part", i, l, shared[0])
			}
		}
	}
}
