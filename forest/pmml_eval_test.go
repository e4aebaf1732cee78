package forest

import (
	"fmt"
	"math"
	"slices"
	"strconv"
	"testing"
)

// A small PMML scoring engine written from the PMML 4.4 specification's semantics
// (dmg.org: TreeModel with missingValueStrategy defaultChild, MiningField
// invalidValueTreatment asMissing, Segmentation average / weightedAverage /
// weightedMajorityVote / sum / modelChain, RegressionModel normalizationMethod logit /
// softmax / exp, FieldRef mapMissingTo, Apply if / isMissing; from memory, no PMML engine
// is packaged in Debian). It reads the exported document only — none of ImportPMML — so
// it checks that the document says what copse computes.

// pmmlValue is one field's value: a number, a string, or missing.
type pmmlValue struct {
	num     float64
	str     string
	isStr   bool
	missing bool
}

// pmmlResult is a model's result: a value, or a class and its probabilities.
type pmmlResult struct {
	value float64
	class string
	probs map[string]float64
}

type pmmlEngine struct {
	dict    map[string]*xnode
	classes []string
}

func (e *pmmlEngine) float(n *xnode, name string) float64 {
	v, err := strconv.ParseFloat(mustAttr(n, name), 64)
	if err != nil {
		panic(fmt.Sprintf("<%s %s=%q>", n.name, name, mustAttr(n, name)))
	}
	return v
}

// inputs applies a model's MiningSchema to the fields: unseen categories become missing
// under invalidValueTreatment asMissing.
func (e *pmmlEngine) inputs(n *xnode, fields map[string]pmmlValue) map[string]pmmlValue {
	out := map[string]pmmlValue{}
	for k, v := range fields {
		out[k] = v
	}
	for _, s := range children(n, "MiningSchema") {
		for _, mf := range s.kids {
			name := mustAttr(mf, "name")
			v := out[name]
			df := e.dict[name]
			if df == nil || !v.isStr || v.missing {
				continue
			}
			valid := false
			for _, val := range children(df, "Value") {
				valid = valid || mustAttr(val, "value") == v.str
			}
			if !valid {
				if mustAttr(mf, "invalidValueTreatment") != "asMissing" {
					panic("invalid value without asMissing")
				}
				out[name] = pmmlValue{missing: true}
			}
		}
	}
	return out
}

func (e *pmmlEngine) model(n *xnode, fields map[string]pmmlValue) pmmlResult {
	in := e.inputs(n, fields)
	switch n.name {
	case "TreeModel":
		return e.tree(n, in)
	case "RegressionModel":
		return e.regression(n, in)
	}
	seg := children(n, "Segmentation")[0]
	method := mustAttr(seg, "multipleModelMethod")
	var results []pmmlResult
	var weights []float64
	for _, s := range seg.kids {
		if s.kids[0].name != "True" {
			panic("segment predicate")
		}
		r := e.model(s.kids[1], in)
		results = append(results, r)
		w := 1.0
		if _, ok := s.attr("weight"); ok {
			w = e.float(s, "weight")
		}
		weights = append(weights, w)
		if method == "modelChain" {
			for _, o := range children(s.kids[1], "Output") {
				for _, of := range o.kids {
					if mustAttr(of, "feature") == "predictedValue" {
						in[mustAttr(of, "name")] = pmmlValue{num: r.value}
					}
				}
			}
		}
	}
	classify := mustAttr(n, "functionName") == "classification"
	switch method {
	case "modelChain":
		return results[len(results)-1]
	case "sum":
		s := 0.0
		for _, r := range results {
			s += r.value
		}
		return pmmlResult{value: s}
	case "average", "weightedAverage":
		total, s := 0.0, 0.0
		probs := map[string]float64{}
		for i, r := range results {
			total += weights[i]
			s += weights[i] * r.value
			for c, p := range r.probs {
				probs[c] += weights[i] * p
			}
		}
		if !classify {
			return pmmlResult{value: s / total}
		}
		for c := range probs {
			probs[c] /= total
		}
		return e.withClass(probs)
	case "weightedMajorityVote":
		total := 0.0
		probs := map[string]float64{}
		for i, r := range results {
			total += weights[i]
			probs[r.class] += weights[i]
		}
		for c := range probs {
			probs[c] /= total
		}
		return e.withClass(probs)
	}
	panic("multipleModelMethod " + method)
}

// withClass adds the most probable class, the first in the target's order on ties.
func (e *pmmlEngine) withClass(probs map[string]float64) pmmlResult {
	best := e.classes[0]
	for _, c := range e.classes {
		if probs[c] > probs[best] {
			best = c
		}
	}
	return pmmlResult{class: best, probs: probs}
}

// predicate is true, false, or unknown (a missing input).
func (e *pmmlEngine) predicate(p *xnode, in map[string]pmmlValue) (truth, unknown bool) {
	if p.name == "True" {
		return true, false
	}
	v := in[mustAttr(p, "field")]
	if v.missing {
		return false, true
	}
	switch p.name {
	case "SimplePredicate":
		x := e.float(p, "value")
		switch mustAttr(p, "operator") {
		case "lessOrEqual":
			return v.num <= x, false
		case "greaterThan":
			return v.num > x, false
		}
	case "SimpleSetPredicate":
		vals, err := parseArray(children(p, "Array")[0].text)
		if err != nil {
			panic(err)
		}
		in := slices.Contains(vals, v.str)
		if mustAttr(p, "booleanOperator") == "isIn" {
			return in, false
		}
		return !in, false
	}
	panic("predicate " + p.name)
}

func (e *pmmlEngine) tree(n *xnode, in map[string]pmmlValue) pmmlResult {
	if mustAttr(n, "missingValueStrategy") != "defaultChild" {
		panic("missingValueStrategy")
	}
	node := children(n, "Node")[0]
	for {
		kids := children(node, "Node")
		if len(kids) == 0 {
			break
		}
		var next *xnode
		for _, k := range kids {
			p, _ := predicate(k)
			truth, unknown := e.predicate(p, in)
			if unknown {
				for _, d := range kids {
					if mustAttr(d, "id") == mustAttr(node, "defaultChild") {
						next = d
					}
				}
				break
			}
			if truth {
				next = k
				break
			}
		}
		if next == nil {
			panic("no child chosen")
		}
		node = next
	}
	if mustAttr(n, "functionName") == "regression" {
		return pmmlResult{value: e.float(node, "score")}
	}
	probs := map[string]float64{}
	for _, sd := range children(node, "ScoreDistribution") {
		probs[mustAttr(sd, "value")] = e.float(sd, "probability")
	}
	return pmmlResult{class: mustAttr(node, "score"), probs: probs}
}

func (e *pmmlEngine) regression(n *xnode, in map[string]pmmlValue) pmmlResult {
	for _, lt := range children(n, "LocalTransformations") {
		for _, df := range lt.kids {
			x := df.kids[0]
			switch {
			case x.name == "FieldRef":
				v := in[mustAttr(x, "field")]
				if v.missing {
					v = pmmlValue{num: e.float(x, "mapMissingTo")}
				}
				in[mustAttr(df, "name")] = v
			case x.name == "Apply" && mustAttr(x, "function") == "if":
				cond := x.kids[0]
				if mustAttr(cond, "function") != "isMissing" {
					panic("condition")
				}
				pick := x.kids[2]
				if in[mustAttr(cond.kids[0], "field")].missing {
					pick = x.kids[1]
				}
				c, _ := strconv.ParseFloat(pick.text, 64)
				in[mustAttr(df, "name")] = pmmlValue{num: c}
			default:
				panic("derived field")
			}
		}
	}
	var ys []float64
	var cats []string
	for _, tb := range children(n, "RegressionTable") {
		y := e.float(tb, "intercept")
		for _, p := range tb.kids {
			switch p.name {
			case "NumericPredictor":
				y += e.float(p, "coefficient") * in[mustAttr(p, "name")].num
			case "PredictorTerm":
				prod := e.float(p, "coefficient")
				for _, f := range p.kids {
					prod *= in[mustAttr(f, "field")].num
				}
				y += prod
			case "CategoricalPredictor":
				if v := in[mustAttr(p, "name")]; !v.missing && v.str == mustAttr(p, "value") {
					y += e.float(p, "coefficient")
				}
			}
		}
		ys = append(ys, y)
		cats = append(cats, mustAttr(tb, "targetCategory"))
	}
	norm := mustAttr(n, "normalizationMethod")
	if mustAttr(n, "functionName") == "regression" {
		if norm == "exp" {
			return pmmlResult{value: math.Exp(ys[0])}
		}
		return pmmlResult{value: ys[0]}
	}
	probs := map[string]float64{}
	switch norm {
	case "logit":
		p := 1 / (1 + math.Exp(-ys[0]))
		probs[cats[0]], probs[cats[1]] = p, 1-p
	case "softmax":
		s := 0.0
		for _, y := range ys {
			s += math.Exp(y)
		}
		for k, y := range ys {
			probs[cats[k]] = math.Exp(y) / s
		}
	default:
		panic("normalizationMethod " + norm)
	}
	return e.withClass(probs)
}

// TestPMMLEvaluate scores every row with the document and the specification's rules and
// compares with PredictRow (times the exposure for a Poisson model that has one). Rows are coded as copse_score codes them: a level the model
// does not know is missing (NaN) for copse and a string outside the data dictionary for
// the document.
func TestPMMLEvaluate(t *testing.T) {
	ms, cols := pmmlModels(t)
	for name, m := range ms {
		rows := make([][]float64, len(cols[0]))
		for i := range rows {
			rows[i] = rowFor(m, cols, i)
		}
		t.Logf("%-26s largest difference %.2g", name, pmmlEvalRows(t, name, m, rows))
	}
}

// pmmlEvalRows scores rows (in m's feature order) with m's document and with m, fails on
// a difference above 1e-12 (relative, or absolute below 1), and returns the largest.
func pmmlEvalRows(t *testing.T, name string, m *Model, rows [][]float64) float64 {
	t.Helper()
	doc, err := m.ExportPMML()
	if err != nil {
		t.Fatal(err)
	}
	root, err := parseXML(doc)
	if err != nil {
		t.Fatal(err)
	}
	e := &pmmlEngine{dict: map[string]*xnode{}}
	for _, df := range children(root, "DataDictionary")[0].kids {
		e.dict[mustAttr(df, "name")] = df
	}
	e.classes = m.Classes
	top := root.kids[len(root.kids)-1]
	worst := 0.0
	for i, row := range rows {
		row = slices.Clone(row)
		fields := map[string]pmmlValue{}
		for f, fi := range m.Features {
			x := row[f]
			switch {
			case fi.Kind == Numeric && math.IsNaN(x):
				fields[fi.Name] = pmmlValue{missing: true}
			case fi.Kind == Numeric:
				fields[fi.Name] = pmmlValue{num: x}
			case math.IsNaN(x) || x < 0:
				fields[fi.Name] = pmmlValue{missing: true, isStr: true}
				row[f] = math.NaN()
			case int(x) < len(fi.Levels):
				fields[fi.Name] = pmmlValue{str: fi.Levels[int(x)], isStr: true}
			default:
				fields[fi.Name] = pmmlValue{str: "never seen", isStr: true}
				row[f] = math.NaN()
			}
		}
		want := m.PredictRow(row, make([]float64, m.Width()))
		if ex := m.exposure(); ex != "" {
			// copse_score's product of the rate and the row's exposure.
			years := 1 + float64(i%4)/2
			fields[ex] = pmmlValue{num: years}
			want[0] *= years
		}
		got := e.model(top, fields)
		for k := range want {
			g := got.value
			if m.Task == Classification {
				g = got.probs[m.Classes[k]]
			}
			if math.IsNaN(g) && math.IsNaN(want[k]) {
				continue // a linear model on infinite inputs
			}
			d := math.Abs(g-want[k]) / math.Max(1, math.Abs(want[k]))
			worst = max(worst, d)
			if !(d <= 1e-12) {
				t.Fatalf("%s: row %d: the document scores %v, copse %v", name, i, g, want[k])
			}
		}
	}
	return worst
}
