package forest

import (
	"bytes"
	"context"
	"encoding/xml"
	"fmt"
	"io"
	"math"
	"reflect"
	"slices"
	"strings"
	"testing"
)

// pmmlModels trains one small model of every kind on mixed data (numeric, categorical,
// missing values, a level never seen in training), named by what it covers.
func pmmlModels(t *testing.T) (map[string]*Model, [][]float64) {
	t.Helper()
	g := genMixed(41, 300, 3, false)
	// The same seed draws the same inputs for two classes as for three.
	g2 := genMixed(41, 300, 2, false)
	cls3, cls2, reg := g.dataset(t, 3), g2.dataset(t, 2), g.dataset(t, 0)
	// Poisson counts from the numeric target, with an exposure column.
	counts, expo := make([]float64, g.rows), make([]float64, g.rows)
	for i, y := range g.yreg {
		counts[i] = math.Round(math.Exp(0.3 * y))
		expo[i] = 1 + float64(i%3)
	}
	pois := g.dataset(t, 0)
	if err := pois.SetRegressionTarget("y", counts); err != nil {
		t.Fatal(err)
	}
	if err := pois.SetExposure("years", expo); err != nil {
		t.Fatal(err)
	}
	train := func(d *Dataset, method Method, edit func(p *Params)) *Model {
		p := DefaultParams(method)
		p.Trees, p.MaxDepth, p.Bins, p.Threads = 6, 4, 16, 1
		if method == MethodTree {
			p.Trees = 1
		}
		if edit != nil {
			edit(&p)
		}
		m, err := Train(context.Background(), d, p)
		if err != nil {
			t.Fatalf("%s: %v", method, err)
		}
		return m
	}
	loss := func(l Loss) func(p *Params) {
		return func(p *Params) {
			p.Loss = l
			if l == LossQuantile {
				p.Quantile = 0.8
			}
		}
	}
	ms := map[string]*Model{
		"forest classification":    train(cls3, MethodForest, nil),
		"forest regression":        train(reg, MethodForest, nil),
		"bagging classification":   train(cls2, MethodBagging, nil),
		"tree classification":      train(cls3, MethodTree, nil),
		"tree regression":          train(reg, MethodTree, nil),
		"boosting squared":         train(reg, MethodBoosting, loss(LossSquared)),
		"boosting absolute":        train(reg, MethodBoosting, loss(LossAbsolute)),
		"boosting huber":           train(reg, MethodBoosting, loss(LossHuber)),
		"boosting quantile":        train(reg, MethodBoosting, loss(LossQuantile)),
		"boosting logistic":        train(cls2, MethodBoosting, loss(LossLogistic)),
		"boosting multinomial":     train(cls3, MethodBoosting, loss(LossMultinomial)),
		"boosting poisson":         train(pois, MethodBoosting, loss(LossPoisson)),
		"boosting holdout":         train(reg, MethodBoosting, func(p *Params) { p.HoldoutFraction, p.Trees = 0.2, 20 }),
		"boosting leaf limit":      train(cls3, MethodBoosting, func(p *Params) { p.LeafLimit, p.MaxDepth = 5, 0 }),
		"adaboost":                 train(cls3, MethodAdaBoost, nil),
		"linear regression":        train(reg, MethodLinear, nil),
		"linear classification":    train(cls2, MethodLinear, nil),
		"linear ridge":             train(reg, MethodLinear, func(p *Params) { p.Ridge = 0.5 }),
		"forest weighted, entropy": train(g2.subset(func(i int) bool { return i%5 != 0 }).dataset(t, 2), MethodForest, func(p *Params) { p.Impurity = Entropy }),
	}
	blend := func(rule BlendRule, names ...string) *Model {
		var mem []*Model
		for _, n := range names {
			mem = append(mem, ms[n])
		}
		w := []float64{1, 2, 3, 4, 5}[:len(mem)]
		b, err := NewBlend("y", mem, nil, w, rule)
		if err != nil {
			t.Fatal(err)
		}
		return b
	}
	ms["blend average"] = blend(BlendAverage, "forest classification", "tree classification", "adaboost", "boosting multinomial")
	ms["blend vote"] = blend(BlendVote, "bagging classification", "boosting logistic", "linear classification")
	ms["blend regression"] = blend(BlendAverage, "forest regression", "linear regression", "boosting poisson", "boosting huber")
	// Score every training row, then rows that reach every default path: missing
	// numbers, missing and out-of-range level codes (unseen levels), infinities.
	cols := g.columns()
	extra := [][]float64{
		{0.5, math.NaN(), math.NaN(), 0.5, math.NaN()},
		{0.1, 0.9, 4, 0.2, 2},  // c2 = "e", a level no training row had
		{0.9, 0.1, 9, 0.7, 70}, // codes past the levels
		{math.Inf(1), math.Inf(-1), -1, math.NaN(), -3},
		{-0.0, 0, 0, 1, 0},
	}
	for _, r := range extra {
		for f := range cols {
			cols[f] = append(cols[f], r[f])
		}
	}
	return ms, cols
}

// TestPMMLRoundTrip checks that import(export(m)) scores every row bit for bit as m does,
// and that exporting the imported model gives back the same document.
func TestPMMLRoundTrip(t *testing.T) {
	ms, cols := pmmlModels(t)
	names := make([]string, 0, len(ms))
	for n := range ms {
		names = append(names, n)
	}
	slices.Sort(names)
	for _, name := range names {
		m := ms[name]
		t.Run(name, func(t *testing.T) {
			doc, err := m.ExportPMML()
			if err != nil {
				t.Fatal(err)
			}
			back, err := ImportPMML(doc)
			if err != nil {
				t.Fatalf("import: %v", err)
			}
			// The blend's features follow its members; score each model in its own order.
			for i := range cols[0] {
				want := m.PredictRow(rowFor(m, cols, i), make([]float64, m.Width()))
				got := back.PredictRow(rowFor(back, cols, i), make([]float64, back.Width()))
				if !bitsEqual(got, want) {
					t.Fatalf("row %d: imported model scores %v, original %v", i, got, want)
				}
			}
			again, err := back.ExportPMML()
			if err != nil {
				t.Fatal(err)
			}
			if !bytes.Equal(again, doc) {
				t.Errorf("export(import(doc)) differs from doc (%d vs %d bytes)", len(again), len(doc))
			}
			if back.Method != m.Method || back.Task != m.Task || back.Target != m.Target || !slices.Equal(back.Classes, m.Classes) {
				t.Errorf("imported %s %s %q %q, want %s %s %q %q", back.Method, back.Task, back.Target, back.Classes, m.Method, m.Task, m.Target, m.Classes)
			}
			if m.Blend == nil && !reflect.DeepEqual(back.Params, m.Params) {
				t.Errorf("params %+v, want %+v", back.Params, m.Params)
			}
			// Everything but the out-of-bag results travels: the encodings are the same.
			got, err := back.MarshalBinary()
			if err != nil {
				t.Fatalf("imported model does not encode: %v", err)
			}
			want, err := withoutOOB(m).MarshalBinary()
			if err != nil {
				t.Fatal(err)
			}
			if !bytes.Equal(got, want) {
				t.Errorf("imported model encodes to %d bytes that differ from the original's %d", len(got), len(want))
			}
		})
	}
}

// withoutOOB returns m, and a blend's members, without out-of-bag results.
func withoutOOB(m *Model) *Model {
	c := *m
	c.OOB = nil
	if m.Blend != nil {
		b := *m.Blend
		b.Members = make([]*Model, len(m.Blend.Members))
		for j, mem := range m.Blend.Members {
			b.Members[j] = withoutOOB(mem)
		}
		c.Blend = &b
	}
	return &c
}

// rowFor returns row i of the mixed columns (x0 x1 c2 x3 c4) in m's feature order.
func rowFor(m *Model, cols [][]float64, i int) []float64 {
	order := []string{"x0", "x1", "c2", "x3", "c4"}
	row := make([]float64, len(m.Features))
	for f, fi := range m.Features {
		row[f] = cols[slices.Index(order, fi.Name)][i]
	}
	return row
}

// pmmlVocabulary lists, for every PMML 4.4 element ExportPMML writes, the attributes the
// standard defines on it and the child elements it may hold, from the PMML 4.4 schema
// (Data Mining Group, dmg.org, pmml-4-4.xsd; written down from memory — no Debian
// package ships the schema).
var pmmlVocabulary = map[string]struct{ attrs, kids []string }{
	"PMML":                 {[]string{"version"}, []string{"Header", "MiningBuildTask", "DataDictionary", "TransformationDictionary", "MiningModel", "RegressionModel", "TreeModel", "Extension"}},
	"Header":               {[]string{"copyright", "description", "modelVersion"}, []string{"Extension", "Application", "Annotation", "Timestamp"}},
	"Application":          {[]string{"name", "version"}, []string{"Extension"}},
	"DataDictionary":       {[]string{"numberOfFields"}, []string{"Extension", "DataField", "Taxonomy"}},
	"DataField":            {[]string{"name", "displayName", "optype", "dataType", "taxonomy", "isCyclic"}, []string{"Extension", "Interval", "Value"}},
	"Value":                {[]string{"value", "displayValue", "property"}, []string{"Extension"}},
	"Extension":            {[]string{"extender", "name", "value"}, nil},
	"MiningModel":          {[]string{"modelName", "functionName", "algorithmName", "isScorable"}, []string{"Extension", "MiningSchema", "Output", "ModelStats", "ModelExplanation", "Targets", "LocalTransformations", "Segmentation", "ModelVerification"}},
	"MiningSchema":         {nil, []string{"Extension", "MiningField"}},
	"MiningField":          {[]string{"name", "usageType", "optype", "importance", "outliers", "lowValue", "highValue", "missingValueReplacement", "missingValueTreatment", "invalidValueTreatment", "invalidValueReplacement"}, []string{"Extension"}},
	"Output":               {nil, []string{"Extension", "OutputField"}},
	"OutputField":          {[]string{"name", "displayName", "optype", "dataType", "targetField", "feature", "value", "ruleFeature", "algorithm", "rank", "rankBasis", "rankOrder", "isMultiValued", "segmentId", "isFinalResult"}, []string{"Extension", "Decisions", "Apply", "FieldRef", "Constant"}},
	"Segmentation":         {[]string{"multipleModelMethod", "missingPredictionTreatment", "missingThreshold"}, []string{"Extension", "Segment"}},
	"Segment":              {[]string{"id", "weight"}, []string{"Extension", "True", "False", "SimplePredicate", "CompoundPredicate", "SimpleSetPredicate", "MiningModel", "RegressionModel", "TreeModel"}},
	"True":                 {nil, []string{"Extension"}},
	"TreeModel":            {[]string{"modelName", "functionName", "algorithmName", "missingValueStrategy", "missingValuePenalty", "noTrueChildStrategy", "splitCharacteristic", "isScorable"}, []string{"Extension", "MiningSchema", "Output", "ModelStats", "ModelExplanation", "Targets", "LocalTransformations", "Node", "ModelVerification"}},
	"Node":                 {[]string{"id", "score", "recordCount", "defaultChild"}, []string{"Extension", "True", "False", "SimplePredicate", "CompoundPredicate", "SimpleSetPredicate", "Partition", "ScoreDistribution", "Node", "Regression", "DecisionTree"}},
	"SimplePredicate":      {[]string{"field", "operator", "value"}, []string{"Extension"}},
	"SimpleSetPredicate":   {[]string{"field", "booleanOperator"}, []string{"Extension", "Array"}},
	"Array":                {[]string{"n", "type"}, nil},
	"ScoreDistribution":    {[]string{"value", "recordCount", "confidence", "probability"}, []string{"Extension"}},
	"RegressionModel":      {[]string{"modelName", "functionName", "algorithmName", "modelType", "targetFieldName", "normalizationMethod", "isScorable"}, []string{"Extension", "MiningSchema", "Output", "ModelStats", "ModelExplanation", "Targets", "LocalTransformations", "RegressionTable", "ModelVerification"}},
	"RegressionTable":      {[]string{"intercept", "targetCategory"}, []string{"Extension", "NumericPredictor", "CategoricalPredictor", "PredictorTerm"}},
	"NumericPredictor":     {[]string{"name", "exponent", "coefficient"}, []string{"Extension"}},
	"PredictorTerm":        {[]string{"name", "coefficient"}, []string{"Extension", "FieldRef"}},
	"CategoricalPredictor": {[]string{"name", "value", "coefficient"}, []string{"Extension"}},
	"LocalTransformations": {nil, []string{"Extension", "DerivedField"}},
	"DerivedField":         {[]string{"name", "displayName", "optype", "dataType"}, []string{"Extension", "FieldRef", "Apply", "Constant", "NormContinuous", "NormDiscrete", "Discretize", "MapValues", "TextIndex", "Aggregate", "Lag", "Value"}},
	"FieldRef":             {[]string{"field", "mapMissingTo"}, []string{"Extension"}},
	"Apply":                {[]string{"function", "mapMissingTo", "defaultValue", "invalidValueTreatment"}, []string{"Extension", "FieldRef", "Apply", "Constant"}},
	"Constant":             {[]string{"dataType", "missing"}, nil},
}

// pmmlEnums are the values PMML 4.4 allows for the enumerated attributes we write (same
// source, from memory), restricted to the ones our documents may use.
var pmmlEnums = map[string][]string{
	"optype":                {"categorical", "ordinal", "continuous"},
	"dataType":              {"string", "integer", "float", "double", "boolean"},
	"usageType":             {"active", "predicted", "target", "supplementary", "group", "order", "frequencyWeight", "analysisWeight"},
	"invalidValueTreatment": {"returnInvalid", "asIs", "asMissing", "asValue"},
	"functionName":          {"classification", "regression", "clustering", "associationRules", "sequences", "timeSeries", "mixed"},
	"multipleModelMethod":   {"majorityVote", "weightedMajorityVote", "average", "weightedAverage", "median", "weightedMedian", "max", "sum", "weightedSum", "selectFirst", "selectAll", "modelChain"},
	"missingValueStrategy":  {"lastPrediction", "nullPrediction", "defaultChild", "weightedConfidence", "aggregateNodes", "none"},
	"splitCharacteristic":   {"binarySplit", "multiSplit"},
	"operator":              {"equal", "notEqual", "lessThan", "lessOrEqual", "greaterThan", "greaterOrEqual", "isMissing", "isNotMissing"},
	"booleanOperator":       {"isIn", "isNotIn"},
	"normalizationMethod":   {"none", "simplemax", "softmax", "logit", "probit", "cloglog", "exp", "loglog", "cauchit"},
	"feature":               {"predictedValue", "predictedDisplayValue", "transformedValue", "decision", "probability", "affinity", "residual", "standardError", "standardDeviation", "clusterId", "clusterAffinity", "entityId", "entityAffinity", "warning", "ruleValue", "reasonCode", "antecedent", "consequent", "rule", "ruleId", "confidence", "support", "lift", "leverage"},
	"isFinalResult":         {"true", "false"},
	"type":                  {"int", "real", "string"},
}

// TestPMMLVocabulary checks every exported document: well-formed XML in PMML 4.4's
// namespace, only elements, attributes, parent-child pairs and enumerated values of the
// standard, and internal references that resolve (node default children, fields).
func TestPMMLVocabulary(t *testing.T) {
	ms, _ := pmmlModels(t)
	for name, m := range ms {
		doc, err := m.ExportPMML()
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		d := xml.NewDecoder(bytes.NewReader(doc))
		d.Strict = true
		var stack []string
		for {
			tok, err := d.Token()
			if err == io.EOF {
				break
			}
			if err != nil {
				t.Fatalf("%s: not well-formed: %v", name, err)
			}
			se, ok := tok.(xml.StartElement)
			if !ok {
				if _, end := tok.(xml.EndElement); end {
					stack = stack[:len(stack)-1]
				}
				continue
			}
			if se.Name.Space != pmmlNamespace {
				t.Fatalf("%s: <%s> in namespace %q", name, se.Name.Local, se.Name.Space)
			}
			v, ok := pmmlVocabulary[se.Name.Local]
			if !ok {
				t.Fatalf("%s: element <%s> is not in our PMML 4.4 list", name, se.Name.Local)
			}
			if len(stack) > 0 && !slices.Contains(pmmlVocabulary[stack[len(stack)-1]].kids, se.Name.Local) {
				t.Fatalf("%s: <%s> inside <%s>", name, se.Name.Local, stack[len(stack)-1])
			}
			for _, a := range se.Attr {
				if a.Name.Local == "xmlns" && se.Name.Local == "PMML" {
					continue
				}
				if !slices.Contains(v.attrs, a.Name.Local) {
					t.Fatalf("%s: attribute %q on <%s>", name, a.Name.Local, se.Name.Local)
				}
				if allowed, ok := pmmlEnums[a.Name.Local]; ok && se.Name.Local != "Extension" && !slices.Contains(allowed, a.Value) {
					t.Fatalf("%s: <%s %s=%q>", name, se.Name.Local, a.Name.Local, a.Value)
				}
			}
			stack = append(stack, se.Name.Local)
		}
	}
}

// TestPMMLShapes pins the constructs that make other PMML engines score as we do.
func TestPMMLShapes(t *testing.T) {
	ms, _ := pmmlModels(t)
	tests := []struct {
		model string
		want  []string
	}{
		{"forest classification", []string{`multipleModelMethod="average"`, `missingValueStrategy="defaultChild"`, `invalidValueTreatment="asMissing"`, `operator="lessOrEqual"`, `booleanOperator="isNotIn"`, `<ScoreDistribution value="mid"`}},
		{"boosting logistic", []string{`multipleModelMethod="modelChain"`, `multipleModelMethod="sum"`, `normalizationMethod="logit"`, `<Segment id="init">`}},
		{"boosting multinomial", []string{`normalizationMethod="softmax"`, `targetCategory="high"`}},
		{"boosting poisson", []string{`normalizationMethod="exp"`, `name="copse.param.exposure" value="years"`, `<FieldRef field="years"/>`}},
		{"adaboost", []string{`multipleModelMethod="weightedMajorityVote"`, `weight="`}},
		{"linear regression", []string{`<RegressionModel functionName="regression" algorithmName="linear"`, `mapMissingTo="`, `function="isMissing"`, `<CategoricalPredictor name="c2"`}},
		{"blend average", []string{`multipleModelMethod="weightedAverage"`, `<Segment id="member 2" weight="0.2"`}},
		{"blend vote", []string{`algorithmName="blend"`, `multipleModelMethod="weightedMajorityVote"`}},
	}
	for _, tc := range tests {
		doc, err := ms[tc.model].ExportPMML()
		if err != nil {
			t.Fatal(err)
		}
		for _, w := range tc.want {
			if !strings.Contains(string(doc), w) {
				t.Errorf("%s: document lacks %s", tc.model, w)
			}
		}
	}
}

// TestPMMLThresholdsExact checks that thresholds whose shortest decimal has 17 digits
// and extreme ones survive the text form.
func TestPMMLThresholdsExact(t *testing.T) {
	ms, _ := pmmlModels(t)
	m := ms["tree regression"]
	for _, thr := range []float64{0.1 + 0.2, math.Nextafter(1, 2), 5e-324, -1.7976931348623157e308, math.Copysign(0, -1)} {
		c := *m
		tree := *m.Trees[0]
		tree.Nodes = slices.Clone(tree.Nodes)
		for i := range tree.Nodes {
			if tree.Nodes[i].LevelSet < 0 && !tree.Nodes[i].IsLeaf() {
				tree.Nodes[i].Threshold = thr
			}
		}
		c.Trees = []*Tree{&tree}
		doc, err := c.ExportPMML()
		if err != nil {
			t.Fatal(err)
		}
		back, err := ImportPMML(doc)
		if err != nil {
			t.Fatal(err)
		}
		for i, n := range back.Trees[0].Nodes {
			if math.Float64bits(n.Threshold) != math.Float64bits(tree.Nodes[i].Threshold) {
				t.Fatalf("threshold %v read back as %v", tree.Nodes[i].Threshold, n.Threshold)
			}
		}
	}
}

// TestPMMLImportErrors checks that documents we did not write, or cannot read, fail
// with an error naming what is wrong.
func TestPMMLImportErrors(t *testing.T) {
	ms, _ := pmmlModels(t)
	good, err := ms["forest classification"].ExportPMML()
	if err != nil {
		t.Fatal(err)
	}
	lin, err := ms["linear regression"].ExportPMML()
	if err != nil {
		t.Fatal(err)
	}
	doc := string(good)
	tests := []struct {
		name, doc, want string
	}{
		{"malformed", doc[:len(doc)/2], "malformed XML"},
		{"not xml", "hello", "malformed XML"},
		{"other producer", strings.Replace(doc, `<Application name="copse"/>`, `<Application name="other"/>`, 1), `written by "other"`},
		{"version", strings.Replace(doc, `version="4.4"`, `version="4.3"`, 1), `version "4.3"`},
		{"namespace", strings.Replace(doc, pmmlNamespace, "http://www.dmg.org/PMML-4_3", 1), "namespace"},
		{"unsupported element", strings.Replace(doc, "<DataDictionary", "<TransformationDictionary/><DataDictionary", 1), "<TransformationDictionary>"},
		{"unsupported node content", strings.Replace(doc, `<SimplePredicate field=`, `<CompoundPredicate booleanOperator="and"/><SimplePredicate field=`, 1), "<CompoundPredicate>"},
		{"unknown method", strings.Replace(doc, `algorithmName="forest"`, `algorithmName="neural"`, 1), `"neural"`},
		{"foreign extension", strings.Replace(doc, `extender="copse" name="copse.rows"`, `extender="x" name="copse.rows"`, 1), `<Extension> by "x"`},
		{"segmentation", strings.Replace(doc, `multipleModelMethod="average"`, `multipleModelMethod="median"`, 1), `"median"`},
		{"linear expression", strings.Replace(string(lin), `function="if"`, `function="max"`, 1), "unsupported expression"},
		{"threshold", strings.Replace(doc, `operator="lessOrEqual"`, `operator="lessThan"`, 1), "lessOrEqual"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if tc.doc == doc {
				t.Fatal("the edit did not apply")
			}
			_, err := ImportPMML([]byte(tc.doc))
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("error %v, want one containing %q", err, tc.want)
			}
		})
	}
}

// TestPMMLNameClashes checks features named like the fields the document makes (chained
// outputs, derived fields): the made ones step aside, and both engines still agree.
func TestPMMLNameClashes(t *testing.T) {
	ms, cols := pmmlModels(t)
	rename := func(name string, to ...string) *Model {
		c := *ms[name]
		c.Features = slices.Clone(c.Features)
		for f, n := range to {
			c.Features[f].Name = n
		}
		return &c
	}
	for name, m := range map[string]*Model{
		"multinomial": rename("boosting multinomial", "raw", "raw(1)", "probability(low)"),
		"logistic":    rename("boosting logistic", "raw~2", "raw"),
		"linear":      rename("linear regression", "x", "x:missing", "x:filled"),
	} {
		doc, err := m.ExportPMML()
		if err != nil {
			t.Fatal(err)
		}
		root, err := parseXML(doc)
		if err != nil {
			t.Fatal(err)
		}
		seen := map[string]bool{}
		var walk func(n *xnode)
		walk = func(n *xnode) {
			switch n.name {
			case "DataField", "DerivedField", "OutputField":
				f := mustAttr(n, "name")
				if seen[f] {
					t.Errorf("%s: field %q defined twice", name, f)
				}
				seen[f] = true
			}
			for _, k := range n.kids {
				walk(k)
			}
		}
		walk(root)
		back, err := ImportPMML(doc)
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		rows := make([][]float64, len(cols[0]))
		for i := range rows {
			rows[i] = rowFor(ms["forest classification"], cols, i)
			want := m.PredictRow(rows[i], make([]float64, m.Width()))
			if got := back.PredictRow(rows[i], make([]float64, m.Width())); !bitsEqual(got, want) {
				t.Fatalf("%s: row %d: %v, want %v", name, i, got, want)
			}
		}
		pmmlEvalRows(t, name, m, rows)
	}
}

// TestPMMLArrayQuoting checks levels with spaces, quotes and backslashes.
func TestPMMLArrayQuoting(t *testing.T) {
	vals := []string{"a b", `say "hi"`, `back\slash`, "", "plain"}
	got, err := parseArray(pmmlArray(vals))
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(got, vals) {
		t.Fatalf("read back %q, want %q", got, vals)
	}
	got, err = parseArray(`a "b c"  d`)
	if err != nil || !slices.Equal(got, []string{"a", "b c", "d"}) {
		t.Fatalf("unquoted: %q, %v", got, err)
	}
}

// TestPMMLOddNames checks feature, level and class names that need escaping or quoting.
func TestPMMLOddNames(t *testing.T) {
	ms, cols := pmmlModels(t)
	orig := ms["forest classification"]
	m := *orig
	m.Features = slices.Clone(orig.Features)
	m.Features[2].Name = `c "2" & <more>`
	m.Features[2].Levels = []string{"a b", `q"uote`, "x&y<z", "tab\tnl\n\r", ""}
	m.Classes = []string{"low & slow", " mid ", `"high"`}
	doc, err := m.ExportPMML()
	if err != nil {
		t.Fatal(err)
	}
	back, err := ImportPMML(doc)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(back.Features[2].Levels, m.Features[2].Levels) || back.Features[2].Name != m.Features[2].Name || !slices.Equal(back.Classes, m.Classes) {
		t.Fatalf("names read back as %q %q %q", back.Features[2].Name, back.Features[2].Levels, back.Classes)
	}
	for i := range cols[0] {
		row := rowFor(orig, cols, i)
		if got, want := back.PredictRow(row, make([]float64, 3)), m.PredictRow(row, make([]float64, 3)); !bitsEqual(got, want) {
			t.Fatalf("row %d: %v, want %v", i, got, want)
		}
	}
}

// BenchmarkPMML times export and import of forests of growing size on 2,000 mixed rows
// and reports the document's size.
func BenchmarkPMML(b *testing.B) {
	g := genMixed(7, 2000, 2, false)
	d := g.dataset(b, 2)
	for _, trees := range []int{10, 100, 500} {
		p := DefaultParams(MethodForest)
		p.Trees = trees
		m, err := Train(context.Background(), d, p)
		if err != nil {
			b.Fatal(err)
		}
		doc, err := m.ExportPMML()
		if err != nil {
			b.Fatal(err)
		}
		b.Run(fmt.Sprintf("export/trees=%d", trees), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				if _, err := m.ExportPMML(); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(len(doc)), "bytes/doc")
		})
		b.Run(fmt.Sprintf("import/trees=%d", trees), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				if _, err := ImportPMML(doc); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// FuzzImportPMML feeds edited documents to ImportPMML: it returns a model that passes the
// structure checks or an error, never panics.
func FuzzImportPMML(f *testing.F) {
	for _, doc := range pmmlFuzzSeeds(f) {
		f.Add(doc)
	}
	f.Fuzz(func(t *testing.T, doc []byte) {
		m, err := ImportPMML(doc)
		if err != nil {
			return
		}
		if err := m.checkStructure(); err != nil {
			t.Fatalf("imported a model that fails its checks: %v", err)
		}
		m.PredictRow(make([]float64, len(m.Features)), make([]float64, m.Width()))
	})
}

// pmmlFuzzSeeds are small exported documents of several methods.
func pmmlFuzzSeeds(f *testing.F) [][]byte {
	var out [][]byte
	g := genMixed(3, 60, 3, false)
	for _, method := range []Method{MethodTree, MethodBoosting, MethodLinear, MethodAdaBoost} {
		classes := 3
		if method == MethodLinear {
			classes = 0
		}
		p := DefaultParams(method)
		p.Trees, p.MaxDepth, p.Threads = 2, 2, 1
		if method == MethodTree {
			p.Trees = 1
		}
		m, err := Train(context.Background(), g.dataset(f, classes), p)
		if err != nil {
			f.Fatal(err)
		}
		doc, err := m.ExportPMML()
		if err != nil {
			f.Fatal(err)
		}
		out = append(out, doc)
	}
	return out
}
