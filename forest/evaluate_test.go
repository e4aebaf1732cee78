package forest

import (
	"encoding/json"
	"errors"
	"math"
	"os"
	"path/filepath"
	"testing"
)

// evalReference is testdata/reference/evaluate_reference.json, made by
// evaluate_reference.py with Debian's python3-sklearn 1.2.1 from seeded scores.
type evalReference struct {
	GeneratedBy map[string]any `json:"generated_by"`
	Binary      struct {
		Labels          []int32     `json:"labels"`
		Scores          []float64   `json:"scores"`
		Weights         []float64   `json:"weights"`
		Unweighted      evalRefCase `json:"unweighted"`
		Weighted        evalRefCase `json:"weighted"`
		CalBins         int         `json:"calibration_bins"`
		CalMeanPred     []float64   `json:"calibration_mean_predicted"`
		CalObservedRate []float64   `json:"calibration_observed_rate"`
	} `json:"binary"`
	Multiclass struct {
		Labels     []int32     `json:"labels"`
		Probs      []float64   `json:"probs"`
		Weights    []float64   `json:"weights"`
		Unweighted evalRefCase `json:"unweighted"`
		Weighted   evalRefCase `json:"weighted"`
	} `json:"multiclass"`
	Regression struct {
		Actual     []float64          `json:"actual"`
		Predicted  []float64          `json:"predicted"`
		Weights    []float64          `json:"weights"`
		Unweighted map[string]float64 `json:"unweighted"`
		Weighted   map[string]float64 `json:"weighted"`
	} `json:"regression"`
}

type evalRefCase struct {
	Accuracy         float64   `json:"accuracy"`
	BalancedAccuracy float64   `json:"balanced_accuracy"`
	Precision        float64   `json:"precision"`
	Recall           float64   `json:"recall"`
	F1               float64   `json:"f1"`
	AUC              float64   `json:"auc"`
	LogLoss          float64   `json:"log_loss"`
	Brier            float64   `json:"brier"`
	Confusion        []float64 `json:"confusion"`
	ROCThreshold     []float64 `json:"roc_threshold"`
	ROCTPR           []float64 `json:"roc_tpr"`
	ROCFPR           []float64 `json:"roc_fpr"`
}

func loadEvalReference(t *testing.T) *evalReference {
	t.Helper()
	b, err := os.ReadFile(filepath.Join("..", "testdata", "reference", "evaluate_reference.json"))
	if err != nil {
		t.Fatal(err)
	}
	var r evalReference
	if err := json.Unmarshal(b, &r); err != nil {
		t.Fatal(err)
	}
	if r.GeneratedBy["sklearn"] != "1.2.1" {
		t.Fatalf("reference made with scikit-learn %v, want 1.2.1", r.GeneratedBy["sklearn"])
	}
	return &r
}

const refTol = 1e-9

func closeTo(got, want float64) bool {
	return math.Abs(got-want) <= refTol*max(1, math.Abs(want))
}

// Classification metrics equal scikit-learn 1.2.1's (roc_auc_score, log_loss,
// brier_score_loss, accuracy_score, balanced_accuracy_score, precision/recall/f1_score
// with zero_division=0 and average='macro' for three classes, roc_auc_score with
// multi_class='ovr', confusion_matrix) on the seeded scores of evaluate_reference.json,
// with and without row weights, to 1e-9.
func TestEvaluateClassificationMatchesSklearn(t *testing.T) {
	r := loadEvalReference(t)
	binProbs := make([]float64, 2*len(r.Binary.Scores))
	for i, p := range r.Binary.Scores {
		binProbs[2*i], binProbs[2*i+1] = 1-p, p
	}
	cases := []struct {
		name   string
		actual []int32
		probs  []float64
		width  int
		w      []float64
		want   evalRefCase
		brier  bool
	}{
		{"binary", r.Binary.Labels, binProbs, 2, nil, r.Binary.Unweighted, true},
		{"binary weighted", r.Binary.Labels, binProbs, 2, r.Binary.Weights, r.Binary.Weighted, true},
		{"three classes", r.Multiclass.Labels, r.Multiclass.Probs, 3, nil, r.Multiclass.Unweighted, false},
		{"three classes weighted", r.Multiclass.Labels, r.Multiclass.Probs, 3, r.Multiclass.Weights, r.Multiclass.Weighted, false},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			ev, err := EvaluateClassification(c.actual, c.probs, c.width, c.w)
			if err != nil {
				t.Fatal(err)
			}
			want := map[string]float64{
				"accuracy": c.want.Accuracy, "error": 1 - c.want.Accuracy, "balanced_accuracy": c.want.BalancedAccuracy,
				"precision": c.want.Precision, "recall": c.want.Recall, "f1": c.want.F1,
				"auc": c.want.AUC, "log_loss": c.want.LogLoss,
			}
			if c.brier {
				want["brier"] = c.want.Brier
			}
			for name, v := range want {
				if got := MetricValue(ev.Metrics, name); !closeTo(got, v) {
					t.Errorf("%s = %.17g, scikit-learn %.17g", name, got, v)
				}
			}
			if len(ev.Confusion) != len(c.want.Confusion) {
				t.Fatalf("%d confusion cells, scikit-learn %d", len(ev.Confusion), len(c.want.Confusion))
			}
			for i, v := range c.want.Confusion {
				if !closeTo(ev.Confusion[i], v) {
					t.Errorf("confusion[%d] = %v, scikit-learn %v", i, ev.Confusion[i], v)
				}
			}
		})
	}
}

// The ROC curve equals scikit-learn 1.2.1's roc_curve(drop_intermediate=False): one
// point per distinct score, highest first, after a (0, 0) start (scikit-learn's start
// threshold is max+1, ours +Inf).
func TestROCMatchesSklearn(t *testing.T) {
	r := loadEvalReference(t)
	pos := make([]bool, len(r.Binary.Labels))
	for i, l := range r.Binary.Labels {
		pos[i] = l == 1
	}
	for _, c := range []struct {
		name string
		w    []float64
		want evalRefCase
	}{{"unweighted", nil, r.Binary.Unweighted}, {"weighted", r.Binary.Weights, r.Binary.Weighted}} {
		t.Run(c.name, func(t *testing.T) {
			roc, err := ROC(r.Binary.Scores, pos, c.w)
			if err != nil {
				t.Fatal(err)
			}
			if len(roc) != len(c.want.ROCTPR) {
				t.Fatalf("%d points, scikit-learn %d", len(roc), len(c.want.ROCTPR))
			}
			if !math.IsInf(roc[0].Threshold, 1) || roc[0].TruePositiveRate != 0 || roc[0].FalsePositiveRate != 0 {
				t.Errorf("first point %+v, want (+Inf, 0, 0)", roc[0])
			}
			for i := 1; i < len(roc); i++ {
				if roc[i].Threshold != c.want.ROCThreshold[i-1] || !closeTo(roc[i].TruePositiveRate, c.want.ROCTPR[i]) ||
					!closeTo(roc[i].FalsePositiveRate, c.want.ROCFPR[i]) {
					t.Errorf("point %d: %+v, scikit-learn (%v, %v, %v)", i, roc[i], c.want.ROCThreshold[i-1], c.want.ROCTPR[i], c.want.ROCFPR[i])
				}
			}
			// The trapezoids under the points are the AUC.
			var area float64
			for i := 1; i < len(roc); i++ {
				area += (roc[i].FalsePositiveRate - roc[i-1].FalsePositiveRate) * (roc[i].TruePositiveRate + roc[i-1].TruePositiveRate) / 2
			}
			if !closeTo(area, c.want.AUC) {
				t.Errorf("area under the points %v, scikit-learn AUC %v", area, c.want.AUC)
			}
		})
	}
}

// Calibration bins equal scikit-learn 1.2.1's calibration_curve(strategy='uniform',
// n_bins=10), which has the same edges (numpy linspace, k·(1/10)) and the same rule
// for a score on an edge (searchsorted: the lower bin); it returns non-empty bins only.
// The scores lie on a 0.01 grid, so many sit on the edges.
func TestCalibrationMatchesSklearn(t *testing.T) {
	r := loadEvalReference(t)
	pos := make([]bool, len(r.Binary.Labels))
	for i, l := range r.Binary.Labels {
		pos[i] = l == 1
	}
	bins, err := Calibration(r.Binary.Scores, pos, nil, r.Binary.CalBins)
	if err != nil {
		t.Fatal(err)
	}
	var mean, rate []float64
	total := 0
	for _, b := range bins {
		total += b.Rows
		if b.Rows > 0 {
			mean, rate = append(mean, b.MeanPredicted), append(rate, b.ObservedRate)
		}
	}
	if total != len(pos) {
		t.Errorf("bins hold %d rows, want %d", total, len(pos))
	}
	if len(mean) != len(r.Binary.CalMeanPred) {
		t.Fatalf("%d non-empty bins, scikit-learn %d", len(mean), len(r.Binary.CalMeanPred))
	}
	for i := range mean {
		if !closeTo(mean[i], r.Binary.CalMeanPred[i]) || !closeTo(rate[i], r.Binary.CalObservedRate[i]) {
			t.Errorf("bin %d: mean %v rate %v, scikit-learn %v %v", i, mean[i], rate[i], r.Binary.CalMeanPred[i], r.Binary.CalObservedRate[i])
		}
	}
}

// Regression metrics equal scikit-learn 1.2.1's mean_squared_error,
// mean_absolute_error, r2_score and mean_poisson_deviance, with and without weights.
func TestEvaluateRegressionMatchesSklearn(t *testing.T) {
	r := loadEvalReference(t)
	for _, c := range []struct {
		name string
		w    []float64
		want map[string]float64
	}{{"unweighted", nil, r.Regression.Unweighted}, {"weighted", r.Regression.Weights, r.Regression.Weighted}} {
		t.Run(c.name, func(t *testing.T) {
			ms, err := EvaluateRegression(r.Regression.Actual, r.Regression.Predicted, c.w)
			if err != nil {
				t.Fatal(err)
			}
			for name, v := range c.want {
				if got := MetricValue(ms, name); !closeTo(got, v) {
					t.Errorf("%s = %.17g, scikit-learn %.17g", name, got, v)
				}
			}
		})
	}
}

// Small cases worked by hand.
func TestEvaluateByHand(t *testing.T) {
	// Three classes, three rows: row 0 (class 0) predicted 0, row 1 (class 1) predicted
	// 2, row 2 (class 2) predicted 2. Brier's form, Σ_k (p_k − y_k)² per row:
	// row 0 p=(.7,.2,.1) y=(1,0,0): .09+.04+.01 = .14; row 1 p=(.1,.3,.6) y=(0,1,0):
	// .01+.49+.36 = .86; row 2 p=(.2,.2,.6) y=(0,0,1): .04+.04+.16 = .24; mean 1.24/3.
	// Per class precision 1, 0 (none predicted), 1/2; recall 1, 0, 1; F1 1, 0, 2/3.
	ev, err := EvaluateClassification([]int32{0, 1, 2}, []float64{.7, .2, .1, .1, .3, .6, .2, .2, .6}, 3, nil)
	if err != nil {
		t.Fatal(err)
	}
	for name, want := range map[string]float64{
		"error": 1.0 / 3, "accuracy": 2.0 / 3, "balanced_accuracy": 2.0 / 3, "brier": 1.24 / 3,
		"precision": 0.5, "recall": 2.0 / 3, "f1": (1 + 2.0/3) / 3,
	} {
		if got := MetricValue(ev.Metrics, name); math.Abs(got-want) > 1e-12 {
			t.Errorf("%s = %v, want %v", name, got, want)
		}
	}
	wantConf := []float64{1, 0, 0, 0, 0, 1, 0, 0, 1}
	for i, v := range wantConf {
		if ev.Confusion[i] != v {
			t.Errorf("confusion %v, want %v", ev.Confusion, wantConf)
			break
		}
	}

	// ROC with ties: scores 0.9 (pos), 0.5 (pos), 0.5 (neg), 0.1 (neg): the tied pair
	// enters as one point.
	roc, err := ROC([]float64{0.9, 0.5, 0.5, 0.1}, []bool{true, true, false, false}, nil)
	if err != nil {
		t.Fatal(err)
	}
	want := []ROCPoint{{math.Inf(1), 0, 0}, {0.9, 0.5, 0}, {0.5, 1, 0.5}, {0.1, 1, 1}}
	if len(roc) != len(want) {
		t.Fatalf("ROC %+v, want %+v", roc, want)
	}
	for i := range want {
		if roc[i] != want[i] {
			t.Errorf("ROC point %d %+v, want %+v", i, roc[i], want[i])
		}
	}

	// Calibration in 4 bins: 0.25 sits on the first edge and stays in bin 1; 1.0 is in bin 4.
	bins, err := Calibration([]float64{0, 0.25, 0.3, 1}, []bool{false, true, true, true}, []float64{1, 3, 1, 1}, 4)
	if err != nil {
		t.Fatal(err)
	}
	if b := bins[0]; b.Rows != 2 || math.Abs(b.MeanPredicted-0.75/4) > 1e-15 || b.ObservedRate != 0.75 {
		t.Errorf("bin 1 %+v, want 2 rows, mean 0.1875, rate 0.75", b)
	}
	if b := bins[2]; b.Rows != 0 || !math.IsNaN(b.MeanPredicted) {
		t.Errorf("bin 3 %+v, want empty", b)
	}
	if b := bins[3]; b.Rows != 1 || b.MeanPredicted != 1 || b.Upper != 1 {
		t.Errorf("bin 4 %+v, want the score 1", b)
	}

	// Poisson deviance only applies with actual ≥ 0 and predictions > 0.
	for _, c := range []struct {
		actual, pred []float64
		has          bool
	}{
		{[]float64{0, 2}, []float64{1, 2}, true},
		{[]float64{-1, 2}, []float64{1, 2}, false},
		{[]float64{0, 2}, []float64{0, 2}, false},
	} {
		ms, err := EvaluateRegression(c.actual, c.pred, nil)
		if err != nil {
			t.Fatal(err)
		}
		if has := !math.IsNaN(MetricValue(ms, "poisson_deviance")); has != c.has {
			t.Errorf("actual %v pred %v: poisson_deviance present %v, want %v", c.actual, c.pred, has, c.has)
		}
	}
	// y=0, μ=1: 2·(0 − (0 − 1)) = 2; y=2, μ=2: 0; mean 1.
	ms, _ := EvaluateRegression([]float64{0, 2}, []float64{1, 2}, nil)
	if got := MetricValue(ms, "poisson_deviance"); math.Abs(got-1) > 1e-15 {
		t.Errorf("poisson_deviance %v, want 1", got)
	}
}

func TestEvaluateErrors(t *testing.T) {
	cases := []struct {
		name string
		run  func() error
	}{
		{"no rows", func() error { _, err := EvaluateClassification(nil, nil, 2, nil); return err }},
		{"one class", func() error { _, err := EvaluateClassification([]int32{0}, []float64{1}, 1, nil); return err }},
		{"short probs", func() error { _, err := EvaluateClassification([]int32{0, 1}, []float64{.5, .5}, 2, nil); return err }},
		{"class out of range", func() error { _, err := EvaluateClassification([]int32{2}, []float64{.5, .5}, 2, nil); return err }},
		{"probability NaN", func() error {
			_, err := EvaluateClassification([]int32{0}, []float64{math.NaN(), .5}, 2, nil)
			return err
		}},
		{"negative weight", func() error {
			_, err := EvaluateClassification([]int32{0}, []float64{.5, .5}, 2, []float64{-1})
			return err
		}},
		{"zero weights", func() error { _, err := EvaluateRegression([]float64{1}, []float64{1}, []float64{0}); return err }},
		{"NaN actual", func() error { _, err := EvaluateRegression([]float64{math.NaN()}, []float64{1}, nil); return err }},
		{"ROC one outcome", func() error { _, err := ROC([]float64{.1, .2}, []bool{true, true}, nil); return err }},
		{"ROC NaN score", func() error { _, err := ROC([]float64{math.NaN(), .2}, []bool{true, false}, nil); return err }},
		{"0 bins", func() error { _, err := Calibration([]float64{.5}, []bool{true}, nil, 0); return err }},
		{"score above 1", func() error { _, err := Calibration([]float64{1.5}, []bool{true}, nil, 10); return err }},
	}
	for _, c := range cases {
		if err := c.run(); !errors.Is(err, ErrEvaluate) {
			t.Errorf("%s: error %v, want ErrEvaluate", c.name, err)
		}
	}
}
