package forest

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"
)

// Per-row explanations: how much each feature moves one row's score away from a
// baseline, additively (baseline + Σ contributions = the score).
//
// Trees are explained by path-dependent Tree SHAP (Lundberg, Erion & Lee 2018,
// "Consistent individualized feature attribution for tree ensembles", Algorithm 2): the
// exact Shapley values (Shapley 1953) of the game whose worth of a feature set S is the
// tree's expected output given x_S, E[f(x) | x_S], taken over the training rows as the
// tree saw them. At a split on a feature in S the row's branch is followed; at any other
// split both branches are averaged, weighted by the training weight (cover) that reached
// each. The algorithm walks each tree once per row and costs O(L·D²) for L leaves and
// depth D. The baseline is the worth of the empty set: the cover-weighted mean output.
//
// Each child's share of a split is its cover over the sum of the two children's covers
// (equal to the parent's cover up to rounding); a split whose children hold no weight
// shares ½ and ½.
//
// The scale on which contributions add up (Space) follows the model: class probabilities
// for trees, bagging and forests (each tree's leaf class shares, averaged) and for
// AdaBoost (its α-weighted vote shares, which are its probabilities); the value for
// regression, boosting with an identity link included; the raw score before the link
// (margin) for boosting with logistic, multinomial or Poisson loss and for logistic
// regression. A linear model's contributions are coefficient × (x − training mean) per
// term, summed by feature (a categorical feature's level and missing indicators, a
// numeric feature's value and missing indicator); its baseline is the score at the
// training means. A blend's are the weighted sum of its members' (rule "average" only,
// and only when every member explains a prediction: probabilities or values).

// Space names the scale on which an explanation adds up.
type Space string

// The spaces.
const (
	// SpaceProbability: class probabilities, one output per class.
	SpaceProbability Space = "probability"
	// SpaceValue: the predicted value of a regression, one output.
	SpaceValue Space = "value"
	// SpaceMargin: the raw score before the link: log-odds of the second class
	// (logistic), one raw score per class (multinomial) or the log of the mean (Poisson).
	SpaceMargin Space = "margin"
)

// Explanation is one row's additive explanation, filled by [Model.Explain]. Its slices
// are reused from row to row: copy what must outlive the next call. An Explanation is
// scratch for one goroutine; give each goroutine its own.
type Explanation struct {
	// Space is the scale of Baseline and Contributions.
	Space Space
	// Outputs names each output: the class names, the positive class (logistic
	// margins), or the target (values, Poisson margins).
	Outputs []string
	// Baseline holds one number per output: the score with no feature known.
	Baseline []float64
	// Contributions holds one number per output and feature, output by output:
	// Contributions[k*F+f] is feature f's share of output k (F features in model order).
	Contributions []float64

	model *Model
	plan  *explainPlan
}

// Output returns output k's contributions, one per feature (aliasing Contributions).
func (e *Explanation) Output(k int) []float64 {
	F := e.plan.features
	return e.Contributions[k*F : (k+1)*F]
}

// Explain fills e with the explanation of one row (coded as for PredictRow). The first
// call for a model sizes e and derives what every row shares (the baselines); later
// calls with the same model do not allocate. The model is only read, so goroutines may
// explain rows of one model at once, each with its own Explanation. It fails when the
// row is too short, or when the model cannot be explained additively (a blend that votes,
// or whose members average predictions while some explain raw scores).
func (m *Model) Explain(row []float64, e *Explanation) error {
	if e.model != m {
		p, err := newExplainPlan(m)
		if err != nil {
			return fmt.Errorf("forest: explain: %w", err)
		}
		*e = Explanation{
			Space: p.space, Outputs: p.outputs, Baseline: make([]float64, p.outputsN),
			Contributions: make([]float64, p.outputsN*p.features), model: m, plan: p,
		}
	}
	p := e.plan
	if len(row) < p.features {
		return fmt.Errorf("forest: explain: the row holds %d numbers, the model has %d features", len(row), p.features)
	}
	copy(e.Baseline, p.baseline)
	clear(e.Contributions)
	p.explain(row[:p.features], e.Contributions)
	return nil
}

// ExplainSpace returns the space and output names that Explain will use for m, or the
// reason it cannot explain m; hosts call it once to lay out their results.
func (m *Model) ExplainSpace() (Space, []string, error) {
	p, err := newExplainPlan(m)
	if err != nil {
		return "", nil, fmt.Errorf("forest: explain: %w", err)
	}
	return p.space, p.outputs, nil
}

// leafMode says what a tree's leaf adds to the outputs.
type leafMode uint8

const (
	leafVector leafMode = iota // the leaf's Width numbers, one per output
	leafScalar                 // the leaf's single number, to one output
	leafVote                   // the scale, to the output of the leaf's heaviest class
)

// shapTree is one tree of a plan and how its leaves enter the outputs: scaled by scale,
// as mode says, into output out (leafScalar).
type shapTree struct {
	t     *Tree
	scale float64
	mode  leafMode
	out   int
}

// pathElem is one feature on the path from the root to the current node (Algorithm 2's
// m): zero is the share of the training cover that the path keeps when the feature is
// unknown, one is 1 when the row's value follows the path and 0 when not, and weight
// is the proportion of feature subsets of each size that the element stands for.
type pathElem struct {
	feature   int32
	zero, one float64
	weight    float64
}

// explainPlan is what explaining a model's rows needs: fixed parts derived once from
// the model and the scratch one goroutine works in.
type explainPlan struct {
	space    Space
	outputs  []string
	outputsN int
	features int
	baseline []float64

	// Trees.
	trees []shapTree
	path  []pathElem // Algorithm 2's path copies, one segment per depth
	inv   []float64  // inv[j] = 1/j, up to the longest path
	coef  []float64  // a leaf's multiplier of its output, per path element
	row   []float64
	phi   []float64

	// Linear: the training mean of each term's column.
	linear   *Linear
	termMean []float64

	// Blend: one plan per member, its weight, where its features sit in the blend's row,
	// and the member's row.
	members []*explainPlan
	weights []float64
	index   [][]int
	rows    [][]float64
	memPhi  [][]float64
}

// newExplainPlan derives the plan for m.
func newExplainPlan(m *Model) (*explainPlan, error) {
	p := &explainPlan{features: len(m.Features)}
	var err error
	switch {
	case m.Blend != nil:
		err = p.planBlend(m)
	case m.Linear != nil:
		err = p.planLinear(m)
	default:
		err = p.planTrees(m)
	}
	if err != nil {
		return nil, err
	}
	p.outputs = slices.Clone(p.outputs) // the caller's to keep; the model's stay as they are
	return p, nil
}

// planTrees derives the plan of a tree ensemble: how each tree enters the outputs, the
// baselines, and the path scratch.
func (p *explainPlan) planTrees(m *Model) error {
	if len(m.Trees) == 0 {
		return errors.New("the model has no trees")
	}
	switch b := m.Boost; {
	case b != nil && len(b.InitScore) > 1:
		K := len(b.InitScore)
		p.setSpace(SpaceMargin, m.Classes)
		copy(p.baseline, b.InitScore)
		for ti, t := range m.Trees {
			p.trees = append(p.trees, shapTree{t: t, scale: 1, mode: leafScalar, out: ti % K})
		}
	case b != nil:
		switch b.Loss {
		case LossLogistic:
			p.setSpace(SpaceMargin, m.Classes[1:2])
		case LossPoisson:
			p.setSpace(SpaceMargin, []string{m.Target})
		default:
			p.setSpace(SpaceValue, []string{m.Target})
		}
		p.baseline[0] = b.InitScore[0]
		for _, t := range m.Trees {
			p.trees = append(p.trees, shapTree{t: t, scale: 1, mode: leafScalar})
		}
	case m.AdaBoost != nil:
		p.setSpace(SpaceProbability, m.Classes)
		sum := 0.0
		for _, a := range m.AdaBoost.Alpha {
			sum += a
		}
		for ti, t := range m.Trees {
			p.trees = append(p.trees, shapTree{t: t, scale: m.AdaBoost.Alpha[ti] / sum, mode: leafVote})
		}
	default:
		if m.Task == Classification {
			p.setSpace(SpaceProbability, m.Classes)
		} else {
			p.setSpace(SpaceValue, []string{m.Target})
		}
		scale := 1 / float64(len(m.Trees))
		for _, t := range m.Trees {
			p.trees = append(p.trees, shapTree{t: t, scale: scale, mode: leafVector})
		}
	}
	// The path holds, at depth l, a copy of at most min(l, F) + 1 elements.
	size, most := 0, 0
	for i := range p.trees {
		tr := &p.trees[i]
		if tr.t.Width < 1 || (tr.mode == leafVector && tr.t.Width != p.outputsN) {
			return fmt.Errorf("tree %d has width %d for %d outputs", i, tr.t.Width, p.outputsN)
		}
		p.expectation(tr, p.baseline)
		most = max(most, tr.t.Depth())
	}
	for l := 0; l <= most+1; l++ {
		size += min(l, p.features) + 2
	}
	p.path = make([]pathElem, size)
	p.inv = make([]float64, min(most, p.features)+3)
	for j := 1; j < len(p.inv); j++ {
		p.inv[j] = 1 / float64(j)
	}
	p.coef = make([]float64, len(p.inv))
	return nil
}

// setSpace sets the space and outputs and sizes the baseline.
func (p *explainPlan) setSpace(s Space, outputs []string) {
	p.space, p.outputs, p.outputsN = s, outputs, len(outputs)
	p.baseline = make([]float64, p.outputsN)
}

// coverShares returns the shares of split node n's left and right child: each child's
// cover over their sum, or ½ each when they hold no (or no valid) weight.
func coverShares(t *Tree, n *Node) (left, right float64) {
	l, r := t.Cover[n.Left], t.Cover[n.Left+1]
	s := l + r
	if !(l >= 0 && r >= 0 && s > 0) || math.IsInf(s, 0) {
		return 0.5, 0.5
	}
	return l / s, r / s
}

// expectation adds the tree's cover-weighted mean output (its worth with no feature
// known) to dst, walking the nodes in order (parents before children).
func (p *explainPlan) expectation(tr *shapTree, dst []float64) {
	t := tr.t
	reach := make([]float64, len(t.Nodes))
	reach[0] = 1
	for i := range t.Nodes {
		n := &t.Nodes[i]
		if n.Left >= 0 {
			l, r := coverShares(t, n)
			reach[n.Left] = reach[i] * l
			reach[n.Left+1] = reach[i] * r
			continue
		}
		p.leafAdd(tr, i, reach[i]*tr.scale, dst)
	}
}

// leafAdd adds c times leaf i's output to dst, one number per output.
func (p *explainPlan) leafAdd(tr *shapTree, i int, c float64, dst []float64) {
	t := tr.t
	v := t.Value[i*t.Width : (i+1)*t.Width]
	switch tr.mode {
	case leafVector:
		for k, x := range v {
			dst[k] += c * x
		}
	case leafScalar:
		dst[tr.out] += c * v[0]
	case leafVote:
		dst[Class(v)] += c
	}
}

// explain adds the row's contributions to phi (outputs × features).
func (p *explainPlan) explain(row, phi []float64) {
	switch {
	case p.members != nil:
		p.explainBlend(row, phi)
		return
	case p.linear != nil:
		p.explainLinear(row, phi)
		return
	}
	p.row, p.phi = row, phi
	for i := range p.trees {
		p.recurse(&p.trees[i], 0, 0, 0, 1, 1, -1)
	}
	p.row, p.phi = nil, nil
}

// recurse is Algorithm 2's RECURSE at node j of tree tr. The parent's path holds n
// elements ending at p.path[at]; this node's path is written after it, extended by the
// split that led here: its feature, the share zero of the cover that the path keeps
// without it, and one (1 when the row's value took this branch).
func (p *explainPlan) recurse(tr *shapTree, j int32, at, n int, zero, one float64, feature int32) {
	path := p.path[at : at+n+1]
	copy(path, p.path[at-n:at])
	extendPath(path, zero, one, feature)
	t := tr.t
	nd := &t.Nodes[j]
	if nd.Left < 0 {
		p.leaf(tr, int(j), path)
		return
	}
	hot := nd.Left + t.step(nd, p.row[nd.Feature])
	cold := 2*nd.Left + 1 - hot
	hotShare, coldShare := coverShares(t, nd)
	if hot != nd.Left {
		hotShare, coldShare = coldShare, hotShare
	}
	// A feature met before on the path leaves it: its fractions carry into the children.
	iz, io := 1.0, 1.0
	for k := 1; k < len(path); k++ {
		if path[k].feature == nd.Feature {
			iz, io = path[k].zero, path[k].one
			path = unwindPath(path, k, p.inv)
			break
		}
	}
	l := len(path)
	// A branch that no feature set reaches (no cover and not followed) adds nothing.
	if z := iz * hotShare; z != 0 || io != 0 {
		p.recurse(tr, hot, at+l, l, z, io, nd.Feature)
	}
	if z := iz * coldShare; z != 0 {
		p.recurse(tr, cold, at+l, l, z, 0, nd.Feature)
	}
}

// leaf credits leaf i's output to each feature on the path (Algorithm 2's leaf step):
// the element's weight summed over subset sizes with the element unwound, times
// (one − zero). For an element the row does not follow (one = 0) that sum is
// (n+1)/zero · Σ_j weight_j/(n−j), whose sum is the same for every such element.
func (p *explainPlan) leaf(tr *shapTree, i int, path []pathElem) {
	n := len(path) - 1
	inv := p.inv
	cold := math.NaN()
	for k := 1; k <= n; k++ {
		e := &path[k]
		var w float64
		if e.one != 0 {
			w = unwoundSum(path, k, inv)
		} else {
			if cold != cold {
				cold = 0
				for j := range n {
					cold += path[j].weight * inv[n-j]
				}
				cold *= float64(n + 1)
			}
			w = cold / e.zero
		}
		p.coef[k] = w * (e.one - e.zero) * tr.scale
	}
	t, F := tr.t, p.features
	v := t.Value[i*t.Width : (i+1)*t.Width]
	switch tr.mode {
	case leafVector:
		for o, x := range v {
			phi := p.phi[o*F : (o+1)*F]
			for k := 1; k <= n; k++ {
				phi[path[k].feature] += p.coef[k] * x
			}
		}
	case leafScalar:
		phi := p.phi[tr.out*F : (tr.out+1)*F]
		for k := 1; k <= n; k++ {
			phi[path[k].feature] += p.coef[k] * v[0]
		}
	case leafVote:
		c := Class(v)
		phi := p.phi[c*F : (c+1)*F]
		for k := 1; k <= n; k++ {
			phi[path[k].feature] += p.coef[k]
		}
	}
}

// extendPath is Algorithm 2's EXTEND: path holds the old elements and one free slot at
// its end, which takes the new element; the weights then count subsets that may or may
// not include it.
func extendPath(path []pathElem, zero, one float64, feature int32) {
	n := len(path) - 1 // elements before the new one
	w := 0.0
	if n == 0 {
		w = 1
	}
	path[n] = pathElem{feature: feature, zero: zero, one: one, weight: w}
	r := 1 / float64(n+1)
	zr, or := zero*r, one*r
	for i := n - 1; i >= 0; i-- {
		w := path[i].weight
		path[i+1].weight += or * w * float64(i+1)
		path[i].weight = zr * w * float64(n-i)
	}
}

// unwindPath is Algorithm 2's UNWIND: it undoes the extension by element k and returns
// the path one element shorter. inv[j] is 1/j.
func unwindPath(path []pathElem, k int, inv []float64) []pathElem {
	n := len(path) - 1
	zero, one := path[k].zero, path[k].one
	d := float64(n + 1)
	if one != 0 {
		c, z := d/one, zero*inv[n+1]
		next := path[n].weight
		for i := n - 1; i >= 0; i-- {
			w := path[i].weight
			path[i].weight = next * c * inv[i+1]
			next = w - path[i].weight*z*float64(n-i)
		}
	} else {
		c := d / zero
		for i := n - 1; i >= 0; i-- {
			path[i].weight *= c * inv[n-i]
		}
	}
	for i := k; i < n; i++ {
		path[i].feature, path[i].zero, path[i].one = path[i+1].feature, path[i+1].zero, path[i+1].one
	}
	return path[:n]
}

// unwoundSum is the total weight the path would have with element k unwound, without
// unwinding it; element k must be one the row follows (one ≠ 0). inv[j] is 1/j.
func unwoundSum(path []pathElem, k int, inv []float64) float64 {
	n := len(path) - 1
	zero, one := path[k].zero, path[k].one
	c, z := float64(n+1)/one, zero*inv[n+1]
	total := 0.0
	next := path[n].weight
	for i := n - 1; i >= 0; i-- {
		// The weight unwound at i is next·a; the next one down subtracts its share.
		// Written so that only a multiply and a subtract wait on the previous step.
		a := c * inv[i+1]
		total += next * a
		next = path[i].weight - next*(a*z*float64(n-i))
	}
	return total
}

// planLinear derives a linear model's term means from the training distribution the
// model keeps per feature (its bin weights): the training mean fills a missing numeric
// value, so that column's mean is that mean; an indicator's is its weighted share of the
// training rows. Levels that training grouped into one bin (past the bin cap) share
// that bin's weight equally.
func (p *explainPlan) planLinear(m *Model) error {
	l := m.Linear
	if m.Task == Classification {
		if len(m.Classes) != 2 {
			return fmt.Errorf("a linear model of %d classes", len(m.Classes))
		}
		p.setSpace(SpaceMargin, m.Classes[1:2])
	} else {
		p.setSpace(SpaceValue, []string{m.Target})
	}
	p.linear = l
	p.termMean = make([]float64, len(l.Terms))
	for j := range l.Terms {
		t := &l.Terms[j]
		var mean float64
		switch t.Kind {
		case TermIntercept:
			mean = 1
		case TermValue:
			mean = t.Fill
		default:
			b := &m.Features[t.Feature].Binning
			total := 0.0
			for _, c := range b.Counts {
				total += c
			}
			if !(total > 0) {
				return fmt.Errorf("feature %q keeps no training weights, so the means of its terms are unknown", m.Features[t.Feature].Name)
			}
			bin := 0
			if t.Kind == TermLevel {
				if t.Level >= len(b.LevelBin) {
					return fmt.Errorf("term %q: level %d is not in the feature's bins", t.Name, t.Level)
				}
				bin = int(b.LevelBin[t.Level])
			}
			if bin >= len(b.Counts) {
				return fmt.Errorf("term %q: bin %d of %d", t.Name, bin, len(b.Counts))
			}
			mean = b.Counts[bin] / total
			if t.Kind == TermLevel && bin != 0 {
				shared := 0
				for _, lb := range b.LevelBin {
					if int(lb) == bin {
						shared++
					}
				}
				mean /= float64(shared)
			}
		}
		p.termMean[j] = mean
		p.baseline[0] += t.Estimate * mean
	}
	return nil
}

// explainLinear adds coefficient × (term − mean) of every term but the intercept to the
// term's feature.
func (p *explainPlan) explainLinear(row, phi []float64) {
	for j := range p.linear.Terms {
		t := &p.linear.Terms[j]
		if t.Kind == TermIntercept {
			continue
		}
		phi[t.Feature] += t.Estimate * (t.value(row) - p.termMean[j])
	}
}

// planBlend derives a plan per member and checks that their weighted sum explains the
// blend: rule "average", and every member explaining its prediction.
func (p *explainPlan) planBlend(m *Model) error {
	b := m.Blend
	if b.Rule != BlendAverage {
		return fmt.Errorf("blend rule %q counts votes, which do not add up feature by feature; only rule %q can be explained", b.Rule, BlendAverage)
	}
	var raw []string
	for j, mem := range b.Members {
		mp, err := newExplainPlan(mem)
		if err != nil {
			return fmt.Errorf("blend member %q: %w", b.Names[j], err)
		}
		if mp.space == SpaceMargin {
			raw = append(raw, fmt.Sprintf("%q", b.Names[j]))
		}
		p.members = append(p.members, mp)
	}
	if raw != nil {
		return fmt.Errorf("the blend averages predictions, but member %s explains raw scores (space %q), which do not add up to them", strings.Join(raw, ", "), SpaceMargin)
	}
	first := p.members[0]
	for j, mp := range p.members {
		if mp.space != first.space || mp.outputsN != first.outputsN {
			return fmt.Errorf("blend members %q and %q explain in different spaces (%q with %d outputs, %q with %d)",
				b.Names[0], b.Names[j], first.space, first.outputsN, mp.space, mp.outputsN)
		}
	}
	p.setSpace(first.space, first.outputs)
	if m.Task == Classification {
		p.outputs = m.Classes
	}
	at := make(map[string]int, len(m.Features))
	for i, f := range m.Features {
		at[f.Name] = i
	}
	p.weights = b.Weights
	for j, mp := range p.members {
		idx := make([]int, len(b.Members[j].Features))
		for f, fi := range b.Members[j].Features {
			i, ok := at[fi.Name]
			if !ok {
				return fmt.Errorf("blend member %q: feature %q is not among the blend's", b.Names[j], fi.Name)
			}
			idx[f] = i
		}
		p.index = append(p.index, idx)
		for k, v := range mp.baseline {
			p.baseline[k] += b.Weights[j] * v
		}
		p.rows = append(p.rows, make([]float64, mp.features))
		p.memPhi = append(p.memPhi, make([]float64, mp.outputsN*mp.features))
	}
	return nil
}

// explainBlend explains the row with each member and adds their weighted contributions
// at the blend's feature positions.
func (p *explainPlan) explainBlend(row, phi []float64) {
	F := p.features
	for j, mp := range p.members {
		idx := p.index[j]
		r := p.rows[j]
		for f, i := range idx {
			r[f] = row[i]
		}
		mphi := p.memPhi[j]
		clear(mphi)
		mp.explain(r, mphi)
		w := p.weights[j]
		mf := mp.features
		for k := range p.outputsN {
			for f, i := range idx {
				phi[k*F+i] += w * mphi[k*mf+f]
			}
		}
	}
}
