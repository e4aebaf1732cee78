package forest

import (
	"fmt"
	"math"
)

// Method names how trees are grown and combined.
type Method string

// The methods this package trains.
const (
	// MethodTree grows one tree on every row, considering every feature at each split.
	MethodTree Method = "tree"
	// MethodBagging grows each tree on a resample of the rows, every feature at each split
	// (Breiman 1996).
	MethodBagging Method = "bagging"
	// MethodForest is bagging plus a fresh random subset of features at each split
	// (Breiman 2001).
	MethodForest Method = "forest"
	// MethodBoosting fits shallow trees one after another, each to the gradient of the
	// loss at the current scores, and sums them (Friedman 2001).
	MethodBoosting Method = "boosting"
	// MethodAdaBoost reweights the rows each round towards those the trees so far
	// misclassify and lets the trees vote with weights (classification only: Freund &
	// Schapire 1997; SAMME, Zhu et al. 2009). Defaults: stumps, learning rate 1.
	MethodAdaBoost Method = "adaboost"
	// MethodLinear is the linear baseline: least squares for regression, logistic
	// regression by IRLS for two classes, with an optional ridge penalty (see Linear).
	// It grows no trees.
	MethodLinear Method = "linear"
)

// Loss is the loss a boosted model minimises; it fixes the initial score and the link.
type Loss string

// The losses.
const (
	// LossSquared is ½(y − F)²: identity link, for regression.
	LossSquared Loss = "squared"
	// LossLogistic is the binomial log loss with F the log-odds of the second class.
	LossLogistic Loss = "logistic"
	// LossMultinomial is the multinomial log loss with a softmax link over K ≥ 3 raw
	// scores, one per class; each round grows one tree per class (Friedman 2001 §4.6),
	// with Newton leaves on h = p(1 − p). Model.Trees are round-major: tree t adds to
	// class t mod K.
	LossMultinomial Loss = "multinomial"
	// LossAbsolute is |y − F| (least absolute deviation, Friedman 2001 §4.2): each tree
	// is grown on the gradient's sign, then each leaf takes the weighted median of its
	// rows' residuals.
	LossAbsolute Loss = "absolute"
	// LossHuber is Huber's (1964) loss: squared within δ of the target, linear beyond.
	// As in Friedman 2001 §4.4, δ is each round's 0.9 quantile of |y − F| over the
	// training rows, and a leaf takes its median residual plus the mean clipped
	// deviation from it.
	LossHuber Loss = "huber"
	// LossQuantile is the pinball loss of quantile regression (Koenker & Bassett 1978)
	// at level Params.Quantile: each leaf takes that quantile of its rows' residuals.
	LossQuantile Loss = "quantile"
	// LossPoisson is the Poisson deviance with a log link (F = log of the mean), for
	// counts ≥ 0; Newton leaves with g = e^F − y and h = e^F.
	LossPoisson Loss = "poisson"
)

// regressionLoss reports whether a loss fits a numeric target.
func regressionLoss(l Loss) bool {
	switch l {
	case LossSquared, LossAbsolute, LossHuber, LossQuantile, LossPoisson:
		return true
	}
	return false
}

// Task is what the target asks for.
type Task string

// The tasks.
const (
	Classification Task = "classification"
	Regression     Task = "regression"
)

// Impurity is the node impurity a classification split minimises.
// Regression always uses squared error.
type Impurity string

// The impurity measures.
const (
	Gini    Impurity = "gini"
	Entropy Impurity = "entropy"
)

// Defaults, in one place. Fully grown trees and √p (classification) or p/3 (regression)
// features per split follow Breiman (2001) and the reference implementations of his forest.
const (
	DefaultTrees       = 100
	DefaultMinLeaf     = 1.0
	DefaultBins        = 255 // one byte per cell together with the missing-value bin
	DefaultRowFraction = 1.0
	DefaultSeed        = 1
	// DefaultPermutationRows caps the out-of-bag rows each tree uses for permutation
	// importance: the cost is trees × features × rows × depth node visits, and the mean
	// over many trees is stable well before every row is used.
	DefaultPermutationRows = 10000

	// Boosting: a shrinkage of 0.1 and depth 6 are the common starting point for shallow
	// boosted trees (Friedman 2001 recommends a learning rate of 0.1 or less); patience 10
	// rides out the noise of a small holdout without training far past the best round.
	DefaultLearningRate = 0.1
	DefaultBoostDepth   = 6
	DefaultPatience     = 10
	// DefaultQuantile is the quantile loss's level: the upper edge of an 80 % band.
	DefaultQuantile = 0.9

	MaxBins = 65535 // bin codes are uint16 at most, with one code kept for missing values
)

// Params are the training controls. Start from [DefaultParams]; a zero field keeps the
// default that its comment names.
type Params struct {
	Method Method
	// Task is taken from the target when empty: categorical targets classify.
	Task     Task
	Impurity Impurity // classification only; default Gini
	// Trees is the number of trees (always 1 for MethodTree); for boosting and AdaBoost,
	// the most rounds, one tree each.
	Trees int
	// MaxDepth limits tree depth (root = depth 0); 0 means unlimited.
	MaxDepth int
	// MinLeaf is the least weight a leaf may hold; unweighted, that is a row count
	// (bootstrap copies count once each). Boosting counts row weight too, not the
	// hessian weight its gains use. AdaBoost rescales its row weights to sum to the row
	// count each round, so MinLeaf is a count of average-weight rows there.
	MinLeaf float64
	// MinGain is the least impurity decrease a split must bring, as a share of the
	// root's weight (the decrease at the node × node weight / root weight).
	MinGain float64
	// FeaturesPerSplit: 0 for the method's default (forest: √p or p/3; boosting: all), a
	// count when ≥ 1, a fraction of the features when in (0, 1).
	FeaturesPerSplit float64
	// RowFraction is the share of rows drawn for each tree (bagging and forests), or for
	// each boosting round, always without replacement (stochastic gradient boosting,
	// Friedman 2002).
	RowFraction float64
	// WithReplacement draws rows with replacement (the bootstrap) when true.
	WithReplacement bool
	// Bins is the largest number of bins per feature, not counting the missing bin.
	Bins int
	Seed uint64
	// Threads is the number of goroutines; 0 uses GOMAXPROCS. It never changes the model.
	Threads int
	// PermutationRows caps the out-of-bag rows per tree used for permutation
	// importance; negative turns permutation importance off.
	PermutationRows int
	// Ridge is the linear baseline's penalty λ ≥ 0 on the squared coefficients, the
	// intercept excepted (MethodLinear only; 0, the default, fits without a penalty).
	Ridge float64

	// Loss is the boosting loss; empty takes squared for regression, logistic for two
	// classes and multinomial for more.
	Loss Loss
	// LearningRate shrinks every boosted tree's values (boosting), or multiplies every
	// AdaBoost tree's α (default 1 there), in (0, 1].
	LearningRate float64
	// LeafPenalty is the L2 penalty λ on boosted leaf values: a leaf's value is
	// −Σg/(Σh + λ). Boosting only; ≥ 0.
	LeafPenalty float64
	// HoldoutFraction is the share of rows held out to stop boosting early; 0 trains every
	// round. In [0, 1).
	HoldoutFraction float64
	// Patience is how many rounds without a better holdout loss end boosting.
	Patience int
	// LeafLimit, when above 0, grows each boosted tree best first: the leaf whose best
	// split gains most splits next, until the tree has this many leaves (MaxDepth still
	// applies). 0 grows every node that can split, depth first. Boosting only; ≥ 0.
	LeafLimit int
	// Quantile is the level α of LossQuantile, in (0, 1); 0 takes DefaultQuantile. Other
	// losses leave it 0.
	Quantile float64
	// Exposure names the data set's exposure column (Dataset.SetExposure); Train sets it,
	// and only LossPoisson takes one. Such a model predicts the rate per unit of
	// exposure: multiply by a row's exposure for its mean count.
	Exposure string

	// Progress, when set, is called after each finished tree with the number done and the
	// total. Calls come from one goroutine at a time.
	Progress func(done, total int)
}

// DefaultParams returns the defaults for a method.
func DefaultParams(m Method) Params {
	p := Params{
		Method:          m,
		Trees:           DefaultTrees,
		MinLeaf:         DefaultMinLeaf,
		RowFraction:     DefaultRowFraction,
		WithReplacement: true,
		Bins:            DefaultBins,
		Seed:            DefaultSeed,
		PermutationRows: DefaultPermutationRows,
	}
	if m == MethodTree {
		p.Trees = 1
	}
	if m == MethodBoosting {
		// Each round draws its rows without replacement (Friedman 2002).
		p.MaxDepth, p.WithReplacement = DefaultBoostDepth, false
		p.LearningRate, p.Patience = DefaultLearningRate, DefaultPatience
	}
	if m == MethodLinear {
		// One design matrix, no trees, no resampling, no permutation importance.
		p.Trees, p.WithReplacement, p.PermutationRows = 1, false, -1
	}
	if m == MethodAdaBoost {
		// Stumps and no shrinkage, as in Freund & Schapire (1997) and Zhu et al. (2009).
		p.MaxDepth, p.WithReplacement, p.LearningRate = 1, false, 1
	}
	return p
}

// Validate reports the first control out of its range. It does not need the data; the
// checks that do (features per split against the feature count) run in Train.
func (p Params) Validate() error {
	switch p.Method {
	case MethodTree, MethodBagging, MethodForest, MethodBoosting, MethodAdaBoost, MethodLinear:
	default:
		return fmt.Errorf("forest: method %q: want %q, %q, %q, %q, %q or %q", p.Method, MethodTree, MethodBagging, MethodForest, MethodBoosting, MethodAdaBoost, MethodLinear)
	}
	if !(p.Ridge >= 0) || math.IsInf(p.Ridge, 0) {
		return fmt.Errorf("forest: ridge %g: want a finite number ≥ 0", p.Ridge)
	}
	if p.Ridge != 0 && p.Method != MethodLinear {
		return fmt.Errorf("forest: ridge %g: only method %q takes a ridge penalty", p.Ridge, MethodLinear)
	}
	switch p.Task {
	case "", Classification, Regression:
	default:
		return fmt.Errorf("forest: task %q: want %q or %q", p.Task, Classification, Regression)
	}
	switch p.Impurity {
	case "", Gini, Entropy:
	default:
		return fmt.Errorf("forest: impurity %q: want %q or %q", p.Impurity, Gini, Entropy)
	}
	if p.Trees < 1 {
		return fmt.Errorf("forest: trees %d: want at least 1", p.Trees)
	}
	if p.Method == MethodTree && p.Trees != 1 {
		return fmt.Errorf("forest: trees %d: method %q grows exactly 1", p.Trees, MethodTree)
	}
	if p.MaxDepth < 0 {
		return fmt.Errorf("forest: max_depth %d: want 0 (unlimited) or more", p.MaxDepth)
	}
	if !(p.MinLeaf > 0) || math.IsInf(p.MinLeaf, 0) {
		return fmt.Errorf("forest: min_leaf %g: want a finite number above 0", p.MinLeaf)
	}
	if !(p.MinGain >= 0) || math.IsInf(p.MinGain, 0) {
		return fmt.Errorf("forest: min_gain %g: want a finite number ≥ 0", p.MinGain)
	}
	if !(p.FeaturesPerSplit >= 0) || math.IsInf(p.FeaturesPerSplit, 0) ||
		(p.FeaturesPerSplit > 1 && p.FeaturesPerSplit != math.Trunc(p.FeaturesPerSplit)) {
		return fmt.Errorf("forest: features_per_split %g: want a whole count ≥ 1 or a fraction in (0, 1)", p.FeaturesPerSplit)
	}
	if !(p.RowFraction > 0 && p.RowFraction <= 1) {
		return fmt.Errorf("forest: row_fraction %g: want a number in (0, 1]", p.RowFraction)
	}
	if p.Bins < 2 || p.Bins > MaxBins {
		return fmt.Errorf("forest: bins %d: want 2 to %d", p.Bins, MaxBins)
	}
	if p.Threads < 0 {
		return fmt.Errorf("forest: threads %d: want 0 (all cores) or more", p.Threads)
	}
	if p.Method == MethodAdaBoost {
		return p.validateAdaBoost()
	}
	return p.validateBoosting()
}

// validateAdaBoost refuses the controls AdaBoost has no use for, naming them.
func (p Params) validateAdaBoost() error {
	m := MethodAdaBoost
	switch {
	case p.Task == Regression:
		return fmt.Errorf("forest: method %q classifies; the task is %q", m, Regression)
	case p.Loss != "":
		return fmt.Errorf("forest: loss %q: only method %q takes a loss", p.Loss, MethodBoosting)
	case p.HoldoutFraction != 0:
		return fmt.Errorf("forest: holdout_fraction %g: method %q does not stop early on a holdout", p.HoldoutFraction, m)
	case p.RowFraction != 1:
		return fmt.Errorf("forest: row_fraction %g: method %q grows every tree on all rows", p.RowFraction, m)
	case p.WithReplacement:
		return fmt.Errorf("forest: with_replacement: method %q does not resample rows", m)
	case p.FeaturesPerSplit != 0:
		return fmt.Errorf("forest: features_per_split %g: method %q considers every feature", p.FeaturesPerSplit, m)
	case p.LeafPenalty != 0:
		return fmt.Errorf("forest: leaf_penalty %g: only method %q takes a leaf penalty", p.LeafPenalty, MethodBoosting)
	case p.Quantile != 0 || p.Exposure != "":
		return fmt.Errorf("forest: quantile and exposure: only method %q takes them", MethodBoosting)
	case !(p.LearningRate > 0 && p.LearningRate <= 1):
		return fmt.Errorf("forest: learning_rate %g: want a number in (0, 1]", p.LearningRate)
	}
	return nil
}

// validateBoosting checks the boosting controls, and that other methods leave them unset.
func (p Params) validateBoosting() error {
	if p.LeafLimit < 0 || p.LeafLimit == 1 {
		return fmt.Errorf("forest: leaf_limit %d: want 0 (no limit) or 2 or more", p.LeafLimit)
	}
	if p.Method != MethodBoosting {
		if p.LeafLimit != 0 {
			return fmt.Errorf("forest: leaf_limit %d: only method %q grows trees best first", p.LeafLimit, MethodBoosting)
		}
		if p.Loss != "" {
			return fmt.Errorf("forest: loss %q: only method %q takes a loss", p.Loss, MethodBoosting)
		}
		if p.Quantile != 0 {
			return fmt.Errorf("forest: quantile %g: only loss %q takes a quantile", p.Quantile, LossQuantile)
		}
		if p.Exposure != "" {
			return fmt.Errorf("forest: exposure %q: only loss %q takes an exposure", p.Exposure, LossPoisson)
		}
		return nil
	}
	if p.Exposure != "" && p.Loss != LossPoisson {
		return fmt.Errorf("forest: exposure %q: only loss %q takes an exposure", p.Exposure, LossPoisson)
	}
	if p.Loss != "" && p.Loss != LossLogistic && p.Loss != LossMultinomial && !regressionLoss(p.Loss) {
		return fmt.Errorf("forest: loss %q: want %q, %q, %q, %q, %q, %q or %q", p.Loss,
			LossSquared, LossAbsolute, LossHuber, LossQuantile, LossPoisson, LossLogistic, LossMultinomial)
	}
	switch {
	case p.Task == Regression && p.Loss != "" && !regressionLoss(p.Loss):
		return fmt.Errorf("forest: loss %q: regression takes %s", p.Loss, regressionLosses)
	case p.Task == Classification && regressionLoss(p.Loss):
		return fmt.Errorf("forest: loss %q: classification takes %q or %q", p.Loss, LossLogistic, LossMultinomial)
	}
	if p.Quantile != 0 && p.Loss != LossQuantile {
		return fmt.Errorf("forest: quantile %g: only loss %q takes a quantile", p.Quantile, LossQuantile)
	}
	if !(p.Quantile >= 0 && p.Quantile < 1) {
		return fmt.Errorf("forest: quantile %g: want a number in (0, 1)", p.Quantile)
	}
	if !(p.LearningRate > 0 && p.LearningRate <= 1) {
		return fmt.Errorf("forest: learning_rate %g: want a number in (0, 1]", p.LearningRate)
	}
	if !(p.LeafPenalty >= 0) || math.IsInf(p.LeafPenalty, 0) {
		return fmt.Errorf("forest: leaf_penalty %g: want a finite number ≥ 0", p.LeafPenalty)
	}
	if !(p.HoldoutFraction >= 0 && p.HoldoutFraction < 1) {
		return fmt.Errorf("forest: holdout_fraction %g: want a number in [0, 1)", p.HoldoutFraction)
	}
	if p.Patience < 1 {
		return fmt.Errorf("forest: patience %d: want at least 1", p.Patience)
	}
	if p.WithReplacement {
		return fmt.Errorf("forest: with_replacement: method %q draws rows without replacement", MethodBoosting)
	}
	return nil
}

// regressionLosses lists the losses a numeric target takes, for messages.
const regressionLosses = `"squared", "absolute", "huber", "quantile" or "poisson"`

// featuresPerSplit resolves FeaturesPerSplit against p features.
func (p Params) featuresPerSplit(task Task, features int) (int, error) {
	if p.Method != MethodForest && p.Method != MethodBoosting {
		if p.FeaturesPerSplit != 0 && p.FeaturesPerSplit != float64(features) {
			// Only the forest samples features; say so rather than ignore the control.
			return 0, fmt.Errorf("forest: features_per_split %g: method %q considers every feature", p.FeaturesPerSplit, p.Method)
		}
		return features, nil
	}
	var k int
	switch f := p.FeaturesPerSplit; {
	case f == 0 && p.Method == MethodBoosting:
		k = features // boosting considers every feature unless told otherwise
	case f == 0 && task == Classification:
		k = int(math.Floor(math.Sqrt(float64(features))))
	case f == 0:
		k = features / 3
	case f < 1:
		k = int(math.Floor(f * float64(features)))
	default:
		k = int(f)
		if k > features {
			return 0, fmt.Errorf("forest: features_per_split %d: the data has %d features", k, features)
		}
	}
	return max(1, min(k, features)), nil
}
