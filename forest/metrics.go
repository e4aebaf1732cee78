package forest

import (
	"cmp"
	"math"
	"slices"
)

// logLossClip keeps log loss finite for probabilities of exactly 0 or 1, which forests
// of fully grown trees produce; 1e-15 is the clipping common practice uses.
const logLossClip = 1e-15

func weightAt(w []float64, i int) float64 {
	if w == nil {
		return 1
	}
	return w[i]
}

// ClassificationMetrics scores class probabilities (width numbers per row) against actual
// class codes, weighted by w (nil: all ones): error rate, log loss and, for two classes,
// AUC and Brier score of the positive class (code 1).
func ClassificationMetrics(actual []int32, probs []float64, width int, w []float64) []Metric {
	var sw, errW, ll float64
	for i, a := range actual {
		wi := weightAt(w, i)
		p := probs[i*width : (i+1)*width]
		if Class(p) != int(a) {
			errW += wi
		}
		ll -= wi * math.Log(min(max(p[a], logLossClip), 1-logLossClip))
		sw += wi
	}
	out := []Metric{{"error", errW / sw}, {"log_loss", ll / sw}}
	if width == 2 {
		score := make([]float64, len(actual))
		pos := make([]bool, len(actual))
		var brier float64
		for i, a := range actual {
			score[i] = probs[i*2+1]
			pos[i] = a == 1
			y := 0.0
			if pos[i] {
				y = 1
			}
			brier += weightAt(w, i) * (score[i] - y) * (score[i] - y)
		}
		out = append(out, Metric{"auc", AUC(score, pos, w)}, Metric{"brier", brier / sw})
	}
	return out
}

// AUC is the area under the ROC curve: the chance that a random positive scores above a
// random negative, ties counting one half (Mann–Whitney), weighted by w (nil: ones). NaN
// when either class is absent. NaN scores sort below every number.
func AUC(score []float64, positive []bool, w []float64) float64 {
	idx := make([]int, len(score))
	for i := range idx {
		idx[i] = i
	}
	slices.SortFunc(idx, func(a, b int) int { return cmp.Compare(score[a], score[b]) })
	var negBelow, area, wPos, wNeg float64
	for i := 0; i < len(idx); {
		j := i + 1
		for j < len(idx) && score[idx[j]] == score[idx[i]] {
			j++
		}
		var tp, tn float64 // weights of positives and negatives tied at this score
		for _, k := range idx[i:j] {
			if positive[k] {
				tp += weightAt(w, k)
			} else {
				tn += weightAt(w, k)
			}
		}
		area += tp * (negBelow + tn/2)
		negBelow += tn
		wPos += tp
		wNeg += tn
		i = j
	}
	if wPos == 0 || wNeg == 0 {
		return math.NaN()
	}
	return area / (wPos * wNeg)
}

// RegressionMetrics scores predictions against actual values, weighted by w (nil: ones):
// MSE, RMSE, MAE and R² (1 − SSE/SST about the weighted mean).
func RegressionMetrics(actual, pred, w []float64) []Metric {
	var sw, mean float64
	for i, a := range actual {
		sw += weightAt(w, i)
		mean += weightAt(w, i) * a
	}
	mean /= sw
	var sse, sae, sst float64
	for i, a := range actual {
		wi := weightAt(w, i)
		e := pred[i] - a
		sse += wi * e * e
		sae += wi * math.Abs(e)
		sst += wi * (a - mean) * (a - mean)
	}
	return []Metric{{"mse", sse / sw}, {"rmse", math.Sqrt(sse / sw)}, {"mae", sae / sw}, {"r2", 1 - sse/sst}}
}

// MetricValue returns the named metric's value, or NaN.
func MetricValue(ms []Metric, name string) float64 {
	for _, m := range ms {
		if m.Name == name {
			return m.Value
		}
	}
	return math.NaN()
}
