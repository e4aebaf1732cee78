package forest

import (
	"bytes"
	"context"
	"errors"
	"math"
	"reflect"
	"runtime"
	"slices"
	"strconv"
	"testing"
	"time"
)

// Invariants of the engine. None of them needs a reference value: each follows from what
// the package documents (Train: "the same data and seed give the same model, byte for byte,
// on any number of threads"; Predict: "equals PredictRow's, row for row"; SetWeights: "a
// zero-weight row is as good as absent"; and so on) or from the definitions of CART trees
// and bagging (Breiman et al. 1984; Breiman 1996, 2001).

// modelDiff returns the first difference between two models' trees, features, OOB results
// and importances, or "" when they are the same bit for bit.
func modelDiff(a, b *Model) string {
	if len(a.Trees) != len(b.Trees) {
		return "number of trees"
	}
	for i := range a.Trees {
		if d := treeDiff(a.Trees[i], b.Trees[i]); d != "" {
			return "tree " + strconv.Itoa(i) + ": " + d
		}
	}
	if !reflect.DeepEqual(a.Features, b.Features) {
		return "features"
	}
	if !reflect.DeepEqual(a.Params, b.Params) {
		return "params"
	}
	if a.Method != b.Method || a.Task != b.Task || a.Target != b.Target || a.Rows != b.Rows || !slices.Equal(a.Classes, b.Classes) {
		return "header"
	}
	if (a.OOB == nil) != (b.OOB == nil) {
		return "OOB presence"
	}
	if a.OOB != nil {
		x, y := a.OOB, b.OOB
		switch {
		case !slices.Equal(x.Votes, y.Votes):
			return "OOB votes"
		case !bitsEqual(x.Value, y.Value):
			return "OOB values"
		case !bitsEqual(x.Curve, y.Curve) || x.CurveMetric != y.CurveMetric:
			return "OOB curve"
		case x.Scored != y.Scored || len(x.Metrics) != len(y.Metrics):
			return "OOB scored"
		}
		for k := range x.Metrics {
			if x.Metrics[k].Name != y.Metrics[k].Name || !bitsEqual([]float64{x.Metrics[k].Value}, []float64{y.Metrics[k].Value}) {
				return "OOB metric " + x.Metrics[k].Name
			}
		}
	}
	ia, ib := a.Importance, b.Importance
	switch {
	case !bitsEqual(ia.Impurity, ib.Impurity):
		return "impurity importance"
	case !bitsEqual(ia.Permutation, ib.Permutation):
		return "permutation importance"
	case !bitsEqual(ia.PermutationStd, ib.PermutationStd):
		return "permutation importance std"
	}
	return ""
}

func treeDiff(a, b *Tree) string {
	switch {
	case !reflect.DeepEqual(a.Nodes, b.Nodes):
		return "nodes"
	case !bitsEqual(a.Gain, b.Gain):
		return "gain"
	case !bitsEqual(a.Cover, b.Cover):
		return "cover"
	case !bitsEqual(a.Value, b.Value):
		return "value"
	case a.Width != b.Width:
		return "width"
	case !reflect.DeepEqual(a.LevelSets, b.LevelSets):
		return "level sets"
	}
	return ""
}

func train(t testing.TB, d *Dataset, p Params) *Model {
	t.Helper()
	m, err := Train(context.Background(), d, p)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// The model depends on the data and the seed only: not on the number of threads, and not
// on the run (Train's documented contract). Checked on data with missing values,
// categorical features and weights, for each method and task.
func TestSameSeedSameModelAnyThreads(t *testing.T) {
	g := genMixed(11, 700, 3, true)
	cases := []struct {
		name    string
		classes int
		p       func() Params
	}{
		{"forest classification", 3, func() Params {
			p := DefaultParams(MethodForest)
			p.Trees = 24
			return p
		}},
		{"forest regression", 0, func() Params {
			p := DefaultParams(MethodForest)
			p.Trees = 24
			p.FeaturesPerSplit = 0.5
			return p
		}},
		{"bagging subsample", 3, func() Params {
			p := DefaultParams(MethodBagging)
			p.Trees = 16
			p.RowFraction, p.WithReplacement = 0.6, false
			p.Impurity = Entropy
			return p
		}},
		{"tree", 0, func() Params { return DefaultParams(MethodTree) }},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			d := g.dataset(t, c.classes)
			var first *Model
			var firstEnc []byte
			for _, threads := range []int{1, 2, 3, 0, 2} {
				p := c.p()
				p.Seed = 7
				p.Threads = threads
				m := train(t, d, p)
				// The binary encoding must agree byte for byte too.
				enc, err := m.MarshalBinary()
				if err != nil {
					t.Fatal(err)
				}
				if first == nil {
					first, firstEnc = m, enc
					continue
				}
				if diff := modelDiff(first, m); diff != "" {
					t.Errorf("threads %d: model differs from threads 1 in %s", threads, diff)
				}
				if !bytes.Equal(firstEnc, enc) {
					t.Errorf("threads %d: encoding differs from threads 1", threads)
				}
			}
			if c.p().Method == MethodTree {
				return
			}
			// The seed matters: another seed gives another model (else the check above
			// could not fail).
			p := c.p()
			p.Seed = 8
			other, same := train(t, d, p), true
			for i := range other.Trees {
				same = same && treeDiff(first.Trees[i], other.Trees[i]) == ""
			}
			if same {
				t.Errorf("seeds 7 and 8 grow the same trees")
			}
		})
	}
}

// Predict gives PredictRow's numbers, bit for bit, whatever the thread count, across
// several row blocks, with missing values and level codes the model never saw.
func TestPredictEqualsPredictRow(t *testing.T) {
	g := genMixed(12, 400, 3, false)
	test := genMixed(13, 4711, 3, false) // several row blocks, and not a multiple of any small lane count
	cols := test.columns()
	// Unseen and odd codes for the categorical feature c2: the never-seen level "e", codes
	// past the level list, a fraction, a negative code.
	for i, v := range []float64{4, 5, 64, 1e9, 2.5, -1, -7, math.Inf(1)} {
		cols[2][i] = v
	}
	for _, classes := range []int{3, 0} {
		p := DefaultParams(MethodForest)
		p.Trees = 15
		m := train(t, g.dataset(t, classes), p)
		W := m.Width()
		want := make([]float64, test.rows*W)
		row := make([]float64, len(cols))
		for i := range test.rows {
			for f := range cols {
				row[f] = cols[f][i]
			}
			m.PredictRow(row, want[i*W:(i+1)*W])
		}
		for _, threads := range []int{0, 1, 2, 5} {
			got := make([]float64, test.rows*W)
			if err := m.Predict(cols, got, threads); err != nil {
				t.Fatal(err)
			}
			if !bitsEqual(got, want) {
				t.Errorf("%s, threads %d: Predict differs from PredictRow", m.Task, threads)
			}
		}
		if classes > 0 {
			for i := range test.rows {
				if s := sum(want[i*W : (i+1)*W]); math.Abs(s-1) > 1e-12 {
					t.Fatalf("row %d: class probabilities sum to %v", i, s)
				}
			}
		}
	}
}

// PredictRow does not allocate (its documented contract; the SQL host calls it per row).
func TestPredictRowAllocatesNothing(t *testing.T) {
	g := genMixed(14, 300, 3, false)
	p := DefaultParams(MethodForest)
	p.Trees = 10
	m := train(t, g.dataset(t, 3), p)
	row, dst := g.row(5), make([]float64, m.Width())
	if n := testing.AllocsPerRun(200, func() { m.PredictRow(row, dst) }); n != 0 {
		t.Errorf("PredictRow allocates %v times per call, want 0", n)
	}
}

// A row of weight 0 is as good as absent (SetWeights): a tree grown on all rows, without
// sampling, is the same with those rows as without them. The zero-weight rows include
// every row of the level "d" of c2 and rows with missing values, so that the bins and
// level sets cannot tell either.
func TestZeroWeightRowsAreAbsent(t *testing.T) {
	g := genMixed(15, 500, 2, true)
	for i := range g.rows {
		if g.cat["c2"][i] == 3 {
			g.w[i] = 0
		}
	}
	kept := g.subset(func(i int) bool { return g.w[i] > 0 })
	if kept.rows == g.rows || kept.rows < 200 {
		t.Fatalf("bad test data: %d of %d rows kept", kept.rows, g.rows)
	}
	for _, classes := range []int{2, 0} {
		p := DefaultParams(MethodTree)
		a := train(t, g.dataset(t, classes), p)
		b := train(t, kept.dataset(t, classes), p)
		if d := treeDiff(a.Trees[0], b.Trees[0]); d != "" {
			t.Errorf("%s: tree with zero-weight rows differs from the tree without them in %s", a.Task, d)
		}
		if !reflect.DeepEqual(a.Features, b.Features) {
			t.Errorf("%s: binning with zero-weight rows differs from the binning without them", a.Task)
		}
		if !bitsEqual(a.Importance.Impurity, b.Importance.Impurity) {
			t.Errorf("%s: importances differ", a.Task)
		}
	}
}

// Integer weights count as copies of a row: a tree grown on a data set where row i has
// weight k equals, up to rounding, the tree grown on the data set with k copies of row i.
// (With no more distinct values than bins, so the bins are the same.)
//
// Deep in a fully grown tree, a node often holds two distinct rows that either feature
// separates: the gains then tie exactly in real numbers, and rounding (which differs
// between weights and copies) picks the feature. So the depth-limited tree is compared
// node for node, and the fully grown one by the partition it makes of the training rows:
// every row must reach a leaf of the same value and cover.
func TestIntegerWeightsEqualCopies(t *testing.T) {
	r := newRand(16)
	const n = 150
	x, z, y, w := make([]float64, n), make([]float64, n), make([]int32, n), make([]float64, n)
	yr := make([]float64, n)
	var xc, zc, yrc []float64
	var yc []int32
	for i := range n {
		x[i] = float64(r.IntN(100)) / 10
		z[i] = float64(r.IntN(50))
		if r.Float64() < sigmoid(x[i]-5) {
			y[i] = 1
		}
		yr[i] = x[i] + 0.1*z[i] + r.NormFloat64()
		w[i] = float64(1 + r.IntN(3))
		for range int(w[i]) {
			xc, zc, yc, yrc = append(xc, x[i]), append(zc, z[i]), append(yc, y[i]), append(yrc, yr[i])
		}
	}
	build := func(x, z []float64, y []int32, yr, w []float64, classes bool) *Dataset {
		d := NewDataset(len(x))
		must(t, d.AddNumeric("x", x))
		must(t, d.AddNumeric("z", z))
		if classes {
			must(t, d.SetClassTarget("y", y, []string{"no", "yes"}))
		} else {
			must(t, d.SetRegressionTarget("y", yr))
		}
		must(t, d.SetWeights(w))
		return d
	}
	near := func(a, b float64) bool { return math.Abs(a-b) <= 1e-9*math.Max(1, math.Abs(b)) }
	for _, classes := range []bool{true, false} {
		for _, depth := range []int{4, 0} {
			p := DefaultParams(MethodTree)
			p.MaxDepth = depth
			a := train(t, build(x, z, y, yr, w, classes), p).Trees[0]
			b := train(t, build(xc, zc, yc, yrc, nil, classes), p).Trees[0]
			if len(a.Nodes) != len(b.Nodes) {
				t.Errorf("classes %v, max_depth %d: weighted tree has %d nodes, tree on copies %d", classes, depth, len(a.Nodes), len(b.Nodes))
				continue
			}
			if depth == 0 {
				for i := range n {
					row := []float64{x[i], z[i]}
					la, lb := a.Leaf(row), b.Leaf(row)
					if !near(a.Cover[la], b.Cover[lb]) || !near(a.NodeValue(la)[0], b.NodeValue(lb)[0]) {
						t.Errorf("classes %v: row %d reaches a leaf of cover %v, value %v weighted; %v, %v on copies",
							classes, i, a.Cover[la], a.NodeValue(la)[0], b.Cover[lb], b.NodeValue(lb)[0])
						break
					}
				}
				continue
			}
			if !reflect.DeepEqual(a.Nodes, b.Nodes) || !reflect.DeepEqual(a.LevelSets, b.LevelSets) {
				t.Errorf("classes %v, max_depth %d: weighted tree and tree on copies differ in structure", classes, depth)
				continue
			}
			for _, s := range []struct {
				name string
				a, b []float64
			}{{"gain", a.Gain, b.Gain}, {"cover", a.Cover, b.Cover}, {"value", a.Value, b.Value}} {
				for i := range s.a {
					if !near(s.a[i], s.b[i]) {
						t.Errorf("classes %v: %s[%d] = %v weighted, %v on copies", classes, s.name, i, s.a[i], s.b[i])
						break
					}
				}
			}
		}
	}
}

func must(t testing.TB, err error) {
	t.Helper()
	if err != nil {
		t.Fatal(err)
	}
}

// walkDefault follows the default direction from the root down to a leaf.
func walkDefault(tr *Tree) int {
	i := int32(0)
	for !tr.Nodes[i].IsLeaf() {
		if tr.Nodes[i].DefaultLeft {
			i = tr.Nodes[i].Left
		} else {
			i = tr.Nodes[i].Left + 1
		}
	}
	return int(i)
}

// A missing value at prediction follows each node's stored default direction, and the
// default is where training sent the rows with missing values: a fully grown tree fits its
// training rows, those with missing values included.
func TestMissingValuesFollowDefault(t *testing.T) {
	t.Run("one feature", func(t *testing.T) {
		// x ≤ 0.5 is class 0 and x > 0.5 class 1; the rows with x missing are class 1, so
		// the root must send missing values right, with the large values.
		r := newRand(17)
		const n = 250 // 225 distinct values: one bin each, so the root can cut at 0.5 exactly
		x, y := make([]float64, n), make([]int32, n)
		for i := range n {
			x[i] = r.Float64()
			if x[i] > 0.5 {
				y[i] = 1
			}
			if i%10 == 0 {
				x[i], y[i] = math.NaN(), 1
			}
		}
		d := NewDataset(n)
		must(t, d.AddNumeric("x", x))
		must(t, d.SetClassTarget("y", y, []string{"no", "yes"}))
		tr := train(t, d, DefaultParams(MethodTree)).Trees[0]
		root := tr.Nodes[0]
		if root.IsLeaf() || root.DefaultLeft || math.Abs(root.Threshold-0.5) > 0.01 {
			t.Fatalf("root: threshold %v, default left %v; want about 0.5, default right", root.Threshold, root.DefaultLeft)
		}
		leaf := tr.Leaf([]float64{math.NaN()})
		if want := walkDefault(tr); leaf != want {
			t.Errorf("NaN reaches node %d, the default path ends at %d", leaf, want)
		}
		if v := tr.NodeValue(leaf); v[1] != 1 {
			t.Errorf("NaN's leaf holds %v, want all class yes", v)
		}
	})
	t.Run("fits training rows", func(t *testing.T) {
		// Pure-noise labels make a deep tree with many splits on features that have
		// missing values; every distinct value has its own bin, so every row can be told
		// apart and a fully grown tree must fit all of them.
		g := genMixed(18, 500, 2, false)
		r := newRand(19)
		for i := range g.ycls {
			g.ycls[i] = int32(r.IntN(2))
		}
		x0 := g.num["x0"]
		for i := range x0 {
			if i%7 == 0 && !math.IsNaN(g.num["x1"][i]) {
				x0[i] = math.NaN() // never both x0 and x1 missing
			}
		}
		p := DefaultParams(MethodTree)
		p.Bins = MaxBins
		m := train(t, g.dataset(t, 2), p)
		wrong, withNaN := 0, 0
		for i := range g.rows {
			row := g.row(i)
			if math.IsNaN(row[0]) || math.IsNaN(row[1]) || math.IsNaN(row[2]) {
				withNaN++
			}
			pred := make([]float64, 2)
			if Class(m.PredictRow(row, pred)) != int(g.ycls[i]) {
				wrong++
			}
		}
		if withNaN < 100 {
			t.Fatalf("bad test data: %d rows with missing values", withNaN)
		}
		if wrong > 0 {
			t.Errorf("fully grown tree misfits %d of %d training rows (%d have missing values)", wrong, g.rows, withNaN)
		}
	})
	t.Run("no missing in training", func(t *testing.T) {
		// A node that saw no missing values sends them to its heavier child (grow.go),
		// ties to the left.
		g := genMixed(20, 400, 2, true)
		x1 := g.num["x1"]
		for i := range x1 {
			if math.IsNaN(x1[i]) {
				x1[i] = 0.5
			}
			if g.cat["c2"][i] < 0 {
				g.cat["c2"][i] = 0
			}
		}
		m := train(t, g.dataset(t, 0), DefaultParams(MethodTree))
		tr := m.Trees[0]
		for i, n := range tr.Nodes {
			if n.IsLeaf() {
				continue
			}
			if want := tr.Cover[n.Left] >= tr.Cover[n.Left+1]; n.DefaultLeft != want {
				t.Errorf("node %d: default left %v, covers %v and %v", i, n.DefaultLeft, tr.Cover[n.Left], tr.Cover[n.Left+1])
			}
		}
		// And a row of NaNs follows the defaults all the way down.
		nan := []float64{math.NaN(), math.NaN(), math.NaN(), math.NaN(), math.NaN()}
		if got, want := tr.Leaf(nan), walkDefault(tr); got != want {
			t.Errorf("all-missing row reaches %d, the default path ends at %d", got, want)
		}
	})
}

// A categorical value the split cannot place (a missing value, the code of a level never
// seen in training, a code past the level list, a non-integer) follows the node's default
// direction; seen levels follow the level set.
func TestUnseenLevelsFollowDefault(t *testing.T) {
	levels := []string{"A", "B", "C", "D", "E"} // E never occurs in training
	cases := []struct {
		name string
		// rows per level A…D, and the class of each level
		count   [4]int
		class   [4]int32
		missing int   // rows with a missing level, of class missCls
		missCls int32 //
		left    bool  // expected default direction
	}{
		// No missing values: the default is the heavier child. The split orders levels by
		// their share of class 1, so the class-0 levels {A, C} form the left child.
		{"left heavier", [4]int{30, 10, 30, 10}, [4]int32{0, 1, 0, 1}, 0, 0, true},
		{"right heavier", [4]int{10, 30, 10, 30}, [4]int32{0, 1, 0, 1}, 0, 0, false},
		// Missing values in training, all of class 1: they go with {B, D}, though the
		// left child is heavier.
		{"missing with class 1", [4]int{40, 10, 40, 10}, [4]int32{0, 1, 0, 1}, 10, 1, false},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			var codes, y []int32
			for l := range 4 {
				for range c.count[l] {
					codes, y = append(codes, int32(l)), append(y, c.class[l])
				}
			}
			for range c.missing {
				codes, y = append(codes, Missing), append(y, c.missCls)
			}
			d := NewDataset(len(codes))
			must(t, d.AddCategorical("c", codes, levels))
			must(t, d.SetClassTarget("y", y, []string{"no", "yes"}))
			m := train(t, d, DefaultParams(MethodTree))
			tr := m.Trees[0]
			root := tr.Nodes[0]
			if root.IsLeaf() || root.LevelSet < 0 {
				t.Fatalf("root is not a categorical split: %+v", root)
			}
			if len(tr.Nodes) != 3 {
				t.Errorf("%d nodes, want one split and two pure leaves", len(tr.Nodes))
			}
			if root.DefaultLeft != c.left {
				t.Errorf("default left %v, want %v", root.DefaultLeft, c.left)
			}
			def := root.Left + 1
			if root.DefaultLeft {
				def = root.Left
			}
			for _, x := range []float64{4, 5, 63, 64, 65, 1e9, 1.5, -1, -64, math.NaN(), math.Inf(1), math.Inf(-1)} {
				if got := tr.Leaf([]float64{x}); got != int(def) {
					t.Errorf("code %v reaches node %d, want the default child %d", x, got, def)
				}
			}
			for l, cls := range c.class {
				want := root.Left // class 0 levels form the left child
				if cls == 1 {
					want = root.Left + 1
				}
				if got := tr.Leaf([]float64{float64(l)}); got != int(want) {
					t.Errorf("level %s reaches node %d, want %d", levels[l], got, want)
				}
			}
		})
	}
}

// A categorical split is a subset split, not one level against the rest: when the levels
// {A, C} against {B, D} decide the target, one split separates them (Breiman et al.
// 1984, and Fisher 1958 for the ordering that finds it, as cited in grow.go). The level codes interleave, so
// no threshold on the codes could do it.
func TestCategoricalSubsetSplit(t *testing.T) {
	levels := []string{"A", "B", "C", "D"}
	r := newRand(21)
	const n = 200
	codes, cls := make([]int32, n), make([]int32, n)
	noise, yr := make([]float64, n), make([]float64, n)
	for i := range n {
		codes[i] = int32(i % 4)
		noise[i] = r.Float64()
		if codes[i] == 1 || codes[i] == 3 {
			cls[i], yr[i] = 1, 5
		} else {
			yr[i] = 1
		}
	}
	for _, classify := range []bool{true, false} {
		d := NewDataset(n)
		must(t, d.AddNumeric("noise", noise))
		must(t, d.AddCategorical("c", codes, levels))
		if classify {
			must(t, d.SetClassTarget("y", cls, []string{"no", "yes"}))
		} else {
			must(t, d.SetRegressionTarget("y", yr))
		}
		m := train(t, d, DefaultParams(MethodTree))
		tr := m.Trees[0]
		if len(tr.Nodes) != 3 {
			t.Errorf("%s: %d nodes, want a single split", m.Task, len(tr.Nodes))
		}
		root := tr.Nodes[0]
		if m.Features[root.Feature].Name != "c" || root.LevelSet < 0 {
			t.Fatalf("%s: root splits %s, want the categorical c", m.Task, m.Features[root.Feature].Name)
		}
		side := func(l int) int { return tr.Leaf([]float64{0.5, float64(l)}) }
		if side(0) != side(2) || side(1) != side(3) || side(0) == side(1) {
			t.Errorf("%s: levels reach leaves A:%d B:%d C:%d D:%d, want {A,C} and {B,D} apart", m.Task, side(0), side(1), side(2), side(3))
		}
		if g := tr.Gain[0]; classify && math.Abs(g-n/2) > 1e-9 {
			// Gini: n·(1/2) − 0 − 0, as the classes are balanced and the leaves pure.
			t.Errorf("root gain %v, want %v", g, n/2)
		}
	}
}

// Both importance measures put the informative features of a generated set (x0, x1, c2)
// above the noise features (x3, c4), for classification and regression.
func TestImportanceFindsInformativeFeatures(t *testing.T) {
	g := genMixed(22, 1500, 2, false)
	for _, classes := range []int{2, 0} {
		p := DefaultParams(MethodForest)
		p.Trees = 60
		m := train(t, g.dataset(t, classes), p)
		for _, imp := range []struct {
			name string
			v    []float64
		}{{"impurity", m.Importance.Impurity}, {"permutation", m.Importance.Permutation}} {
			if len(imp.v) != 5 {
				t.Fatalf("%s %s: %d values", m.Task, imp.name, len(imp.v))
			}
			weakest := min(imp.v[0], imp.v[1], imp.v[2])
			strongest := max(imp.v[3], imp.v[4])
			if !(weakest > strongest) {
				t.Errorf("%s %s importance %v: informative x0, x1, c2 not all above noise x3, c4", m.Task, imp.name, imp.v)
			}
		}
		if len(m.Importance.PermutationStd) != 5 {
			t.Errorf("%s: %d permutation standard deviations", m.Task, len(m.Importance.PermutationStd))
		}
	}
}

// bigTask is a data set on which training many trees takes seconds.
func bigTask(t testing.TB) *Dataset {
	g := genMixed(23, 2000, 2, false)
	return g.dataset(t, 2)
}

// Cancelling the context stops training: Train returns an error wrapping
// context.Canceled, no model, and not all trees were finished. (Timing is logged, not
// asserted.)
func TestCancelStopsTraining(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	p := DefaultParams(MethodForest)
	p.Trees = 3000 // a few seconds of work, so a cancellation that is ignored fails below
	p.Threads = 2
	calls := 0
	var cancelled time.Time
	p.Progress = func(done, total int) {
		calls++
		if done == 1 {
			cancelled = time.Now()
			cancel()
		}
	}
	m, err := Train(ctx, bigTask(t), p)
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("Train after cancel: error %v, want one wrapping context.Canceled", err)
	}
	if m != nil {
		t.Errorf("Train after cancel returned a model")
	}
	if calls >= p.Trees {
		t.Errorf("Progress called %d times for %d trees: training was not stopped", calls, p.Trees)
	}
	t.Logf("stopped %v after cancel, %d of %d trees done", time.Since(cancelled), calls, p.Trees)
}

// A context that is already cancelled stops Train before any work, whatever the number of
// cores: Train's contract is to return ctx.Err() when ctx is cancelled. One core
// (GOMAXPROCS 1) is what a host that pins the query to a core gives.
func TestTrainWithCancelledContext(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	d := genMixed(24, 200, 2, false).dataset(t, 2)
	for _, procs := range []int{runtime.GOMAXPROCS(0), 1} {
		prev := runtime.GOMAXPROCS(procs)
		for _, method := range []Method{MethodTree, MethodForest} {
			p := DefaultParams(method)
			if method == MethodForest {
				p.Trees = 5
			}
			m, err := Train(ctx, d, p)
			if !errors.Is(err, context.Canceled) || m != nil {
				t.Errorf("GOMAXPROCS %d, %s: Train with a cancelled context gave model %v, error %v; want no model and context.Canceled",
					procs, method, m != nil, err)
			}
		}
		runtime.GOMAXPROCS(prev)
	}
}

// Progress is called once per tree, with done counting up 1…Trees and total = Trees.
func TestProgressCountsTrees(t *testing.T) {
	d := genMixed(25, 300, 2, false).dataset(t, 2)
	for _, c := range []struct {
		method  Method
		trees   int
		threads int
	}{{MethodForest, 37, 2}, {MethodBagging, 5, 1}, {MethodTree, 1, 2}} {
		p := DefaultParams(c.method)
		p.Trees, p.Threads = c.trees, c.threads
		var got []int
		p.Progress = func(done, total int) {
			if total != c.trees {
				t.Errorf("%s: Progress total %d, want %d", c.method, total, c.trees)
			}
			got = append(got, done)
		}
		train(t, d, p)
		want := make([]int, c.trees)
		for i := range want {
			want[i] = i + 1
		}
		if !slices.Equal(got, want) {
			t.Errorf("%s: Progress saw done = %v, want 1…%d", c.method, got, c.trees)
		}
	}
}

// Structure of every grown tree (tree.go's layout; CART's definitions, Breiman et al.
// 1984): children come after their parent, side by side; a split's cover is the sum of
// its children's; class probabilities sum to 1; a regression node's value is the
// cover-weighted mean of its children's; leaves hold at least MinLeaf weight; depth stays
// within MaxDepth; gains are ≥ 0, 0 on leaves, and at least MinGain × root weight; on
// classification the gain equals W·I(node) − W_L·I(left) − W_R·I(right) for the impurity
// used.
func TestTreeStructure(t *testing.T) {
	g := genMixed(26, 600, 3, true)
	cases := []struct {
		name    string
		classes int
		edit    func(*Params)
	}{
		{"gini full", 3, func(p *Params) {}},
		{"entropy min_leaf 5", 3, func(p *Params) { p.Impurity, p.MinLeaf = Entropy, 5 }},
		{"gini depth 3", 3, func(p *Params) { p.MaxDepth = 3 }},
		{"gini min_gain", 3, func(p *Params) { p.MinGain = 0.002 }},
		{"regression min_leaf 7.5", 0, func(p *Params) { p.MinLeaf = 7.5 }},
		{"regression depth 4", 0, func(p *Params) { p.MaxDepth = 4 }},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			p := DefaultParams(MethodBagging)
			p.Trees = 4
			c.edit(&p)
			m := train(t, g.dataset(t, c.classes), p)
			full := DefaultParams(MethodBagging)
			full.Trees = 4
			ref := train(t, g.dataset(t, c.classes), full)
			for b, tr := range m.Trees {
				checkTree(t, m, tr, p)
				if p.MaxDepth > 0 && tr.Depth() != p.MaxDepth {
					t.Errorf("tree %d: depth %d, want exactly %d on noisy data", b, tr.Depth(), p.MaxDepth)
				}
				if (p.MinGain > 0 || p.MinLeaf > 1 || p.MaxDepth > 0) && tr.Leaves() >= ref.Trees[b].Leaves() {
					t.Errorf("tree %d: %d leaves, the unrestricted tree has %d: the control did nothing", b, tr.Leaves(), ref.Trees[b].Leaves())
				}
			}
		})
	}
}

func checkTree(t *testing.T, m *Model, tr *Tree, p Params) {
	t.Helper()
	W := tr.Width
	if W != m.Width() || len(tr.Value) != W*len(tr.Nodes) || len(tr.Gain) != len(tr.Nodes) || len(tr.Cover) != len(tr.Nodes) {
		t.Fatalf("tree arrays: width %d, %d nodes, %d values, %d gains, %d covers", W, len(tr.Nodes), len(tr.Value), len(tr.Gain), len(tr.Cover))
	}
	impurity := gini
	if p.Impurity == Entropy {
		impurity = entropy
	}
	for i, n := range tr.Nodes {
		v := tr.NodeValue(i)
		if m.Task == Classification {
			if s := sum(v); math.Abs(s-1) > 1e-12 {
				t.Fatalf("node %d: class probabilities sum to %v", i, s)
			}
		}
		if n.IsLeaf() {
			if tr.Gain[i] != 0 {
				t.Fatalf("leaf %d: gain %v", i, tr.Gain[i])
			}
			if tr.Cover[i] < p.MinLeaf {
				t.Fatalf("leaf %d: cover %v below min_leaf %v", i, tr.Cover[i], p.MinLeaf)
			}
			continue
		}
		l, r := int(n.Left), int(n.Left)+1
		if l <= i || r >= len(tr.Nodes) {
			t.Fatalf("node %d: children %d, %d", i, l, r)
		}
		if (n.LevelSet >= 0) != (m.Features[n.Feature].Kind == Categorical) {
			t.Fatalf("node %d: level set %d on a %s feature", i, n.LevelSet, m.Features[n.Feature].Kind)
		}
		cl, cr, c := tr.Cover[l], tr.Cover[r], tr.Cover[i]
		if math.Abs(cl+cr-c) > 1e-9*c {
			t.Fatalf("node %d: cover %v, children %v + %v", i, c, cl, cr)
		}
		if tr.Gain[i] < 0 {
			t.Fatalf("node %d: gain %v < 0", i, tr.Gain[i])
		}
		if tr.Gain[i] < p.MinGain*tr.Cover[0]*(1-1e-9) {
			t.Fatalf("node %d: gain %v below min_gain %v × root weight %v", i, tr.Gain[i], p.MinGain, tr.Cover[0])
		}
		if m.Task == Regression {
			mean := (cl*tr.NodeValue(l)[0] + cr*tr.NodeValue(r)[0]) / c
			if math.Abs(mean-v[0]) > 1e-9*math.Max(1, math.Abs(v[0])) {
				t.Fatalf("node %d: value %v, children's weighted mean %v", i, v[0], mean)
			}
			continue
		}
		want := c*impurity(v) - cl*impurity(tr.NodeValue(l)) - cr*impurity(tr.NodeValue(r))
		if math.Abs(tr.Gain[i]-math.Max(want, 0)) > 1e-9*c {
			t.Fatalf("node %d: gain %v, impurity decrease %v", i, tr.Gain[i], want)
		}
	}
	if p.MaxDepth > 0 && tr.Depth() > p.MaxDepth {
		t.Fatalf("depth %d beyond max_depth %d", tr.Depth(), p.MaxDepth)
	}
}

// gini is 1 − Σ p_k² (Breiman et al. 1984).
func gini(p []float64) float64 {
	s := 1.0
	for _, v := range p {
		s -= v * v
	}
	return s
}

// entropy is −Σ p_k ln p_k, natural log (Shannon 1948; the unit only scales the gains).
func entropy(p []float64) float64 {
	s := 0.0
	for _, v := range p {
		if v > 0 {
			s -= v * math.Log(v)
		}
	}
	return s
}

// Gains on examples small enough to work by hand: x = 1, 2, 3, 4, with the two lower
// rows one class (or value) and the two upper ones the other. The root splits at 2.5 (the
// midpoint between observed values) into pure leaves, so its gain is the root's whole
// weighted impurity: Gini 4·(1/2), entropy 4·ln 2, squared error Σ(y − ȳ)² = 4·1².
func TestGainByHand(t *testing.T) {
	x := []float64{1, 2, 3, 4}
	for _, c := range []struct {
		name string
		imp  Impurity
		reg  bool
		want float64
	}{
		{"gini", Gini, false, 2},
		{"entropy", Entropy, false, 4 * math.Ln2},
		{"squared error", "", true, 4},
	} {
		d := NewDataset(4)
		must(t, d.AddNumeric("x", x))
		if c.reg {
			must(t, d.SetRegressionTarget("y", []float64{1, 1, 3, 3}))
		} else {
			must(t, d.SetClassTarget("y", []int32{0, 0, 1, 1}, []string{"a", "b"}))
		}
		p := DefaultParams(MethodTree)
		p.Impurity = c.imp
		tr := train(t, d, p).Trees[0]
		if len(tr.Nodes) != 3 || tr.Nodes[0].Threshold != 2.5 {
			t.Errorf("%s: %d nodes, root threshold %v; want one split at 2.5", c.name, len(tr.Nodes), tr.Nodes[0].Threshold)
		}
		if math.Abs(tr.Gain[0]-c.want) > 1e-12 {
			t.Errorf("%s: root gain %v, want %v", c.name, tr.Gain[0], c.want)
		}
	}
}

// Bagging that draws every row once is the single tree, repeated: with all rows and
// every feature there is nothing random left. And a forest that draws every feature at
// each split is bagging (Breiman 2001: the random forest with every feature at each split is bagging;
// from memory, and common practice).
func TestDegenerateEnsembles(t *testing.T) {
	g := genMixed(27, 400, 3, true)
	for _, classes := range []int{3, 0} {
		d := g.dataset(t, classes)
		single := train(t, d, DefaultParams(MethodTree)).Trees[0]
		p := DefaultParams(MethodBagging)
		p.Trees, p.RowFraction, p.WithReplacement = 3, 1, false
		pasted := train(t, d, p)
		for b, tr := range pasted.Trees {
			if diff := treeDiff(single, tr); diff != "" {
				t.Errorf("%s: bagging tree %d on all rows differs from the single tree in %s", pasted.Task, b, diff)
			}
		}
		if pasted.OOB.Scored != 0 {
			t.Errorf("%s: %d rows scored out of bag, but every tree drew every row", pasted.Task, pasted.OOB.Scored)
		}

		bp := DefaultParams(MethodBagging)
		bp.Trees, bp.Seed = 6, 9
		fp := bp
		fp.Method, fp.FeaturesPerSplit = MethodForest, float64(d.Features())
		bag, forest := train(t, d, bp), train(t, d, fp)
		for b := range bag.Trees {
			if diff := treeDiff(bag.Trees[b], forest.Trees[b]); diff != "" {
				t.Errorf("%s: forest with every feature per split, tree %d differs from bagging in %s", bag.Task, b, diff)
			}
		}
	}
}

// The OOB curve ends at the headline metric; rows out of bag of no tree are NaN and not
// scored; votes never exceed the trees.
func TestOOBBookkeeping(t *testing.T) {
	g := genMixed(28, 500, 2, true)
	for _, classes := range []int{2, 0} {
		p := DefaultParams(MethodForest)
		p.Trees = 3 // few trees, so some rows are out of bag of none
		m := train(t, g.dataset(t, classes), p)
		o := m.OOB
		if len(o.Curve) != p.Trees || len(o.Votes) != g.rows || len(o.Value) != g.rows*m.Width() {
			t.Fatalf("%s: curve %d, votes %d, values %d", m.Task, len(o.Curve), len(o.Votes), len(o.Value))
		}
		head := MetricValue(o.Metrics, o.CurveMetric)
		if last := o.Curve[len(o.Curve)-1]; math.Abs(last-head) > 1e-12*math.Max(1, head) {
			t.Errorf("%s: curve ends at %v, %s is %v", m.Task, last, o.CurveMetric, head)
		}
		if o.Metrics[0].Name != o.CurveMetric {
			t.Errorf("%s: headline metric %q, curve metric %q", m.Task, o.Metrics[0].Name, o.CurveMetric)
		}
		scored, none := 0, 0
		for i, v := range o.Votes {
			if v < 0 || int(v) > p.Trees {
				t.Fatalf("row %d: %d votes", i, v)
			}
			if g.w[i] > 0 && v > 0 {
				scored++
			}
			if v == 0 {
				none++
				if !math.IsNaN(o.Value[i*m.Width()]) {
					t.Errorf("row %d: no votes but value %v", i, o.Value[i*m.Width()])
				}
			}
		}
		if none == 0 {
			t.Errorf("%s: every row out of bag of some tree with 3 trees; the test data cannot check the NaNs", m.Task)
		}
		if o.Scored != scored {
			t.Errorf("%s: Scored %d, rows with weight and votes %d", m.Task, o.Scored, scored)
		}
	}
}
