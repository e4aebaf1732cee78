package forest

import (
	"cmp"
	"errors"
	"fmt"
	"math"
	"slices"
)

// ErrEvaluate is wrapped by every error of the evaluation functions: scores and outcomes
// that do not fit together.
var ErrEvaluate = errors.New("forest: evaluate")

// ClassEvaluation is how well class probabilities matched known classes.
type ClassEvaluation struct {
	// Metrics, in this order (the predicted class is [Class]'s, the most probable):
	//
	//	error                share of rows whose predicted class is wrong
	//	accuracy             1 − error
	//	balanced_accuracy    mean recall over the classes that occur among the actual rows
	//	precision, recall, f1  two classes: of the positive class (code 1); more: macro
	//	                     averages, the unweighted mean over the classes that occur
	//	                     among the actual or the predicted rows
	//	auc                  two classes: [AUC] of the positive class; more: each class
	//	                     against the rest, averaged over the classes where it is
	//	                     defined (both outcomes present)
	//	log_loss             as in [ClassificationMetrics] (probabilities clipped at 1e-15)
	//	brier                two classes: mean (p − y)² of the positive class; more: mean
	//	                     over rows of Σ_k (p_k − y_k)² (Brier's own form, which for two
	//	                     classes is twice the binary figure)
	//
	// A class's precision (recall) with no predicted (actual) rows counts as 0, and so
	// does its F1 when both are 0, so the averages stay defined. All are weighted.
	Metrics []Metric
	// Confusion holds Width×Width weights, row-major: Confusion[a*Width+p] is the weight
	// of rows of actual class a predicted as class p.
	Confusion []float64
	Width     int
}

// probSlack is how far outside [0, 1] a probability may stray: an average of tree
// probabilities can land an ulp or so outside through rounding, and that is no error.
const probSlack = 1e-9

// isProb reports whether p is a probability, up to probSlack.
func isProb(p float64) bool { return p >= -probSlack && p <= 1+probSlack }

// checkScores validates what every evaluation function gets: n rows, width numbers per
// row (width 1 for one score per row), weights nil or n finite numbers ≥ 0 with a
// positive sum.
func checkScores(n, scores, width int, w []float64) error {
	if n == 0 {
		return fmt.Errorf("%w: no rows", ErrEvaluate)
	}
	if scores != n*width {
		return fmt.Errorf("%w: %d scores for %d rows of %d", ErrEvaluate, scores, n, width)
	}
	if w == nil {
		return nil
	}
	if len(w) != n {
		return fmt.Errorf("%w: %d weights for %d rows", ErrEvaluate, len(w), n)
	}
	var sw float64
	for i, x := range w {
		if !(x >= 0) || math.IsInf(x, 0) {
			return fmt.Errorf("%w: weight %v in row %d; want a finite number ≥ 0", ErrEvaluate, x, i)
		}
		sw += x
	}
	if sw == 0 {
		return fmt.Errorf("%w: every weight is 0", ErrEvaluate)
	}
	return nil
}

// EvaluateClassification scores class probabilities (width numbers per row, in class
// order) against actual class codes 0…width−1, weighted by w (nil: all ones). See
// [ClassEvaluation] for the metrics.
func EvaluateClassification(actual []int32, probs []float64, width int, w []float64) (*ClassEvaluation, error) {
	if width < 2 {
		return nil, fmt.Errorf("%w: %d classes; want at least 2", ErrEvaluate, width)
	}
	if err := checkScores(len(actual), len(probs), width, w); err != nil {
		return nil, err
	}
	for i, a := range actual {
		if a < 0 || int(a) >= width {
			return nil, fmt.Errorf("%w: row %d: class code %d of %d classes", ErrEvaluate, i, a, width)
		}
		for _, p := range probs[i*width : (i+1)*width] {
			if !isProb(p) {
				return nil, fmt.Errorf("%w: row %d: probability %v; want a number in [0, 1]", ErrEvaluate, i, p)
			}
		}
	}
	K := width
	conf := make([]float64, K*K)
	for i, a := range actual {
		conf[int(a)*K+Class(probs[i*K:(i+1)*K])] += weightAt(w, i)
	}
	base := ClassificationMetrics(actual, probs, K, w)
	errRate := MetricValue(base, "error")
	out := []Metric{
		{"error", errRate},
		{"accuracy", 1 - errRate},
		{"balanced_accuracy", balancedAccuracy(conf, K)},
	}
	prec, rec, f1 := precisionRecall(conf, K)
	out = append(out, Metric{"precision", prec}, Metric{"recall", rec}, Metric{"f1", f1})
	if K == 2 {
		out = append(out, Metric{"auc", MetricValue(base, "auc")})
	} else {
		out = append(out, Metric{"auc", macroAUC(actual, probs, K, w)})
	}
	out = append(out, Metric{"log_loss", MetricValue(base, "log_loss")})
	if K == 2 {
		out = append(out, Metric{"brier", MetricValue(base, "brier")})
	} else {
		out = append(out, Metric{"brier", multiBrier(actual, probs, K, w)})
	}
	return &ClassEvaluation{Metrics: out, Confusion: conf, Width: K}, nil
}

// balancedAccuracy is the mean recall over the classes with actual weight.
func balancedAccuracy(conf []float64, K int) float64 {
	var sum float64
	n := 0
	for a := range K {
		var row float64
		for p := range K {
			row += conf[a*K+p]
		}
		if row > 0 {
			sum += conf[a*K+a] / row
			n++
		}
	}
	return sum / float64(n)
}

// classPRF is one class's precision, recall and F1 from the confusion weights; an
// undefined ratio counts as 0. F1 is 2·TP / (2·TP + FP + FN), the harmonic mean of the
// two where both are defined.
func classPRF(conf []float64, K, k int) (prec, rec, f1 float64, present bool) {
	var actual, predicted float64
	for j := range K {
		actual += conf[k*K+j]
		predicted += conf[j*K+k]
	}
	tp := conf[k*K+k]
	if predicted > 0 {
		prec = tp / predicted
	}
	if actual > 0 {
		rec = tp / actual
	}
	if d := actual + predicted; d > 0 {
		f1 = 2 * tp / d
	}
	return prec, rec, f1, actual > 0 || predicted > 0
}

// precisionRecall is the positive class's precision, recall and F1 for two classes, and
// their macro averages (over classes with actual or predicted weight) for more.
func precisionRecall(conf []float64, K int) (prec, rec, f1 float64) {
	if K == 2 {
		p, r, f, _ := classPRF(conf, K, 1)
		return p, r, f
	}
	n := 0
	for k := range K {
		p, r, f, ok := classPRF(conf, K, k)
		if !ok {
			continue
		}
		prec, rec, f1 = prec+p, rec+r, f1+f
		n++
	}
	return prec / float64(n), rec / float64(n), f1 / float64(n)
}

// macroAUC is the unweighted mean of each class's AUC against the rest (one-vs-rest),
// over the classes for which it is defined; NaN if it is for none.
func macroAUC(actual []int32, probs []float64, K int, w []float64) float64 {
	score := make([]float64, len(actual))
	pos := make([]bool, len(actual))
	var sum float64
	n := 0
	for k := range K {
		for i, a := range actual {
			score[i] = probs[i*K+k]
			pos[i] = int(a) == k
		}
		if auc := AUC(score, pos, w); !math.IsNaN(auc) {
			sum += auc
			n++
		}
	}
	if n == 0 {
		return math.NaN()
	}
	return sum / float64(n)
}

// multiBrier is the weighted mean over rows of Σ_k (p_k − y_k)², y the one-hot actual
// class (Brier 1950, Monthly Weather Review 78:1–3).
func multiBrier(actual []int32, probs []float64, K int, w []float64) float64 {
	var s, sw float64
	for i, a := range actual {
		var r float64
		for k, p := range probs[i*K : (i+1)*K] {
			y := 0.0
			if k == int(a) {
				y = 1
			}
			r += (p - y) * (p - y)
		}
		s += weightAt(w, i) * r
		sw += weightAt(w, i)
	}
	return s / sw
}

// EvaluateRegression scores predictions against actual values, weighted by w (nil:
// ones): the metrics of [RegressionMetrics] (mse, rmse, mae, r2) and, when every actual
// value is ≥ 0 and every prediction > 0, poisson_deviance, the weighted mean of
//
//	2 · (y·ln(y/μ) − (y − μ))      (y·ln(y/μ) taken as 0 at y = 0)
func EvaluateRegression(actual, pred, w []float64) ([]Metric, error) {
	if err := checkScores(len(actual), len(pred), 1, w); err != nil {
		return nil, err
	}
	poisson := true
	for i, y := range actual {
		if math.IsNaN(y) || math.IsInf(y, 0) || math.IsNaN(pred[i]) || math.IsInf(pred[i], 0) {
			return nil, fmt.Errorf("%w: row %d: actual %v, predicted %v; want finite numbers", ErrEvaluate, i, y, pred[i])
		}
		poisson = poisson && y >= 0 && pred[i] > 0
	}
	out := RegressionMetrics(actual, pred, w)
	if poisson {
		var dev, sw float64
		for i, y := range actual {
			mu := pred[i]
			d := -(y - mu)
			if y > 0 {
				d += y * math.Log(y/mu)
			}
			dev += weightAt(w, i) * 2 * d
			sw += weightAt(w, i)
		}
		out = append(out, Metric{"poisson_deviance", dev / sw})
	}
	return out, nil
}

// ROCPoint is one point of a receiver operating characteristic curve: the rows scoring
// at least Threshold are called positive.
type ROCPoint struct {
	Threshold         float64
	TruePositiveRate  float64 // weight of positives called positive / weight of positives
	FalsePositiveRate float64 // weight of negatives called positive / weight of negatives
}

// ROC returns the ROC curve of scores against outcomes, weighted by w (nil: ones): a
// first point at threshold +Inf (nothing called positive: 0, 0), then one point per
// distinct score, highest first, so rows tied at a score enter together and the curve
// joins its points with straight lines (whose area is [AUC]). It needs positive and
// negative weight and no NaN scores.
func ROC(score []float64, positive []bool, w []float64) ([]ROCPoint, error) {
	if err := checkScores(len(positive), len(score), 1, w); err != nil {
		return nil, err
	}
	var wPos, wNeg float64
	for i, s := range score {
		if math.IsNaN(s) {
			return nil, fmt.Errorf("%w: row %d: score is NaN", ErrEvaluate, i)
		}
		if positive[i] {
			wPos += weightAt(w, i)
		} else {
			wNeg += weightAt(w, i)
		}
	}
	if wPos == 0 || wNeg == 0 {
		return nil, fmt.Errorf("%w: the ROC curve needs rows of both outcomes (positive weight %v, negative weight %v)", ErrEvaluate, wPos, wNeg)
	}
	idx := make([]int, len(score))
	for i := range idx {
		idx[i] = i
	}
	slices.SortStableFunc(idx, func(a, b int) int { return cmp.Compare(score[b], score[a]) })
	out := []ROCPoint{{Threshold: math.Inf(1)}}
	var tp, fp float64
	for i := 0; i < len(idx); {
		s := score[idx[i]]
		for ; i < len(idx) && score[idx[i]] == s; i++ {
			if k := idx[i]; positive[k] {
				tp += weightAt(w, k)
			} else {
				fp += weightAt(w, k)
			}
		}
		out = append(out, ROCPoint{Threshold: s, TruePositiveRate: tp / wPos, FalsePositiveRate: fp / wNeg})
	}
	return out, nil
}

// CalibrationBin is one bin of a calibration table.
type CalibrationBin struct {
	Bin           int     // 1…bins, lowest scores first
	Lower, Upper  float64 // the bin holds scores s with Lower < s ≤ Upper (bin 1: 0 ≤ s)
	MeanPredicted float64 // weighted mean score; NaN for an empty bin
	ObservedRate  float64 // weighted share of rows whose outcome is true; NaN when empty
	Rows          int     // rows in the bin, whatever their weight
}

// Calibration bins scores in [0, 1] into bins of equal width and compares, per bin, the
// mean score with the observed rate of the outcome, weighted by w (nil: ones). Equal
// widths (not quantiles) keep the bins the same from one data set to the next, so two
// tables line up. Edge k is k·(1/bins); a score on an edge belongs to the lower bin.
// Every bin is returned, empty ones with Rows 0 and NaN means.
func Calibration(score []float64, outcome []bool, w []float64, bins int) ([]CalibrationBin, error) {
	if bins < 1 {
		return nil, fmt.Errorf("%w: %d bins; want at least 1", ErrEvaluate, bins)
	}
	if err := checkScores(len(outcome), len(score), 1, w); err != nil {
		return nil, err
	}
	step := 1 / float64(bins)
	edges := make([]float64, bins-1) // inner edges
	for k := range edges {
		edges[k] = float64(k+1) * step
	}
	sumP := make([]float64, bins)
	sumY := make([]float64, bins)
	sumW := make([]float64, bins)
	out := make([]CalibrationBin, bins)
	for i, s := range score {
		if !isProb(s) {
			return nil, fmt.Errorf("%w: row %d: score %v; want a probability in [0, 1]", ErrEvaluate, i, s)
		}
		s = min(max(s, 0), 1)
		b, _ := slices.BinarySearch(edges, s) // edges below s: a score on an edge stays low
		wi := weightAt(w, i)
		sumP[b] += wi * s
		sumW[b] += wi
		if outcome[i] {
			sumY[b] += wi
		}
		out[b].Rows++
	}
	for b := range out {
		out[b].Bin = b + 1
		out[b].Lower, out[b].Upper = float64(b)*step, 1
		if b > 0 {
			out[b].Lower = edges[b-1]
		}
		if b < len(edges) {
			out[b].Upper = edges[b]
		}
		out[b].MeanPredicted, out[b].ObservedRate = math.NaN(), math.NaN()
		if sumW[b] > 0 {
			out[b].MeanPredicted = sumP[b] / sumW[b]
			out[b].ObservedRate = sumY[b] / sumW[b]
		}
	}
	return out, nil
}
