package forest

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"sync"
	"testing"
)

// randomTree grows a random tree over features of the given kinds (categorical ones have
// levels levels): up to maxDepth deep, each split on a random feature (so features repeat
// along a path), numeric thresholds in [0, 1), random level sets and default directions.
// Leaves get random covers (some 0) and inner nodes the sum of their children's; leaves
// get random values, Width of them (class shares that sum to 1 when width > 1).
func randomTree(r *rand.Rand, kinds []Kind, levels, maxDepth, width int) *Tree {
	t := &Tree{Width: width}
	depth := []int{0}
	t.addNode(width)
	for i := 0; i < len(t.Nodes); i++ {
		if depth[i] >= maxDepth || (i > 0 && r.Float64() < 0.25) {
			continue
		}
		left := t.addNode(width)
		t.addNode(width)
		depth = append(depth, depth[i]+1, depth[i]+1)
		n := &t.Nodes[i]
		n.Left, n.Feature, n.DefaultLeft = left, int32(r.IntN(len(kinds))), r.IntN(2) == 0
		if kinds[n.Feature] == Numeric {
			n.Threshold = r.Float64()
			continue
		}
		var bits uint64
		for c := range 64 {
			if c < levels && r.IntN(2) == 0 || c >= levels && n.DefaultLeft {
				bits |= 1 << c
			}
		}
		n.LevelSet = int32(len(t.LevelSets))
		t.LevelSets = append(t.LevelSets, []uint64{bits})
	}
	for i := len(t.Nodes) - 1; i >= 0; i-- {
		n := &t.Nodes[i]
		if n.Left >= 0 {
			t.Cover[i] = t.Cover[n.Left] + t.Cover[n.Left+1]
			continue
		}
		if r.Float64() >= 0.1 {
			t.Cover[i] = float64(1 + r.IntN(50))
		}
		v := t.NodeValue(i)
		sum := 0.0
		for k := range v {
			v[k] = 2*r.Float64() - 1
			if width > 1 {
				v[k] = r.Float64()
				sum += v[k]
			}
		}
		for k := range v {
			if width > 1 {
				v[k] /= sum
			}
		}
	}
	return t
}

// randomRow draws a row for the random trees: numeric values in [0, 1), level codes
// including unseen ones (past the levels and past the level set's word), and missing
// values.
func randomRow(r *rand.Rand, kinds []Kind, levels int) []float64 {
	row := make([]float64, len(kinds))
	for f, k := range kinds {
		switch {
		case r.Float64() < 0.15:
			row[f] = math.NaN()
		case k == Numeric:
			row[f] = r.Float64()
		case r.Float64() < 0.1:
			row[f] = float64([]int{levels, 70}[r.IntN(2)])
		default:
			row[f] = float64(r.IntN(levels))
		}
	}
	return row
}

// worth is the path-dependent conditional expectation E[f(x) | x_S] of one tree (Lundberg,
// Erion & Lee 2018, Algorithm 1): at a split on a feature in S (a bit set) the row's
// branch, at any other the children's worths averaged with their covers as weights
// (½ each when both covers are 0, the convention of explain.go). out maps a leaf to the
// numbers it adds.
func worth(t *Tree, j int32, row []float64, S uint, out func(leaf int) []float64) []float64 {
	n := &t.Nodes[j]
	if n.Left < 0 {
		return out(int(j))
	}
	if S&(1<<n.Feature) != 0 {
		return worth(t, n.Left+t.step(n, row[n.Feature]), row, S, out)
	}
	l := worth(t, n.Left, row, S, out)
	r := worth(t, n.Left+1, row, S, out)
	cl, cr := t.Cover[n.Left], t.Cover[n.Left+1]
	a, b := 0.5, 0.5
	if cl+cr > 0 {
		a, b = cl/(cl+cr), cr/(cl+cr)
	}
	v := make([]float64, len(l))
	for k := range v {
		v[k] = a*l[k] + b*r[k]
	}
	return v
}

// modelWorth is a hand-built model's worth of S in its explanation space: the mean of
// the trees' worths (forest), the initial scores plus each tree's worth on its class
// (multinomial boosting), or the α-weighted worths of the trees' class votes (AdaBoost).
func modelWorth(m *Model, row []float64, S uint) []float64 {
	K := m.Width()
	v := make([]float64, K)
	switch {
	case m.Boost != nil:
		copy(v, m.Boost.InitScore)
		for ti, t := range m.Trees {
			v[ti%K] += worth(t, 0, row, S, func(i int) []float64 { return t.NodeValue(i) })[0]
		}
	case m.AdaBoost != nil:
		sum := 0.0
		for _, a := range m.AdaBoost.Alpha {
			sum += a
		}
		for ti, t := range m.Trees {
			w := worth(t, 0, row, S, func(i int) []float64 {
				vote := make([]float64, K)
				vote[Class(t.NodeValue(i))] = 1
				return vote
			})
			for k := range v {
				v[k] += m.AdaBoost.Alpha[ti] / sum * w[k]
			}
		}
	default:
		for _, t := range m.Trees {
			w := worth(t, 0, row, S, func(i int) []float64 { return t.NodeValue(i) })
			for k := range v {
				v[k] += w[k] / float64(len(m.Trees))
			}
		}
	}
	return v
}

// bruteShapley computes Shapley values from their definition (Shapley 1953): feature i
// gets Σ over S ⊆ N∖{i} of |S|!(F−|S|−1)!/F! · (v(S ∪ {i}) − v(S)), output by output;
// it returns them (outputs × features) and v(∅).
func bruteShapley(m *Model, row []float64) ([]float64, []float64) {
	F, K := len(m.Features), m.Width()
	v := make([][]float64, 1<<F)
	for S := range v {
		v[S] = modelWorth(m, row, uint(S))
	}
	fact := func(n int) float64 {
		f := 1.0
		for i := 2; i <= n; i++ {
			f *= float64(i)
		}
		return f
	}
	phi := make([]float64, K*F)
	for i := range F {
		for S := range v {
			if S&(1<<i) != 0 {
				continue
			}
			s := 0
			for b := S; b != 0; b &= b - 1 {
				s++
			}
			w := fact(s) * fact(F-s-1) / fact(F)
			for k := range K {
				phi[k*F+i] += w * (v[S|1<<i][k] - v[S][k])
			}
		}
	}
	return phi, v[0]
}

// randomModel builds a model of random trees of kind: a classification forest (3
// classes), a regression forest, multinomial boosting (3 classes, 2 rounds) or AdaBoost.
func randomModel(r *rand.Rand, kind string) *Model {
	F := 2 + r.IntN(5)
	kinds := make([]Kind, F)
	feats := make([]FeatureInfo, F)
	for f := range kinds {
		feats[f] = FeatureInfo{Name: fmt.Sprintf("f%d", f), Kind: Numeric}
		if r.IntN(3) == 0 {
			feats[f].Kind, feats[f].Levels = Categorical, []string{"a", "b", "c", "d"}
		}
		kinds[f] = feats[f].Kind
	}
	depth := 1 + r.IntN(5)
	classes := []string{"u", "v", "w"}
	m := &Model{Method: MethodForest, Task: Classification, Classes: classes, Features: feats}
	switch kind {
	case "forest":
		for range 1 + r.IntN(3) {
			m.Trees = append(m.Trees, randomTree(r, kinds, 4, depth, 3))
		}
	case "regression":
		m.Task, m.Classes = Regression, nil
		for range 1 + r.IntN(3) {
			m.Trees = append(m.Trees, randomTree(r, kinds, 4, depth, 1))
		}
	case "multinomial":
		m.Method = MethodBoosting
		m.Boost = &Boost{Loss: LossMultinomial, InitScore: []float64{-0.5, 0.2, 0.1}}
		for range 6 {
			m.Trees = append(m.Trees, randomTree(r, kinds, 4, depth, 1))
		}
	case "adaboost":
		m.Method = MethodAdaBoost
		m.AdaBoost = &AdaBoost{}
		for range 1 + r.IntN(3) {
			m.Trees = append(m.Trees, randomTree(r, kinds, 4, depth, 3))
			m.AdaBoost.Alpha = append(m.AdaBoost.Alpha, 0.1+r.Float64())
		}
	}
	return m
}

// Tree SHAP equals the Shapley values computed by brute force from their definition
// (Shapley 1953) over every feature subset, with the path-dependent conditional
// expectation as the worth (Lundberg, Erion & Lee 2018, Algorithm 1), to 1e-9, on random
// trees and ensembles up to depth 5 over up to 6 numeric and categorical features, with
// repeated split features, missing values, unseen levels and leaves without cover; the
// baseline equals the worth of the empty set.
func TestExplainMatchesBruteForceShapley(t *testing.T) {
	r := newRand(5)
	for _, kind := range []string{"forest", "regression", "multinomial", "adaboost"} {
		t.Run(kind, func(t *testing.T) {
			for trial := range 60 {
				m := randomModel(r, kind)
				kinds := make([]Kind, len(m.Features))
				for f, fi := range m.Features {
					kinds[f] = fi.Kind
				}
				var e Explanation
				for range 4 {
					row := randomRow(r, kinds, 4)
					must(t, m.Explain(row, &e))
					phi, base := bruteShapley(m, row)
					for k := range base {
						if d := math.Abs(e.Baseline[k] - base[k]); d > 1e-9 {
							t.Fatalf("trial %d row %v output %d: baseline %v, brute force %v", trial, row, k, e.Baseline[k], base[k])
						}
					}
					for i := range phi {
						if d := math.Abs(e.Contributions[i] - phi[i]); d > 1e-9 {
							t.Fatalf("trial %d row %v: contribution %d is %v, brute force %v (all %v vs %v)",
								trial, row, i, e.Contributions[i], phi[i], e.Contributions, phi)
						}
					}
				}
			}
		})
	}
}

// Worked by hand. A stump on x0 (threshold 0.5, missing left) over features x0 and x1:
// the left leaf holds cover 3 and value 1, the right cover 1 and value 5, so the baseline
// is (3·1 + 1·5)/4 = 2; a row that goes left scores 1, all of it x0's doing: x0 gets
// 1 − 2 = −1 and x1, never split on, 0; a row that goes right gets 5 − 2 = +3.
//
// A depth-2 tree "both small": x0 ≤ 0.5 then x1 ≤ 0.5 on both sides, every leaf of
// cover 1, value 1 at (small, small) and 0 elsewhere. For the row (0.2, 0.2): v(∅) = ¼,
// v({x0}) = v({x1}) = ½, v({x0, x1}) = 1, so each feature gets
// ½·(½ − ¼) + ½·(1 − ½) = 3/8 and the baseline is ¼. For (0.2, 0.9): v({x0}) = ½,
// v({x1}) = 0, v(N) = 0, so x0 gets ½·(½ − ¼) + ½·(0 − 0) = 1/8 and x1
// ½·(0 − ¼) + ½·(0 − ½) = −3/8.
func TestExplainByHand(t *testing.T) {
	feats := []FeatureInfo{{Name: "x0", Kind: Numeric}, {Name: "x1", Kind: Numeric}}
	stump := &Tree{
		Nodes: []Node{
			{Threshold: 0.5, Left: 1, Feature: 0, LevelSet: -1, DefaultLeft: true},
			{Left: -1, LevelSet: -1}, {Left: -1, LevelSet: -1},
		},
		Gain: make([]float64, 3), Cover: []float64{4, 3, 1}, Value: []float64{2, 1, 5}, Width: 1,
	}
	both := &Tree{
		Nodes: []Node{
			{Threshold: 0.5, Left: 1, Feature: 0, LevelSet: -1},
			{Threshold: 0.5, Left: 3, Feature: 1, LevelSet: -1},
			{Threshold: 0.5, Left: 5, Feature: 1, LevelSet: -1},
			{Left: -1, LevelSet: -1}, {Left: -1, LevelSet: -1},
			{Left: -1, LevelSet: -1}, {Left: -1, LevelSet: -1},
		},
		Gain: make([]float64, 7), Cover: []float64{4, 2, 2, 1, 1, 1, 1},
		Value: []float64{0, 0, 0, 1, 0, 0, 0}, Width: 1,
	}
	for _, c := range []struct {
		name       string
		tree       *Tree
		row        []float64
		base, x, y float64
	}{
		{"stump left", stump, []float64{0.2, 7}, 2, -1, 0},
		{"stump missing goes left", stump, []float64{math.NaN(), 7}, 2, -1, 0},
		{"stump right", stump, []float64{0.9, math.NaN()}, 2, 3, 0},
		{"both small", both, []float64{0.2, 0.2}, 0.25, 0.375, 0.375},
		{"one small", both, []float64{0.2, 0.9}, 0.25, 0.125, -0.375},
	} {
		t.Run(c.name, func(t *testing.T) {
			m := &Model{Method: MethodTree, Task: Regression, Target: "y", Features: feats, Trees: []*Tree{c.tree}}
			var e Explanation
			must(t, m.Explain(c.row, &e))
			got := []float64{e.Baseline[0], e.Contributions[0], e.Contributions[1]}
			want := []float64{c.base, c.x, c.y}
			for i := range got {
				if math.Abs(got[i]-want[i]) > 1e-15 {
					t.Fatalf("baseline, x0, x1 = %v; want %v", got, want)
				}
			}
			if e.Space != SpaceValue || !slices.Equal(e.Outputs, []string{"y"}) {
				t.Fatalf("space %q outputs %q", e.Space, e.Outputs)
			}
		})
	}
}

// scoreInSpace is the model's score for row in its explanation space, computed apart from
// the explanation: the prediction, or for raw scores the initial score plus the trees'
// leaf values (boosting) or the linear predictor. It also checks that the link maps a raw
// score onto the prediction.
func scoreInSpace(t *testing.T, m *Model, space Space, row []float64) []float64 {
	t.Helper()
	pred := m.PredictRow(row, make([]float64, m.Width()))
	if space != SpaceMargin {
		return pred
	}
	var raw []float64
	switch {
	case m.Linear != nil:
		raw = []float64{m.Linear.raw(row)}
	case len(m.Boost.InitScore) > 1:
		raw = slices.Clone(m.Boost.InitScore)
		for ti, tr := range m.Trees {
			raw[ti%len(raw)] += tr.Value[tr.Leaf(row)]
		}
	default:
		raw = []float64{m.Boost.InitScore[0]}
		for _, tr := range m.Trees {
			raw[0] += tr.Value[tr.Leaf(row)]
		}
	}
	var linked []float64
	switch {
	case len(raw) > 1:
		linked = slices.Clone(raw)
		softmax(linked)
	case m.Task == Classification:
		linked = []float64{1 - logisticLink(raw[0]), logisticLink(raw[0])}
	default:
		linked = []float64{math.Exp(raw[0])}
	}
	for k := range linked {
		if math.Abs(linked[k]-pred[k]) > 1e-12*max(1, math.Abs(pred[k])) {
			t.Fatalf("link of raw score %v is %v; the prediction is %v", raw, linked, pred)
		}
	}
	return raw
}

// explainKinds trains one model of every kind on small generated data (numeric and
// categorical features with missing values, some weighted) and on iris, with the space
// each must explain in.
func explainKinds(t *testing.T) []struct {
	name  string
	m     *Model
	space Space
	rows  [][]float64
} {
	t.Helper()
	g := genMixed(11, 240, 3, false)
	gw := genMixed(12, 240, 2, true)
	var rows, rowsW [][]float64
	for i := range g.rows {
		rows = append(rows, g.row(i))
		rowsW = append(rowsW, gw.row(i))
	}
	cls3, cls2, reg := g.dataset(t, 3), gw.dataset(t, 2), g.dataset(t, 0)
	counts := NewDataset(g.rows)
	for _, n := range g.names {
		if g.num[n] != nil {
			must(t, counts.AddNumeric(n, g.num[n]))
		} else {
			must(t, counts.AddCategorical(n, g.cat[n], g.levels[n]))
		}
	}
	y := make([]float64, g.rows)
	for i, v := range g.yreg {
		y[i] = math.Floor(math.Exp(v / 2))
	}
	must(t, counts.SetRegressionTarget("count", y))

	iris := readTable(t, "iris.csv")
	irisD := iris.dataset(t, "species")
	var irisRows [][]float64
	for i := range iris.rows {
		r := make([]float64, 4)
		for f, n := range iris.names[:4] {
			r[f] = iris.num[n][i]
		}
		irisRows = append(irisRows, r)
	}

	params := func(m Method, edit func(*Params)) Params {
		p := DefaultParams(m)
		p.Trees, p.PermutationRows = min(p.Trees, 20), -1
		if edit != nil {
			edit(&p)
		}
		return p
	}
	loss := func(l Loss) func(*Params) { return func(p *Params) { p.Loss = l } }
	type kind = struct {
		name  string
		m     *Model
		space Space
		rows  [][]float64
	}
	var out []kind
	add := func(name string, d *Dataset, p Params, space Space, rows [][]float64) {
		out = append(out, kind{name, train(t, d, p), space, rows})
	}
	add("tree classes", cls3, params(MethodTree, nil), SpaceProbability, rows)
	add("tree value", reg, params(MethodTree, nil), SpaceValue, rows)
	add("bagging weighted", cls2, params(MethodBagging, nil), SpaceProbability, rowsW)
	add("forest classes", cls3, params(MethodForest, nil), SpaceProbability, rows)
	add("forest value", reg, params(MethodForest, nil), SpaceValue, rows)
	add("boosting squared", reg, params(MethodBoosting, nil), SpaceValue, rows)
	add("boosting absolute", reg, params(MethodBoosting, loss(LossAbsolute)), SpaceValue, rows)
	add("boosting huber", reg, params(MethodBoosting, loss(LossHuber)), SpaceValue, rows)
	add("boosting quantile", reg, params(MethodBoosting, loss(LossQuantile)), SpaceValue, rows)
	add("boosting poisson", counts, params(MethodBoosting, loss(LossPoisson)), SpaceMargin, rows)
	add("boosting logistic weighted", cls2, params(MethodBoosting, nil), SpaceMargin, rowsW)
	add("boosting multinomial", cls3, params(MethodBoosting, nil), SpaceMargin, rows)
	add("adaboost two", cls2, params(MethodAdaBoost, func(p *Params) { p.MaxDepth = 2 }), SpaceProbability, rowsW)
	add("adaboost three", cls3, params(MethodAdaBoost, nil), SpaceProbability, rows)
	add("linear value", reg, params(MethodLinear, nil), SpaceValue, rows)
	add("linear logistic weighted", cls2, params(MethodLinear, nil), SpaceMargin, rowsW)
	add("iris forest", irisD, params(MethodForest, nil), SpaceProbability, irisRows)
	add("iris boosting", irisD, params(MethodBoosting, nil), SpaceMargin, irisRows)
	add("iris adaboost", irisD, params(MethodAdaBoost, nil), SpaceProbability, irisRows)

	blendOf := func(name string, names []string, space Space) {
		var ms []*Model
		for _, n := range names {
			for _, k := range out {
				if k.name == n {
					ms = append(ms, k.m)
				}
			}
		}
		b, err := NewBlend(ms[0].Target, ms, names, []float64{1, 2, 3}[:len(ms)], BlendAverage)
		must(t, err)
		out = append(out, kind{name, b, space, rows})
	}
	blendOf("blend value", []string{"forest value", "linear value", "boosting squared"}, SpaceValue)
	blendOf("blend classes", []string{"forest classes", "tree classes", "adaboost three"}, SpaceProbability)
	return out
}

// Additivity (the local accuracy of Lundberg, Erion & Lee 2018; Shapley's efficiency):
// baseline + Σ contributions equals the model's score in the explanation's space, for
// every training row of every model kind, to 1e-12 relative. Raw scores also pass
// through the link onto the prediction.
func TestExplainAdditive(t *testing.T) {
	for _, k := range explainKinds(t) {
		t.Run(k.name, func(t *testing.T) {
			space, outputs, err := k.m.ExplainSpace()
			must(t, err)
			if space != k.space {
				t.Fatalf("space %q; want %q", space, k.space)
			}
			var e Explanation
			for i, row := range k.rows {
				must(t, k.m.Explain(row, &e))
				if e.Space != space || !slices.Equal(e.Outputs, outputs) {
					t.Fatalf("Explain says %q %q, ExplainSpace %q %q", e.Space, e.Outputs, space, outputs)
				}
				score := scoreInSpace(t, k.m, space, row)
				if len(score) != len(e.Baseline) {
					t.Fatalf("%d outputs; the score has %d", len(e.Baseline), len(score))
				}
				for o := range score {
					sum := e.Baseline[o]
					for _, c := range e.Output(o) {
						sum += c
					}
					if d := math.Abs(sum - score[o]); d > 1e-12*max(1, math.Abs(score[o])) {
						t.Fatalf("row %d output %d: baseline %v + contributions %v = %v; the score is %v (off by %g)",
							i, o, e.Baseline[o], e.Output(o), sum, score[o], d)
					}
				}
			}
		})
	}
}

// The baseline is the cover-weighted mean output, so for a single tree grown on all
// rows it is the training mean: the weighted mean target of a regression tree, the
// weighted class shares of a classification tree. For least squares with an intercept,
// the score at the training means is the mean fitted value, which equals the mean target
// because the residuals sum to zero (the normal equation of the intercept; common
// practice).
func TestExplainBaselineIsTrainingMean(t *testing.T) {
	g := genMixed(21, 300, 3, true)
	for _, c := range []struct {
		name    string
		method  Method
		classes int
	}{
		{"tree value", MethodTree, 0},
		{"tree classes", MethodTree, 3},
		{"linear value", MethodLinear, 0},
	} {
		t.Run(c.name, func(t *testing.T) {
			p := DefaultParams(c.method)
			p.PermutationRows = -1
			m := train(t, g.dataset(t, c.classes), p)
			want := make([]float64, m.Width())
			sw := 0.0
			for i := range g.rows {
				sw += g.w[i]
				if c.classes > 0 {
					want[g.ycls[i]] += g.w[i]
				} else {
					want[0] += g.w[i] * g.yreg[i]
				}
			}
			var e Explanation
			must(t, m.Explain(g.row(0), &e))
			for k := range want {
				if want[k] /= sw; math.Abs(e.Baseline[k]-want[k]) > 1e-9 {
					t.Fatalf("baseline %v; the weighted training mean is %v", e.Baseline, want)
				}
			}
		})
	}
}

// A linear model's contribution of a numeric feature without missing values is
// coefficient × (x − training mean) (the definition the explanation uses).
func TestExplainLinearTerms(t *testing.T) {
	g := genMixed(22, 200, 2, false)
	m := train(t, g.dataset(t, 0), DefaultParams(MethodLinear))
	var e Explanation
	row := g.row(3)
	must(t, m.Explain(row, &e))
	var beta, mean float64
	for _, term := range m.Linear.Terms {
		if term.Name == "x0" {
			beta, mean = term.Estimate, term.Fill
		}
	}
	sum := 0.0
	for _, x := range g.num["x0"] {
		sum += x
	}
	if avg := sum / float64(g.rows); math.Abs(mean-avg) > 1e-12 {
		t.Fatalf("the term's fill %v is not the training mean %v", mean, avg)
	}
	if want := beta * (row[0] - mean); math.Abs(e.Contributions[0]-want) > 1e-15 {
		t.Fatalf("x0 contributes %v; want β(x − mean) = %v", e.Contributions[0], want)
	}
}

// A blend explains only when its members' contributions add up to its prediction; the
// errors name the rule or the members at fault.
func TestExplainBlendErrors(t *testing.T) {
	ms, _ := blendMembers(t, false) // forest, tree, AdaBoost, multinomial boosting
	for _, c := range []struct {
		name    string
		members []int
		rule    BlendRule
		want    string
	}{
		{"vote", []int{0, 1}, BlendVote, `rule "vote"`},
		{"raw scores", []int{0, 3, 2}, BlendAverage, `member "mb" explains raw scores`},
	} {
		t.Run(c.name, func(t *testing.T) {
			var sel []*Model
			for _, j := range c.members {
				sel = append(sel, ms[j])
			}
			b, err := NewBlend("y", sel, blendNames(len(sel)), nil, c.rule)
			must(t, err)
			var e Explanation
			err = b.Explain(make([]float64, len(b.Features)), &e)
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("error %v; want one containing %s", err, c.want)
			}
			if _, _, err2 := b.ExplainSpace(); err2 == nil || err2.Error() != err.Error() {
				t.Fatalf("ExplainSpace says %v, Explain %v", err2, err)
			}
		})
	}
	var e Explanation
	if err := ms[0].Explain([]float64{1}, &e); err == nil || !strings.Contains(err.Error(), "1 numbers") {
		t.Fatalf("short row: error %v", err)
	}
}

// Once warm, explaining a row allocates nothing, for every kind of model.
func TestExplainAllocatesNothing(t *testing.T) {
	for _, k := range explainKinds(t) {
		t.Run(k.name, func(t *testing.T) {
			var e Explanation
			must(t, k.m.Explain(k.rows[0], &e))
			i := 0
			allocs := testing.AllocsPerRun(50, func() {
				i++
				if err := k.m.Explain(k.rows[i%len(k.rows)], &e); err != nil {
					t.Fatal(err)
				}
			})
			if allocs != 0 {
				t.Fatalf("%v allocations per row", allocs)
			}
		})
	}
}

// Goroutines explaining rows of one model at once, each with its own Explanation, get
// what one goroutine gets, bit for bit (run with -race to check the sharing).
func TestExplainConcurrent(t *testing.T) {
	g := genMixed(23, 200, 3, false)
	p := DefaultParams(MethodForest)
	p.Trees, p.PermutationRows = 10, -1
	m := train(t, g.dataset(t, 3), p)
	want := make([][]float64, g.rows)
	var e Explanation
	for i := range g.rows {
		must(t, m.Explain(g.row(i), &e))
		want[i] = slices.Concat(e.Baseline, e.Contributions)
	}
	var wg sync.WaitGroup
	errs := make(chan error, 4)
	for w := range 4 {
		wg.Add(1)
		go func() {
			defer wg.Done()
			var e Explanation
			for i := w; i < g.rows; i += 4 {
				if err := m.Explain(g.row(i), &e); err != nil {
					errs <- err
					return
				}
				if got := slices.Concat(e.Baseline, e.Contributions); !bitsEqual(got, want[i]) {
					errs <- fmt.Errorf("row %d: %v, alone %v", i, got, want[i])
					return
				}
			}
		}()
	}
	wg.Wait()
	close(errs)
	for err := range errs {
		t.Fatal(err)
	}
}
