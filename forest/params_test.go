package forest

import (
	"context"
	"encoding/json"
	"errors"
	"math"
	"strings"
	"testing"
)

// Every control out of its range is refused with an error that names the control (by
// its SQL spelling), and the edges of each range are accepted.
func TestParamsValidate(t *testing.T) {
	cases := []struct {
		name string
		edit func(*Params)
		want string // a word the error must contain; "" for no error
	}{
		{"defaults", func(p *Params) {}, ""},
		{"trees 0", func(p *Params) { p.Trees = 0 }, "trees"},
		{"trees -3", func(p *Params) { p.Trees = -3 }, "trees"},
		{"max_depth -1", func(p *Params) { p.MaxDepth = -1 }, "max_depth"},
		{"max_depth 0 (unlimited)", func(p *Params) { p.MaxDepth = 0 }, ""},
		{"min_leaf 0", func(p *Params) { p.MinLeaf = 0 }, "min_leaf"},
		{"min_leaf -1", func(p *Params) { p.MinLeaf = -1 }, "min_leaf"},
		{"min_leaf NaN", func(p *Params) { p.MinLeaf = math.NaN() }, "min_leaf"},
		{"min_leaf +Inf", func(p *Params) { p.MinLeaf = math.Inf(1) }, "min_leaf"},
		{"min_leaf 0.5", func(p *Params) { p.MinLeaf = 0.5 }, ""},
		{"min_gain -0.1", func(p *Params) { p.MinGain = -0.1 }, "min_gain"},
		{"min_gain NaN", func(p *Params) { p.MinGain = math.NaN() }, "min_gain"},
		{"row_fraction 0", func(p *Params) { p.RowFraction = 0 }, "row_fraction"},
		{"row_fraction 1.5", func(p *Params) { p.RowFraction = 1.5 }, "row_fraction"},
		{"row_fraction NaN", func(p *Params) { p.RowFraction = math.NaN() }, "row_fraction"},
		{"row_fraction 1", func(p *Params) { p.RowFraction = 1 }, ""},
		{"row_fraction 0.01", func(p *Params) { p.RowFraction = 0.01 }, ""},
		{"bins 1", func(p *Params) { p.Bins = 1 }, "bins"},
		{"bins 65536", func(p *Params) { p.Bins = 65536 }, "bins"},
		{"bins 2", func(p *Params) { p.Bins = 2 }, ""},
		{"bins 65535", func(p *Params) { p.Bins = MaxBins }, ""},
		{"features_per_split 2.5", func(p *Params) { p.FeaturesPerSplit = 2.5 }, "features_per_split"},
		{"features_per_split -1", func(p *Params) { p.FeaturesPerSplit = -1 }, "features_per_split"},
		{"features_per_split NaN", func(p *Params) { p.FeaturesPerSplit = math.NaN() }, "features_per_split"},
		{"features_per_split +Inf", func(p *Params) { p.FeaturesPerSplit = math.Inf(1) }, "features_per_split"},
		{"features_per_split 0.3", func(p *Params) { p.FeaturesPerSplit = 0.3 }, ""},
		{"features_per_split 7", func(p *Params) { p.FeaturesPerSplit = 7 }, ""},
		{"threads -1", func(p *Params) { p.Threads = -1 }, "threads"},
		{"method unknown", func(p *Params) { p.Method = "stacking" }, "method"},
		{"method empty", func(p *Params) { p.Method = "" }, "method"},
		{"task unknown", func(p *Params) { p.Task = "ranking" }, "task"},
		{"impurity unknown", func(p *Params) { p.Impurity = "misclassification" }, "impurity"},
		{"impurity entropy", func(p *Params) { p.Impurity = Entropy }, ""},
		{"task regression", func(p *Params) { p.Task = Regression }, ""},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			p := DefaultParams(MethodForest)
			c.edit(&p)
			err := p.Validate()
			switch {
			case c.want == "" && err != nil:
				t.Errorf("Validate: %v, want no error", err)
			case c.want != "" && err == nil:
				t.Errorf("Validate: no error, want one naming %s", c.want)
			case c.want != "" && !strings.Contains(err.Error(), c.want):
				t.Errorf("Validate: %q does not name %s", err, c.want)
			}
			if c.want == "" {
				return
			}
			// Train refuses the same controls before touching the data.
			if _, err := Train(context.Background(), NewDataset(0), p); err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("Train: %v, want an error naming %s", err, c.want)
			}
		})
	}
	for _, m := range []Method{MethodTree, MethodBagging, MethodForest, MethodBoosting} {
		if err := DefaultParams(m).Validate(); err != nil {
			t.Errorf("DefaultParams(%s): %v", m, err)
		}
	}
	p := DefaultParams(MethodTree)
	p.Trees = 2
	if err := p.Validate(); err == nil || !strings.Contains(err.Error(), "trees") {
		t.Errorf("method tree with 2 trees: %v, want an error naming trees", err)
	}
}

// The checks that need the data run in Train: features per split against the number of
// features, and an explicit count on a method that considers every feature.
func TestFeaturesPerSplitAgainstData(t *testing.T) {
	d := genMixed(41, 100, 2, false).dataset(t, 2) // 5 features
	for _, c := range []struct {
		method Method
		fps    float64
		ok     bool
	}{
		{MethodForest, 5, true},
		{MethodForest, 6, false},
		{MethodForest, 100, false},
		{MethodForest, 0.99, true},
		{MethodBagging, 3, false},
		{MethodBagging, 5, true}, // every feature: what bagging does anyway
		{MethodTree, 2, false},
	} {
		p := DefaultParams(c.method)
		p.Trees = min(p.Trees, 3)
		p.FeaturesPerSplit = c.fps
		_, err := Train(context.Background(), d, p)
		if c.ok && err != nil {
			t.Errorf("%s, features_per_split %v: %v", c.method, c.fps, err)
		}
		if !c.ok && (err == nil || !strings.Contains(err.Error(), "features_per_split")) {
			t.Errorf("%s, features_per_split %v: %v, want an error naming features_per_split", c.method, c.fps, err)
		}
	}
}

// The default features per split are ⌊√p⌋ for classification and ⌊p/3⌋ for regression
// (Breiman 2001; the reference library agrees: reference.json gives 5 of 30 features for
// breast cancer and 3 of 10 for Friedman #1, scikit-learn 1.2.1); fractions take that share
// of p rounded down; never fewer than 1.
func TestFeaturesPerSplitDefaults(t *testing.T) {
	var ref struct {
		BC struct {
			K int `json:"features_per_split"`
		} `json:"breast_cancer_forest_oob"`
		F1 struct {
			K int `json:"features_per_split"`
		} `json:"friedman1_forest"`
	}
	raw, err := json.Marshal(reference(t))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(raw, &ref); err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		task     Task
		fps      float64
		features int
		want     int
	}{
		{Classification, 0, 30, ref.BC.K},
		{Regression, 0, 10, ref.F1.K},
		{Classification, 0, 4, 2},
		{Classification, 0, 1, 1},
		{Regression, 0, 2, 1}, // ⌊2/3⌋ = 0, raised to 1
		{Regression, 0.5, 10, 5},
		{Classification, 0.01, 10, 1},
		{Classification, 3, 10, 3},
	}
	for _, c := range cases {
		p := DefaultParams(MethodForest)
		p.FeaturesPerSplit = c.fps
		got, err := p.featuresPerSplit(c.task, c.features)
		if err != nil || got != c.want {
			t.Errorf("%s, %v of %d features: %d (%v), want %d", c.task, c.fps, c.features, got, err, c.want)
		}
	}
	if ref.BC.K != 5 || ref.F1.K != 3 {
		t.Errorf("reference.json features_per_split %d and %d, expected 5 and 3", ref.BC.K, ref.F1.K)
	}
}

// Bad data is refused with an error that wraps ErrData and names what is wrong: the
// column, and the row where there is one.
func TestDatasetErrors(t *testing.T) {
	two := []string{"no", "yes"}
	cases := []struct {
		name string
		do   func() error
		want []string
	}{
		{"numeric length", func() error {
			return NewDataset(3).AddNumeric("age", []float64{1, 2})
		}, []string{`"age"`, "2 rows", "want 3"}},
		{"categorical length", func() error {
			return NewDataset(3).AddCategorical("colour", []int32{0, 1, 0, 1}, two)
		}, []string{`"colour"`, "4 rows"}},
		{"code out of range", func() error {
			return NewDataset(4).AddCategorical("colour", []int32{0, 1, 2, 1}, two)
		}, []string{`"colour"`, "row 2", "code 2"}},
		{"duplicate feature", func() error {
			d := NewDataset(2)
			must(t, d.AddNumeric("a", []float64{1, 2}))
			return d.AddNumeric("a", []float64{1, 2})
		}, []string{`"a"`}},
		{"class target length", func() error {
			return NewDataset(3).SetClassTarget("y", []int32{0, 1}, two)
		}, []string{`"y"`, "2 rows"}},
		{"class target code out of range", func() error {
			return NewDataset(3).SetClassTarget("y", []int32{0, 1, 5}, two)
		}, []string{`"y"`, "row 2"}},
		{"class target missing", func() error {
			return NewDataset(3).SetClassTarget("y", []int32{0, Missing, 1}, two)
		}, []string{`"y"`, "row 1", "missing"}},
		{"regression target NaN", func() error {
			return NewDataset(3).SetRegressionTarget("price", []float64{1, math.NaN(), 3})
		}, []string{`"price"`, "row 1"}},
		{"regression target Inf", func() error {
			return NewDataset(3).SetRegressionTarget("price", []float64{1, 2, math.Inf(-1)})
		}, []string{`"price"`, "row 2"}},
		{"regression target length", func() error {
			return NewDataset(3).SetRegressionTarget("price", []float64{1})
		}, []string{`"price"`, "1 rows"}},
		{"negative weight", func() error {
			return NewDataset(3).SetWeights([]float64{1, -0.5, 1})
		}, []string{"weight", "row 1"}},
		{"NaN weight", func() error {
			return NewDataset(3).SetWeights([]float64{1, 1, math.NaN()})
		}, []string{"weight", "row 2"}},
		{"infinite weight", func() error {
			return NewDataset(3).SetWeights([]float64{math.Inf(1), 1, 1})
		}, []string{"weight", "row 0"}},
		{"weights length", func() error {
			return NewDataset(3).SetWeights([]float64{1})
		}, []string{"weights", "1 rows"}},
		{"single class", func() error {
			d := NewDataset(3)
			must(t, d.AddNumeric("x", []float64{1, 2, 3}))
			must(t, d.SetClassTarget("y", []int32{1, 1, 1}, two))
			_, err := Train(context.Background(), d, DefaultParams(MethodTree))
			return err
		}, []string{`"y"`, "single class"}},
		{"single class with weight", func() error {
			// The second class is there, but only on a row of weight 0.
			d := NewDataset(3)
			must(t, d.AddNumeric("x", []float64{1, 2, 3}))
			must(t, d.SetClassTarget("y", []int32{1, 0, 1}, two))
			must(t, d.SetWeights([]float64{1, 0, 1}))
			_, err := Train(context.Background(), d, DefaultParams(MethodTree))
			return err
		}, []string{`"y"`, "single class"}},
		{"all weights zero", func() error {
			d := NewDataset(2)
			must(t, d.AddNumeric("x", []float64{1, 2}))
			must(t, d.SetClassTarget("y", []int32{1, 0}, two))
			must(t, d.SetWeights([]float64{0, 0}))
			_, err := Train(context.Background(), d, DefaultParams(MethodTree))
			return err
		}, []string{"weight 0"}},
		{"no target", func() error {
			d := NewDataset(2)
			must(t, d.AddNumeric("x", []float64{1, 2}))
			_, err := Train(context.Background(), d, DefaultParams(MethodTree))
			return err
		}, []string{"no target"}},
		{"target is a feature", func() error {
			d := NewDataset(2)
			must(t, d.AddNumeric("x", []float64{1, 2}))
			must(t, d.SetRegressionTarget("x", []float64{1, 2}))
			_, err := Train(context.Background(), d, DefaultParams(MethodTree))
			return err
		}, []string{`"x"`}},
		{"classification of a numeric target", func() error {
			d := NewDataset(2)
			must(t, d.AddNumeric("x", []float64{1, 2}))
			must(t, d.SetRegressionTarget("y", []float64{1, 2}))
			p := DefaultParams(MethodTree)
			p.Task = Classification
			_, err := Train(context.Background(), d, p)
			return err
		}, []string{`"y"`, "numeric"}},
		{"regression of classes", func() error {
			d := NewDataset(2)
			must(t, d.AddNumeric("x", []float64{1, 2}))
			must(t, d.SetClassTarget("y", []int32{0, 1}, two))
			p := DefaultParams(MethodTree)
			p.Task = Regression
			_, err := Train(context.Background(), d, p)
			return err
		}, []string{`"y"`, "classes"}},
		{"no rows", func() error {
			d := NewDataset(0)
			must(t, d.AddNumeric("x", nil))
			must(t, d.SetRegressionTarget("y", nil))
			_, err := Train(context.Background(), d, DefaultParams(MethodTree))
			return err
		}, []string{"no rows"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			err := c.do()
			if err == nil {
				t.Fatalf("no error, want one containing %q", c.want)
			}
			if !errors.Is(err, ErrData) {
				t.Errorf("%v does not wrap ErrData", err)
			}
			for _, w := range c.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("%q does not contain %q", err, w)
				}
			}
		})
	}
}

// Predict refuses inputs of the wrong shape, naming the column.
func TestPredictErrors(t *testing.T) {
	g := genMixed(42, 200, 2, false)
	p := DefaultParams(MethodForest)
	p.Trees = 3
	m := train(t, g.dataset(t, 2), p)
	cols := g.columns()
	out := make([]float64, 2*g.rows)
	if err := m.Predict(cols[:4], out, 1); err == nil || !strings.Contains(err.Error(), "4 columns") {
		t.Errorf("4 columns: %v", err)
	}
	short := append([][]float64(nil), cols...)
	short[3] = short[3][:10]
	if err := m.Predict(short, out, 1); err == nil || !strings.Contains(err.Error(), `"x3"`) {
		t.Errorf("short column: %v, want an error naming x3", err)
	}
	if err := m.Predict(cols, out[:2*g.rows-1], 1); err == nil || !strings.Contains(err.Error(), "output") {
		t.Errorf("short output: %v", err)
	}
}
