package forest

import (
	"bytes"
	"context"
	"encoding/json"
	"math"
	"strings"
	"testing"
)

// adaLine is a linearly separable 2-D set: x1, x2 uniform on [−1, 1], class "b" when
// x1 + 0.6·x2 > 0.1, a line not aligned with either axis.
func adaLine(t testing.TB, n int) (*Dataset, [][]float64) {
	t.Helper()
	r := newRand(7)
	x1, x2 := make([]float64, n), make([]float64, n)
	y := make([]int32, n)
	for i := range n {
		x1[i], x2[i] = 2*r.Float64()-1, 2*r.Float64()-1
		if x1[i]+0.6*x2[i] > 0.1 {
			y[i] = 1
		}
	}
	d := NewDataset(n)
	if err := d.AddNumeric("x1", x1); err != nil {
		t.Fatal(err)
	}
	if err := d.AddNumeric("x2", x2); err != nil {
		t.Fatal(err)
	}
	if err := d.SetClassTarget("y", y, []string{"a", "b"}); err != nil {
		t.Fatal(err)
	}
	return d, [][]float64{x1, x2}
}

func adaTrain(t testing.TB, d *Dataset, edit func(*Params)) *Model {
	t.Helper()
	p := DefaultParams(MethodAdaBoost)
	p.Threads = 2
	if edit != nil {
		edit(&p)
	}
	m, err := Train(context.Background(), d, p)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// adaFirst is m with only its first T trees.
func adaFirst(m *Model, T int) *Model {
	c := *m
	c.Trees = m.Trees[:T]
	c.AdaBoost = &AdaBoost{Alpha: m.AdaBoost.Alpha[:T], Error: m.AdaBoost.Error[:T]}
	return &c
}

// adaTrainError is the share of rows whose predicted class is not the target's.
func adaTrainError(t testing.TB, m *Model, cols [][]float64, y []int32) float64 {
	t.Helper()
	W := m.Width()
	out := make([]float64, len(y)*W)
	if err := m.Predict(cols, out, 2); err != nil {
		t.Fatal(err)
	}
	bad := 0
	for i, c := range y {
		if Class(out[i*W:(i+1)*W]) != int(c) {
			bad++
		}
	}
	return float64(bad) / float64(len(y))
}

// Freund & Schapire (1997), Theorem 6: discrete AdaBoost's training error after T
// rounds is at most Π_t 2·√(ε_t(1−ε_t)), with α_t = ½ln((1−ε_t)/ε_t). For two classes
// and learning rate 1, SAMME (Zhu et al. 2009) reweights the rows exactly as discrete
// AdaBoost does (after rescaling, the misclassified rows hold half the weight either
// way), so it grows the same trees with the same ε_t, and its α_t = ln((1−ε_t)/ε_t) is
// twice AdaBoost's: the weighted vote picks the same class, and the bound holds as it
// stands. (The bound counts a tied vote as an error; ours may break a tie either way,
// which only lowers the error.)
func TestAdaBoostTrainingErrorBound(t *testing.T) {
	d, cols := adaLine(t, 400)
	y := d.target.codes
	m := adaTrain(t, d, func(p *Params) { p.Trees = 50 })
	if len(m.Trees) != 50 {
		t.Fatalf("%d trees, want 50 (no round should be perfect or at chance)", len(m.Trees))
	}
	bound := 1.0
	errs := make([]float64, 51)
	for T := 1; T <= 50; T++ {
		e := m.AdaBoost.Error[T-1]
		bound *= 2 * math.Sqrt(e*(1-e))
		errs[T] = adaTrainError(t, adaFirst(m, T), cols, y)
		if errs[T] > bound {
			t.Errorf("after %d rounds: training error %v above the bound %v", T, errs[T], bound)
		}
	}
	t.Logf("training error after 1, 5, 10, 20, 50 rounds: %v %v %v %v %v; bound at 50: %.3g",
		errs[1], errs[5], errs[10], errs[20], errs[50], bound)
	// The error goes towards 0 as rounds grow (the bound is what forces it there).
	if !(errs[50] <= errs[10] && errs[10] <= errs[1] && errs[50] < errs[1]/4) {
		t.Errorf("training error does not fall: %v after 1 round, %v after 10, %v after 50", errs[1], errs[10], errs[50])
	}
}

// Iris with stumps × 100 rounds of SAMME reaches the training accuracy of scikit-learn's
// AdaBoostClassifier(algorithm='SAMME', n_estimators=100, learning_rate=1,
// estimator=DecisionTreeClassifier(max_depth=1)) within 0.02 (reference.json,
// "iris_adaboost", from testdata/reference/make_reference.py).
func TestAdaBoostIrisSAMME(t *testing.T) {
	var ref struct {
		TrainAccuracy float64 `json:"train_accuracy"`
	}
	if err := json.Unmarshal(reference(t)["iris_adaboost"], &ref); err != nil {
		t.Fatal(err)
	}
	iris := readTable(t, "iris.csv")
	d := iris.dataset(t, "species")
	m := adaTrain(t, d, nil)
	acc := 1 - adaTrainError(t, m, iris.columns(m), d.target.codes)
	t.Logf("training accuracy %v with %d trees (scikit-learn: %v)", acc, len(m.Trees), ref.TrainAccuracy)
	if acc < ref.TrainAccuracy-0.02 || acc < 0.95 {
		t.Errorf("training accuracy %v; scikit-learn reaches %v", acc, ref.TrainAccuracy)
	}
	// Importance is α-weighted: the petal measurements carry Iris.
	imp := m.Importance.Impurity
	if imp[2]+imp[3] < 0.5 {
		t.Errorf("impurity importance %v: petal features below half", imp)
	}
}

// The model does not depend on the thread count, and PredictRow, Predict and
// PredictBlock agree bit for bit, PredictRow without allocating.
func TestAdaBoostDeterministicAndPredict(t *testing.T) {
	iris := readTable(t, "iris.csv")
	d := iris.dataset(t, "species")
	for _, depth := range []int{1, 3} {
		var enc [2][]byte
		for k, th := range []int{1, 2} {
			m := adaTrain(t, d, func(p *Params) { p.Threads, p.MaxDepth, p.Trees, p.LearningRate = th, depth, 30, 0.5 })
			enc[k] = encMust(t, m)
		}
		if !bytes.Equal(enc[0], enc[1]) {
			t.Errorf("depth %d: 1 and 2 threads give different models", depth)
		}
		m, err := Decode(enc[0])
		if err != nil {
			t.Fatal(err)
		}
		cols := iris.columns(m)
		block, rows := encPredictions(t, m, cols)
		encSameFloats(t, "Predict against PredictRow", block, rows)
		for i := 0; i < len(rows); i += 3 {
			s := rows[i] + rows[i+1] + rows[i+2]
			if math.Abs(s-1) > 1e-12 {
				t.Fatalf("row %d: probabilities sum to %v", i/3, s)
			}
		}
		row, dst := []float64{5.9, 3, 4.2, 1.5}, make([]float64, 3)
		if a := testing.AllocsPerRun(100, func() { m.PredictRow(row, dst) }); a != 0 {
			t.Errorf("PredictRow allocates %v times", a)
		}
	}
}

// A perfect first tree ends training with a finite α and zero training error.
func TestAdaBoostPerfectTree(t *testing.T) {
	d := NewDataset(6)
	if err := d.AddNumeric("x", []float64{1, 2, 3, 4, 5, 6}); err != nil {
		t.Fatal(err)
	}
	if err := d.SetClassTarget("y", []int32{0, 0, 0, 1, 1, 1}, []string{"a", "b"}); err != nil {
		t.Fatal(err)
	}
	m := adaTrain(t, d, nil)
	a := m.AdaBoost
	if len(m.Trees) != 1 || a.Error[0] != 0 || math.IsInf(a.Alpha[0], 0) || a.Alpha[0] < 20 {
		t.Fatalf("%d trees, errors %v, α %v", len(m.Trees), a.Error, a.Alpha)
	}
	if e := adaTrainError(t, m, [][]float64{{1, 2, 3, 4, 5, 6}}, d.target.codes); e != 0 {
		t.Errorf("training error %v", e)
	}
}

// A first tree no better than chance is an error; controls that do not apply are
// refused by name; a numeric target is refused.
func TestAdaBoostRefusals(t *testing.T) {
	d := NewDataset(4)
	if err := d.AddNumeric("x", []float64{1, 1, 1, 1}); err != nil {
		t.Fatal(err)
	}
	if err := d.SetClassTarget("y", []int32{0, 1, 0, 1}, []string{"a", "b"}); err != nil {
		t.Fatal(err)
	}
	if _, err := Train(context.Background(), d, DefaultParams(MethodAdaBoost)); err == nil || !strings.Contains(err.Error(), "no better than chance") {
		t.Errorf("chance first tree: %v", err)
	}
	iris := readTable(t, "iris.csv")
	for _, c := range []struct {
		edit func(*Params)
		want string
	}{
		{func(p *Params) { p.Loss = LossLogistic }, "loss"},
		{func(p *Params) { p.HoldoutFraction = 0.2 }, "holdout_fraction"},
		{func(p *Params) { p.RowFraction = 0.5 }, "row_fraction"},
		{func(p *Params) { p.WithReplacement = true }, "with_replacement"},
		{func(p *Params) { p.FeaturesPerSplit = 2 }, "features_per_split"},
		{func(p *Params) { p.LearningRate = 0 }, "learning_rate"},
		{func(p *Params) { p.Task = Regression }, "classifies"},
	} {
		p := DefaultParams(MethodAdaBoost)
		c.edit(&p)
		if _, err := Train(context.Background(), iris.dataset(t, "species"), p); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("want an error naming %q, got %v", c.want, err)
		}
	}
	if _, err := Train(context.Background(), iris.dataset(t, "petal_width"), DefaultParams(MethodAdaBoost)); err == nil || !strings.Contains(err.Error(), "numeric") {
		t.Errorf("numeric target: %v", err)
	}
}

// Decode refuses an α that is not finite and above 0, and records that do not fit.
func TestAdaBoostDecodeChecksAlpha(t *testing.T) {
	d, _ := adaLine(t, 100)
	m := adaTrain(t, d, func(p *Params) { p.Trees = 3 })
	for _, bad := range []float64{math.NaN(), math.Inf(1), 0, -1} {
		c := *m
		c.AdaBoost = &AdaBoost{Alpha: append([]float64(nil), m.AdaBoost.Alpha...), Error: m.AdaBoost.Error}
		c.AdaBoost.Alpha[1] = bad
		if _, err := Decode(c.encode()); err == nil || !strings.Contains(err.Error(), "α") {
			t.Errorf("α %v: %v", bad, err)
		}
	}
	c := *m
	c.AdaBoost = nil
	if _, err := Decode(c.encode()); err == nil {
		t.Error("an adaboost model without its record decoded")
	}
}
