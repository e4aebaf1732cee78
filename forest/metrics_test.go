package forest

import (
	"math"
	"testing"
)

// AUC on examples small enough to count by hand: the share of (positive, negative) pairs
// in which the positive scores higher, a tie counting one half (the Mann–Whitney
// statistic; Hanley & McNeil 1982, Radiology 143:29–36, citation from memory).
func TestAUC(t *testing.T) {
	nan := math.NaN()
	cases := []struct {
		name   string
		score  []float64
		label  []int
		weight []float64
		want   float64
	}{
		// The classic four-row example (from memory, common practice): positives 0.35
		// and 0.8 against negatives 0.1 and 0.4; 3 of the 4 pairs are in order.
		{"classic", []float64{0.1, 0.4, 0.35, 0.8}, []int{0, 0, 1, 1}, nil, 0.75},
		// Positive 0.5 ties negative 0.5: pairs 1 + ½ + 1 + 1 of 4.
		{"one tie", []float64{0.2, 0.5, 0.5, 0.9}, []int{0, 0, 1, 1}, nil, 0.875},
		{"all tied", []float64{0.3, 0.3, 0.3, 0.3}, []int{0, 1, 0, 1}, nil, 0.5},
		{"perfect", []float64{0.1, 0.2, 0.7, 0.9}, []int{0, 0, 1, 1}, nil, 1},
		{"reversed", []float64{0.9, 0.7, 0.2, 0.1}, []int{0, 0, 1, 1}, nil, 0},
		// Weighted pairs: positive 0.35 (weight 3) beats 0.1 (3) and loses to 0.4 (0);
		// positive 0.8 (weight 1) beats both (2). 5 of wPos·wNeg = 4·2 = 8.
		{"weighted", []float64{0.1, 0.4, 0.35, 0.8}, []int{0, 0, 1, 1}, []float64{1, 1, 3, 1}, 0.625},
		// Weight 2 on a row is that row twice: 0.35 twice against 0.1 and 0.4 gives
		// 2 of 4 pairs, 0.8 gives 2: 4 of 6.
		{"weight as copies", []float64{0.1, 0.4, 0.35, 0.8}, []int{0, 0, 1, 1}, []float64{1, 1, 2, 1}, 4.0 / 6},
		{"copies", []float64{0.1, 0.4, 0.35, 0.35, 0.8}, []int{0, 0, 1, 1, 1}, nil, 4.0 / 6},
		// Ties across classes among several rows: scores 1,1,2,2,2 with labels
		// 0,1,0,1,1: positive at 1 → ½ (tie with the 1) + 0; positives at 2 → 1 + ½
		// each: (0.5 + 1.5 + 1.5) / (3·2).
		{"tie groups", []float64{2, 1, 2, 1, 2}, []int{1, 0, 0, 1, 1}, nil, 3.5 / 6},
		{"no negatives", []float64{0.1, 0.2}, []int{1, 1}, nil, nan},
		{"no positives", []float64{0.1, 0.2}, []int{0, 0}, nil, nan},
	}
	for _, c := range cases {
		pos := make([]bool, len(c.label))
		for i, l := range c.label {
			pos[i] = l == 1
		}
		got := AUC(c.score, pos, c.weight)
		if math.IsNaN(c.want) {
			if !math.IsNaN(got) {
				t.Errorf("%s: AUC %v, want NaN", c.name, got)
			}
			continue
		}
		if math.Abs(got-c.want) > 1e-15 {
			t.Errorf("%s: AUC %v, want %v", c.name, got, c.want)
		}
	}
}

// Classification metrics on a three-row example worked by hand: probabilities of the
// positive class 0.1, 0.8, 0.4 for actual classes 0, 1, 1.
//
//	error     1/3 (the third row is called 0)
//	log loss  −(ln 0.9 + ln 0.8 + ln 0.4)/3 = 0.414931599615397
//	AUC       1 (both positives score above the negative)
//	Brier     (0.1² + 0.2² + 0.6²)/3 = 0.41/3
func TestClassificationMetrics(t *testing.T) {
	actual := []int32{0, 1, 1}
	probs := []float64{0.9, 0.1, 0.2, 0.8, 0.6, 0.4}
	ms := ClassificationMetrics(actual, probs, 2, nil)
	want := []Metric{{"error", 1.0 / 3}, {"log_loss", 0.414931599615397}, {"auc", 1}, {"brier", 0.41 / 3}}
	checkMetrics(t, "binary", ms, want, 1e-15)

	// Weights: weight 2 on the misclassified row is that row twice.
	w := ClassificationMetrics(actual, probs, 2, []float64{1, 1, 2})
	dup := ClassificationMetrics([]int32{0, 1, 1, 1}, []float64{0.9, 0.1, 0.2, 0.8, 0.6, 0.4, 0.6, 0.4}, 2, nil)
	checkMetrics(t, "weight 2 = copy", w, dup, 1e-15)
	if e := MetricValue(w, "error"); math.Abs(e-0.5) > 1e-15 {
		t.Errorf("weighted error %v, want 2/4", e)
	}

	// Probabilities of exactly 0 are clipped at 1e-15 (common practice), so the log
	// loss of a confident mistake is −ln 1e-15 = 34.538776394910684, not +Inf.
	clipped := ClassificationMetrics([]int32{1}, []float64{1, 0}, 2, nil)
	if ll := MetricValue(clipped, "log_loss"); math.Abs(ll-34.538776394910684) > 1e-9 {
		t.Errorf("log loss of a certain mistake %v, want −ln 1e-15", ll)
	}

	// Three classes: no AUC or Brier score; the error counts the arg max, ties to the
	// lower class.
	three := ClassificationMetrics([]int32{2, 0, 1}, []float64{
		0.2, 0.3, 0.5, // right
		0.4, 0.4, 0.2, // tie between 0 and 1: called 0, right
		0.5, 0.25, 0.25, // wrong
	}, 3, nil)
	checkMetrics(t, "three classes", three, []Metric{
		{"error", 1.0 / 3},
		{"log_loss", -(math.Log(0.5) + math.Log(0.4) + math.Log(0.25)) / 3},
	}, 1e-15)
}

// Regression metrics by hand: actual 1, 2, 3, 4 against predicted 1, 2, 3, 5: one error
// of 1, so MSE = MAE = 1/4, RMSE = 1/2, and R² = 1 − SSE/SST = 1 − 1/5 (SST about the mean
// 2.5 is 2.25 + 0.25 + 0.25 + 2.25 = 5). With weights 1, 1, 1, 3 the weighted mean is 3,
// SST = 4 + 1 + 0 + 3 = 8, SSE = 3, so MSE = MAE = 3/6 and R² = 1 − 3/8.
func TestRegressionMetrics(t *testing.T) {
	actual, pred := []float64{1, 2, 3, 4}, []float64{1, 2, 3, 5}
	checkMetrics(t, "unweighted", RegressionMetrics(actual, pred, nil),
		[]Metric{{"mse", 0.25}, {"rmse", 0.5}, {"mae", 0.25}, {"r2", 0.8}}, 1e-15)
	checkMetrics(t, "weighted", RegressionMetrics(actual, pred, []float64{1, 1, 1, 3}),
		[]Metric{{"mse", 0.5}, {"rmse", math.Sqrt(0.5)}, {"mae", 0.5}, {"r2", 0.625}}, 1e-15)
	if r2 := MetricValue(RegressionMetrics(actual, actual, nil), "r2"); r2 != 1 {
		t.Errorf("perfect prediction: R² %v, want 1", r2)
	}
	if r2 := MetricValue(RegressionMetrics(actual, []float64{2.5, 2.5, 2.5, 2.5}, nil), "r2"); r2 != 0 {
		t.Errorf("predicting the mean: R² %v, want 0", r2)
	}
	if r2 := MetricValue(RegressionMetrics(actual, []float64{4, 3, 2, 1}, nil), "r2"); math.Abs(r2-(-3)) > 1e-15 {
		// SSE = 9 + 1 + 1 + 9 = 20 = 4·SST: worse than the mean, R² = −3.
		t.Errorf("reversed prediction: R² %v, want −3", r2)
	}
}

func TestMetricValue(t *testing.T) {
	ms := []Metric{{"error", 0.25}, {"auc", 0.5}}
	if v := MetricValue(ms, "auc"); v != 0.5 {
		t.Errorf("auc %v", v)
	}
	if v := MetricValue(ms, "r2"); !math.IsNaN(v) {
		t.Errorf("absent metric %v, want NaN", v)
	}
	if c := Class([]float64{0.2, 0.4, 0.4}); c != 1 {
		t.Errorf("Class of a tie: %d, want the lower index 1", c)
	}
}

func checkMetrics(t *testing.T, name string, got, want []Metric, tol float64) {
	t.Helper()
	if len(got) != len(want) {
		t.Errorf("%s: metrics %v, want %v", name, got, want)
		return
	}
	for i := range want {
		if got[i].Name != want[i].Name || !(math.Abs(got[i].Value-want[i].Value) <= tol) {
			t.Errorf("%s: metric %d is %s = %v, want %s = %v", name, i, got[i].Name, got[i].Value, want[i].Name, want[i].Value)
		}
	}
}
