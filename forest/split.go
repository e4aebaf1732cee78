package forest

import "math"

// A split's gain is the weighted impurity decrease it brings,
//
//	gain = W·I(node) − W_L·I(left) − W_R·I(right),
//
// computed from each side's statistics through a score, score(s) = −W·I(s), so that
//
//	gain = score(left) + score(right) − score(node).
//
// Statistics are class weights (classification) or (W, Σwy) (regression).

// giniScore is −W·Gini = Σ c_k²/W − W; the −W terms cancel in the gain and are left out.
func giniScore(c []float64) float64 {
	w, sq := 0.0, 0.0
	for _, v := range c {
		w += v
		sq += v * v
	}
	if w <= 0 {
		return 0
	}
	return sq / w
}

// entropyScore is −W·H = Σ c_k ln c_k − W ln W (natural log).
func entropyScore(c []float64) float64 {
	w, s := 0.0, 0.0
	for _, v := range c {
		if v > 0 {
			w += v
			s += v * math.Log(v)
		}
	}
	if w <= 0 {
		return 0
	}
	return s - w*math.Log(w)
}

// squaredScore is −W·Var + Σwy² = (Σwy)²/W; the Σwy² terms cancel in the gain.
func squaredScore(s []float64) float64 {
	if s[0] <= 0 {
		return 0
	}
	return s[1] * s[1] / s[0]
}

// penalizedScore is squaredScore with the L2 leaf penalty λ: (Σwy)²/(W+λ). On Newton
// statistics (W, Σwy) = (Σh, −Σg) it is the second-order gain of boosting.
func penalizedScore(lambda float64) func([]float64) float64 {
	return func(s []float64) float64 {
		if s[0] <= 0 {
			return 0
		}
		return s[1] * s[1] / (s[0] + lambda)
	}
}

// splitInfo describes the best split found so far at a node.
type splitInfo struct {
	feature     int
	gain        float64
	bin         int // numeric: bins 1…bin go left
	missingLeft bool
	categorical bool
	hasMissing  bool
	// leftBins lists the value bins that go left (categorical); present lists every value
	// bin with weight at the node, so that absent levels can follow the default.
	leftBins []int
	present  []int
}

func (s *splitInfo) valid() bool { return s.feature >= 0 }

// better reports whether a candidate of gain g on feature f beats the current best; ties
// go to the lower feature index, and within a feature to the first candidate.
func (s *splitInfo) better(g float64, f int) bool {
	if math.IsNaN(g) {
		return false
	}
	return !s.valid() || g > s.gain || (g == s.gain && f < s.feature)
}
