package forest

import (
	"bytes"
	"encoding/xml"
	"fmt"
	"math"
	"strconv"
	"strings"
)

// PMML 4.4 export. A model becomes one document that standard scoring engines read and
// that ImportPMML turns back into a model scoring bit for bit as the original:
//
//   - tree, bagging, forest: MiningModel, Segmentation "average" of TreeModels (leaf
//     class shares as ScoreDistribution probabilities, or leaf values as scores);
//   - AdaBoost: Segmentation "weightedMajorityVote", each tree weighted by its α;
//   - boosting: Segmentation "sum" whose first segment is a one-node TreeModel holding
//     the initial score (so the sum runs in our order: initial score, then the trees);
//     the logistic, multinomial and Poisson losses chain that sum (one per class for
//     multinomial) into a RegressionModel with normalizationMethod logit, softmax or
//     exp ("modelChain"), and a Poisson model trained with an exposure multiplies the
//     rate by the row's exposure (a PredictorTerm), as copse_score does;
//   - linear: RegressionModel; a missing number takes the training mean through a
//     FieldRef's mapMissingTo and sets its indicator through isMissing;
//   - blend: Segmentation "weightedAverage" or "weightedMajorityVote" of the members.
//
// Splits: a numeric split sends x ≤ threshold to the left child (lessOrEqual) and the rest
// right (greaterThan); a categorical one gives the other child isIn its levels and the
// default child the complement (isNotIn those levels). Missing values
// follow the learned direction through missingValueStrategy "defaultChild"; levels
// unseen in training are declared invalid input and treated as missing
// (invalidValueTreatment "asMissing"), so they follow it too, as in copse_score.
// Thresholds and values are written with the shortest decimal that reads back to the
// same double.
//
// What PMML has no element for — training bins, parameters, importances, the boosting
// curve, AdaBoost errors, coefficient statistics, split gains — travels in Extension
// elements (extender "copse") so the imported model explains and reports as the
// original. Out-of-bag results and a blend's fit record are not exported. Inner tree
// nodes of classification trees keep their class shares in an Extension; leaves give
// them as ScoreDistribution probabilities. Field names made for chained outputs and
// derived fields step aside (a "~2" suffix) when an input already has the name.

// pmmlNamespace is PMML 4.4's XML namespace.
const pmmlNamespace = "http://www.dmg.org/PMML-4_4"

// pmmlExtender marks our Extension elements.
const pmmlExtender = "copse"

// xnode is one XML element: the export builds a tree of them and writes it; the import
// reads documents into the same shape.
type xnode struct {
	name  string
	attrs []xml.Attr
	kids  []*xnode
	text  string
}

func el(name string, attrs ...string) *xnode {
	n := &xnode{name: name}
	for i := 0; i+1 < len(attrs); i += 2 {
		n.attrs = append(n.attrs, xml.Attr{Name: xml.Name{Local: attrs[i]}, Value: attrs[i+1]})
	}
	return n
}

func (n *xnode) add(kids ...*xnode) *xnode {
	n.kids = append(n.kids, kids...)
	return n
}

// attr returns the value of the named attribute and whether it is present.
func (n *xnode) attr(name string) (string, bool) {
	for _, a := range n.attrs {
		if a.Name.Local == name {
			return a.Value, true
		}
	}
	return "", false
}

// write appends the element, indented by depth.
func (n *xnode) write(b *bytes.Buffer, depth int) {
	b.WriteString(strings.Repeat(" ", depth))
	b.WriteByte('<')
	b.WriteString(n.name)
	for _, a := range n.attrs {
		b.WriteByte(' ')
		b.WriteString(a.Name.Local)
		b.WriteString(`="`)
		b.WriteString(attrEscaper.Replace(a.Value))
		b.WriteByte('"')
	}
	switch {
	case len(n.kids) == 0 && n.text == "":
		b.WriteString("/>\n")
	case len(n.kids) == 0:
		b.WriteByte('>')
		b.WriteString(textEscaper.Replace(n.text))
		b.WriteString("</" + n.name + ">\n")
	default:
		b.WriteString(">\n")
		for _, k := range n.kids {
			k.write(b, depth+1)
		}
		b.WriteString(strings.Repeat(" ", depth) + "</" + n.name + ">\n")
	}
}

// The escapers keep text exact through a parser: white space in attributes, which
// parsers normalise, and carriage returns in text become character references.
var (
	attrEscaper = strings.NewReplacer("&", "&amp;", "<", "&lt;", ">", "&gt;", `"`, "&quot;",
		"\t", "&#9;", "\n", "&#10;", "\r", "&#13;")
	textEscaper = strings.NewReplacer("&", "&amp;", "<", "&lt;", ">", "&gt;", "\r", "&#13;")
)

// pmmlFloat writes a double so that it reads back exactly; infinities in XML Schema's
// spelling.
func pmmlFloat(v float64) string {
	switch {
	case math.IsInf(v, 1):
		return "INF"
	case math.IsInf(v, -1):
		return "-INF"
	}
	return strconv.FormatFloat(v, 'g', -1, 64)
}

func pmmlFloats(v []float64) string {
	s := make([]string, len(v))
	for i, x := range v {
		s[i] = pmmlFloat(x)
	}
	return strings.Join(s, " ")
}

// pmmlArray writes strings as a PMML Array body: each quoted, with \" for a quote and
// \\ for a backslash, so levels with spaces survive.
func pmmlArray(vals []string) string {
	var b strings.Builder
	for i, v := range vals {
		if i > 0 {
			b.WriteByte(' ')
		}
		b.WriteByte('"')
		b.WriteString(strings.NewReplacer(`\`, `\\`, `"`, `\"`).Replace(v))
		b.WriteByte('"')
	}
	return b.String()
}

func ext(name, value string) *xnode {
	return el("Extension", "extender", pmmlExtender, "name", name, "value", value)
}

// ExportPMML writes the model as a PMML 4.4 document (the shapes are in the comment at
// the top of this file). It fails only for a model that does not pass the structure
// checks, or whose target or exposure is also a feature's name.
func (m *Model) ExportPMML() ([]byte, error) {
	if err := m.checkStructure(); err != nil {
		return nil, fmt.Errorf("forest: export pmml: %w", err)
	}
	target := m.Target
	if target == "" {
		target = "target"
	}
	for _, f := range m.Features {
		if f.Name == target {
			return nil, fmt.Errorf("forest: export pmml: target %q is also a feature", target)
		}
	}
	root := el("PMML", "xmlns", pmmlNamespace, "version", "4.4")
	root.add(el("Header", "description", fmt.Sprintf("%s %s model of %s", m.Method, m.Task, target)).
		add(el("Application", "name", "copse")))
	e := m.exposure()
	fields := len(m.Features) + 1
	if e != "" {
		fields++
	}
	dict := el("DataDictionary", "numberOfFields", strconv.Itoa(fields))
	for i := range m.Features {
		dict.add(pmmlDataField(&m.Features[i]))
	}
	if e != "" {
		if e == target {
			return nil, fmt.Errorf("forest: export pmml: exposure %q is also the target", e)
		}
		dict.add(el("DataField", "name", e, "optype", "continuous", "dataType", "double"))
	}
	tf := el("DataField", "name", target)
	if m.Task == Classification {
		tf.attrs = append(tf.attrs, el("", "optype", "categorical", "dataType", "string").attrs...)
		for _, c := range m.Classes {
			tf.add(el("Value", "value", c))
		}
	} else {
		tf.attrs = append(tf.attrs, el("", "optype", "continuous", "dataType", "double").attrs...)
	}
	dict.add(tf)
	root.add(dict)
	x := pmmlWriter{target: target, used: map[string]bool{target: true, e: true}}
	for _, f := range m.Features {
		x.used[f.Name] = true
	}
	root.add(x.model(m, "", true))
	var b bytes.Buffer
	b.WriteString(xml.Header)
	root.write(&b, 0)
	return b.Bytes(), nil
}

func pmmlDataField(f *FeatureInfo) *xnode {
	var n *xnode
	if f.Kind == Numeric {
		n = el("DataField", "name", f.Name, "optype", "continuous", "dataType", "double")
	} else {
		n = el("DataField", "name", f.Name, "optype", "categorical", "dataType", "string")
	}
	b := &f.Binning
	if b.Upper != nil {
		n.add(ext("copse.binning.upper", pmmlFloats(b.Upper)))
	}
	if b.LevelBin != nil {
		s := make([]string, len(b.LevelBin))
		for i, v := range b.LevelBin {
			s[i] = strconv.Itoa(int(v))
		}
		n.add(ext("copse.binning.levels", strings.Join(s, " ")))
	}
	n.add(ext("copse.binning.counts", pmmlFloats(b.Counts)))
	for _, l := range f.Levels {
		n.add(el("Value", "value", l))
	}
	return n
}

// exposure is the exposure column a Poisson model multiplies its rate by, or "".
func (m *Model) exposure() string {
	if m.Boost != nil && m.Boost.Loss == LossPoisson {
		return m.Params.Exposure
	}
	return ""
}

// pmmlWriter builds model elements; prefix keeps the names of chained outputs and
// derived fields apart between blend members.
type pmmlWriter struct {
	target string
	used   map[string]bool // field names taken: the data dictionary's and those made so far
}

// fresh returns name, or name with a numeric suffix when a field already has it, so that
// a chained output or derived field never shadows an input.
func (x *pmmlWriter) fresh(name string) string {
	out := name
	for i := 2; x.used[out]; i++ {
		out = fmt.Sprintf("%s~%d", name, i)
	}
	x.used[out] = true
	return out
}

func (m *Model) functionName() string {
	if m.Task == Classification {
		return "classification"
	}
	return "regression"
}

// schema is a MiningSchema over the model's features, the target, and extra active
// fields (chained outputs). Categorical inputs treat unseen levels as missing.
func (x *pmmlWriter) schema(m *Model, extra ...string) *xnode {
	return x.schemaOf(m, nil, extra...)
}

// schemaOf is schema over the features with use[f] set (all when use is nil): a tree
// lists only the features it splits on.
func (x *pmmlWriter) schemaOf(m *Model, use []bool, extra ...string) *xnode {
	s := el("MiningSchema")
	for i, f := range m.Features {
		if use != nil && !use[i] {
			continue
		}
		mf := el("MiningField", "name", f.Name, "usageType", "active")
		if f.Kind == Categorical {
			mf.attrs = append(mf.attrs, xml.Attr{Name: xml.Name{Local: "invalidValueTreatment"}, Value: "asMissing"})
		}
		s.add(mf)
	}
	for _, e := range extra {
		s.add(el("MiningField", "name", e, "usageType", "active"))
	}
	return s.add(el("MiningField", "name", x.target, "usageType", "target"))
}

// model writes m as a model element; top marks the document's own model, which alone
// gets the probability outputs.
func (x *pmmlWriter) model(m *Model, prefix string, top bool) *xnode {
	if m.Linear != nil {
		return x.linear(m, prefix)
	}
	mm := el("MiningModel", "functionName", m.functionName(), "algorithmName", string(m.Method))
	x.meta(mm, m)
	if e := m.exposure(); top && e != "" {
		mm.add(x.schema(m, e))
	} else {
		mm.add(x.schema(m))
	}
	if top && m.Task == Classification {
		out := el("Output")
		for _, c := range m.Classes {
			out.add(el("OutputField", "name", x.fresh("probability("+c+")"), "optype", "continuous", "dataType", "double",
				"feature", "probability", "value", c))
		}
		mm.add(out)
	}
	switch {
	case m.Blend != nil:
		b := m.Blend
		method := "weightedAverage"
		if b.Rule == BlendVote {
			method = "weightedMajorityVote"
		}
		seg := el("Segmentation", "multipleModelMethod", method)
		for j, mem := range b.Members {
			seg.add(el("Segment", "id", b.Names[j], "weight", pmmlFloat(b.Weights[j])).
				add(el("True"), x.model(mem, fmt.Sprintf("%sm%d.", prefix, j+1), false)))
		}
		mm.add(seg)
	case m.Boost != nil:
		mm.add(x.boost(m, prefix, top))
	default:
		method := "average"
		if m.AdaBoost != nil {
			method = "weightedMajorityVote"
		}
		seg := el("Segmentation", "multipleModelMethod", method)
		for ti, t := range m.Trees {
			s := el("Segment", "id", strconv.Itoa(ti+1))
			if m.AdaBoost != nil {
				s.attrs = append(s.attrs, xml.Attr{Name: xml.Name{Local: "weight"}, Value: pmmlFloat(m.AdaBoost.Alpha[ti])})
			}
			seg.add(s.add(el("True"), x.tree(m, t, m.functionName())))
		}
		mm.add(seg)
	}
	return mm
}

// meta adds the Extensions that carry what PMML has no element for.
func (x *pmmlWriter) meta(n *xnode, m *Model) {
	p := &m.Params
	n.add(ext("copse.rows", strconv.Itoa(m.Rows)))
	for _, kv := range [][2]string{
		{"impurity", string(p.Impurity)},
		{"trees", strconv.Itoa(p.Trees)},
		{"max_depth", strconv.Itoa(p.MaxDepth)},
		{"min_leaf", pmmlFloat(p.MinLeaf)},
		{"min_gain", pmmlFloat(p.MinGain)},
		{"features_per_split", pmmlFloat(p.FeaturesPerSplit)},
		{"row_fraction", pmmlFloat(p.RowFraction)},
		{"with_replacement", strconv.FormatBool(p.WithReplacement)},
		{"bins", strconv.Itoa(p.Bins)},
		{"seed", strconv.FormatUint(p.Seed, 10)},
		{"permutation_rows", strconv.Itoa(p.PermutationRows)},
		{"ridge", pmmlFloat(p.Ridge)},
		{"loss", string(p.Loss)},
		{"learning_rate", pmmlFloat(p.LearningRate)},
		{"leaf_penalty", pmmlFloat(p.LeafPenalty)},
		{"holdout_fraction", pmmlFloat(p.HoldoutFraction)},
		{"patience", strconv.Itoa(p.Patience)},
		{"leaf_limit", strconv.Itoa(p.LeafLimit)},
		{"quantile", pmmlFloat(p.Quantile)},
		{"exposure", p.Exposure},
	} {
		n.add(ext("copse.param."+kv[0], kv[1]))
	}
	for _, imp := range []struct {
		name string
		v    []float64
	}{
		{"impurity", m.Importance.Impurity},
		{"permutation", m.Importance.Permutation},
		{"permutation_std", m.Importance.PermutationStd},
	} {
		if imp.v != nil {
			n.add(ext("copse.importance."+imp.name, pmmlFloats(imp.v)))
		}
	}
	if b := m.Boost; b != nil {
		n.add(ext("copse.boost.rounds", strconv.Itoa(b.Rounds)),
			ext("copse.boost.best_round", strconv.Itoa(b.BestRound)),
			ext("copse.boost.train_loss", pmmlFloats(b.TrainLoss)))
		if b.HoldoutLoss != nil {
			n.add(ext("copse.boost.holdout_loss", pmmlFloats(b.HoldoutLoss)))
		}
	}
	if a := m.AdaBoost; a != nil {
		n.add(ext("copse.adaboost.error", pmmlFloats(a.Error)))
	}
	if l := m.Linear; l != nil {
		n.add(ext("copse.linear.iterations", strconv.Itoa(l.Iterations)))
	}
}

// boost writes a boosted model's segmentation: the sums, chained into the link.
//
// A top-level Poisson model trained with an exposure multiplies its rate by the row's
// exposure, as copse_score does; inside a blend it stays a rate, as there.
func (x *pmmlWriter) boost(m *Model, prefix string, top bool) *xnode {
	b := m.Boost
	sum := func(k, K int, out string) *xnode {
		seg := el("Segmentation", "multipleModelMethod", "sum")
		init := el("TreeModel", "functionName", "regression", "missingValueStrategy", "defaultChild")
		init.add(x.schemaOf(m, make([]bool, len(m.Features))), el("Node", "id", "0", "score", pmmlFloat(b.InitScore[k])).add(el("True")))
		seg.add(el("Segment", "id", "init").add(el("True"), init))
		for ti := k; ti < len(m.Trees); ti += K {
			seg.add(el("Segment", "id", strconv.Itoa(ti+1)).add(el("True"), x.tree(m, m.Trees[ti], "regression")))
		}
		if out == "" {
			return seg
		}
		mm := el("MiningModel", "functionName", "regression")
		mm.add(x.schema(m), el("Output").add(el("OutputField", "name", out, "optype", "continuous",
			"dataType", "double", "feature", "predictedValue", "isFinalResult", "false")), seg)
		return mm
	}
	raw := x.fresh(prefix + "raw")
	switch b.Loss {
	case LossLogistic, LossPoisson:
		chain := el("Segmentation", "multipleModelMethod", "modelChain")
		chain.add(el("Segment", "id", "sum").add(el("True"), sum(0, 1, raw)))
		var link *xnode
		if b.Loss == LossPoisson {
			link = el("RegressionModel", "functionName", "regression", "normalizationMethod", "exp")
			link.add(x.schema(m, raw))
			if top && m.Params.Exposure != "" {
				rate := x.fresh(prefix + "rate")
				link.add(el("Output").add(el("OutputField", "name", rate, "optype", "continuous",
					"dataType", "double", "feature", "predictedValue", "isFinalResult", "false")))
				link.add(el("RegressionTable", "intercept", "0").add(el("NumericPredictor", "name", raw, "coefficient", "1")))
				// copse_score multiplies the rate by the row's exposure: one product term.
				times := el("RegressionModel", "functionName", "regression")
				times.add(x.schema(m, rate, m.Params.Exposure), el("RegressionTable", "intercept", "0").
					add(el("PredictorTerm", "coefficient", "1").add(el("FieldRef", "field", rate), el("FieldRef", "field", m.Params.Exposure))))
				return chain.add(el("Segment", "id", "link").add(el("True"), link),
					el("Segment", "id", "exposure").add(el("True"), times))
			}
			link.add(el("RegressionTable", "intercept", "0").add(el("NumericPredictor", "name", raw, "coefficient", "1")))
		} else {
			link = el("RegressionModel", "functionName", "classification", "normalizationMethod", "logit")
			link.add(x.schema(m, raw),
				el("RegressionTable", "intercept", "0", "targetCategory", m.Classes[1]).
					add(el("NumericPredictor", "name", raw, "coefficient", "1")),
				el("RegressionTable", "intercept", "0", "targetCategory", m.Classes[0]))
		}
		return chain.add(el("Segment", "id", "link").add(el("True"), link))
	case LossMultinomial:
		K := len(b.InitScore)
		chain := el("Segmentation", "multipleModelMethod", "modelChain")
		outs := make([]string, K)
		for k := range K {
			outs[k] = x.fresh(fmt.Sprintf("%s(%d)", raw, k+1))
			chain.add(el("Segment", "id", "sum "+m.Classes[k]).add(el("True"), sum(k, K, outs[k])))
		}
		link := el("RegressionModel", "functionName", "classification", "normalizationMethod", "softmax")
		link.add(x.schema(m, outs...))
		for k := range K {
			link.add(el("RegressionTable", "intercept", "0", "targetCategory", m.Classes[k]).
				add(el("NumericPredictor", "name", outs[k], "coefficient", "1")))
		}
		return chain.add(el("Segment", "id", "link").add(el("True"), link))
	}
	return sum(0, 1, "")
}

// tree writes one tree as a TreeModel; node ids are our node indices.
func (x *pmmlWriter) tree(m *Model, t *Tree, fn string) *xnode {
	tm := el("TreeModel", "functionName", fn, "missingValueStrategy", "defaultChild", "splitCharacteristic", "binarySplit")
	use := make([]bool, len(m.Features))
	for _, n := range t.Nodes {
		if !n.IsLeaf() {
			use[n.Feature] = true
		}
	}
	tm.add(x.schemaOf(m, use))
	var node func(i int, pred *xnode) *xnode
	node = func(i int, pred *xnode) *xnode {
		n := &t.Nodes[i]
		v := t.NodeValue(i)
		nd := el("Node", "id", strconv.Itoa(i))
		if fn == "classification" {
			nd.attrs = append(nd.attrs, xml.Attr{Name: xml.Name{Local: "score"}, Value: m.Classes[Class(v)]})
		} else {
			nd.attrs = append(nd.attrs, xml.Attr{Name: xml.Name{Local: "score"}, Value: pmmlFloat(v[0])})
		}
		nd.attrs = append(nd.attrs, xml.Attr{Name: xml.Name{Local: "recordCount"}, Value: pmmlFloat(t.Cover[i])})
		if !n.IsLeaf() {
			def := n.Left
			if !n.DefaultLeft {
				def++
			}
			nd.attrs = append(nd.attrs, xml.Attr{Name: xml.Name{Local: "defaultChild"}, Value: strconv.Itoa(int(def))})
			if t.Gain[i] != 0 {
				nd.add(ext("copse.gain", pmmlFloat(t.Gain[i])))
			}
			if n.LevelSet >= 0 {
				// Level sets are stored in the order the splits were made.
				nd.add(ext("copse.level_set", strconv.Itoa(int(n.LevelSet))))
			}
			if fn == "classification" {
				// An inner node's class shares only inform: one Extension, not K elements.
				nd.add(ext("copse.value", pmmlFloats(v)))
			}
		}
		nd.add(pred)
		if fn == "classification" && n.IsLeaf() {
			for k, c := range m.Classes {
				nd.add(el("ScoreDistribution", "value", c, "recordCount", pmmlFloat(v[k]*t.Cover[i]), "probability", pmmlFloat(v[k])))
			}
		}
		if n.IsLeaf() {
			return nd
		}
		lp, rp := x.split(m, t, n)
		return nd.add(node(int(n.Left), lp), node(int(n.Left)+1, rp))
	}
	return tm.add(node(0, el("True")))
}

// split returns the predicates of a split's left and right children.
func (x *pmmlWriter) split(m *Model, t *Tree, n *Node) (left, right *xnode) {
	f := &m.Features[n.Feature]
	if n.LevelSet < 0 {
		thr := pmmlFloat(n.Threshold)
		return el("SimplePredicate", "field", f.Name, "operator", "lessOrEqual", "value", thr),
			el("SimplePredicate", "field", f.Name, "operator", "greaterThan", "value", thr)
	}
	var l, r []string
	for c, name := range f.Levels {
		if t.levelGoesLeft(n, float64(c)) {
			l = append(l, name)
		} else {
			r = append(r, name)
		}
	}
	set := func(op string, vals []string) *xnode {
		return el("SimpleSetPredicate", "field", f.Name, "booleanOperator", op).
			add(&xnode{name: "Array", attrs: el("", "n", strconv.Itoa(len(vals)), "type", "string").attrs, text: pmmlArray(vals)})
	}
	if n.DefaultLeft {
		return set("isNotIn", r), set("isIn", r)
	}
	return set("isIn", l), set("isNotIn", l)
}

// linear writes a linear model as a RegressionModel.
func (x *pmmlWriter) linear(m *Model, prefix string) *xnode {
	l := m.Linear
	rm := el("RegressionModel", "functionName", m.functionName(), "algorithmName", string(m.Method))
	if m.Task == Classification {
		rm.attrs = append(rm.attrs, xml.Attr{Name: xml.Name{Local: "normalizationMethod"}, Value: "logit"})
	}
	x.meta(rm, m)
	rm.add(x.schema(m))
	local := el("LocalTransformations")
	table := el("RegressionTable", "intercept", pmmlFloat(l.Terms[0].Estimate))
	if m.Task == Classification {
		table.attrs = append(table.attrs, xml.Attr{Name: xml.Name{Local: "targetCategory"}, Value: m.Classes[1]})
	}
	stats := func(t *Term) *xnode {
		return ext("copse.term.stats", pmmlFloats([]float64{t.StdError, t.Z, t.PValue}))
	}
	table.add(stats(&l.Terms[0]))
	var cats []*xnode
	for i := 1; i < len(l.Terms); i++ {
		t := &l.Terms[i]
		f := m.Features[t.Feature].Name
		switch t.Kind {
		case TermValue:
			name := x.fresh(prefix + f + ":filled")
			local.add(el("DerivedField", "name", name, "optype", "continuous", "dataType", "double").
				add(el("FieldRef", "field", f, "mapMissingTo", pmmlFloat(t.Fill))))
			table.add(el("NumericPredictor", "name", name, "coefficient", pmmlFloat(t.Estimate)).add(stats(t)))
		case TermMissing, TermNoLevel:
			name := x.fresh(prefix + f + ":missing")
			local.add(el("DerivedField", "name", name, "optype", "continuous", "dataType", "double").
				add(el("Apply", "function", "if").add(
					el("Apply", "function", "isMissing").add(el("FieldRef", "field", f)),
					&xnode{name: "Constant", attrs: el("", "dataType", "double").attrs, text: "1"},
					&xnode{name: "Constant", attrs: el("", "dataType", "double").attrs, text: "0"})))
			table.add(el("NumericPredictor", "name", name, "coefficient", pmmlFloat(t.Estimate)).add(stats(t)))
		case TermLevel:
			cats = append(cats, el("CategoricalPredictor", "name", f, "value", m.Features[t.Feature].Levels[t.Level],
				"coefficient", pmmlFloat(t.Estimate)).add(stats(t)))
		}
	}
	table.add(cats...)
	if len(local.kids) > 0 {
		rm.add(local)
	}
	rm.add(table)
	if m.Task == Classification {
		rm.add(el("RegressionTable", "intercept", "0", "targetCategory", m.Classes[0]))
	}
	return rm
}
