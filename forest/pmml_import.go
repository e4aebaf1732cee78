package forest

import (
	"bytes"
	"encoding/xml"
	"errors"
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"
)

// ImportPMML reads a PMML document written by ExportPMML back into a model that scores as
// the original did, bit for bit. It reads only the shapes ExportPMML writes; any other
// document (another producer's, or one edited into another shape) fails with an error
// naming the element or attribute it cannot take. Out-of-bag results and a blend's fit
// record, which the document does not hold, stay empty.
func ImportPMML(data []byte) (*Model, error) {
	root, err := parseXML(data)
	if err != nil {
		return nil, fmt.Errorf("forest: import pmml: malformed XML: %w", err)
	}
	m, err := importDoc(root)
	if err != nil {
		return nil, fmt.Errorf("forest: import pmml: %w", err)
	}
	return m, nil
}

// parseXML reads a document into xnodes; element names lose their namespace, which
// importDoc checks on the root.
func parseXML(data []byte) (*xnode, error) {
	d := xml.NewDecoder(bytes.NewReader(data))
	var stack []*xnode
	var root *xnode
	for {
		// RawToken skips namespace translation, which costs much on large documents;
		// the root's xmlns attribute is checked by hand, and no other is written.
		tok, err := d.RawToken()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, err
		}
		switch t := tok.(type) {
		case xml.StartElement:
			if t.Name.Space != "" {
				return nil, fmt.Errorf("element <%s:%s>: prefixed names are not read", t.Name.Space, t.Name.Local)
			}
			n := &xnode{name: t.Name.Local}
			ns := ""
			for _, a := range t.Attr {
				switch {
				case a.Name.Space == "" && a.Name.Local == "xmlns":
					ns = a.Value
				case a.Name.Space == "":
					n.attrs = append(n.attrs, xml.Attr{Name: xml.Name{Local: a.Name.Local}, Value: a.Value})
				}
			}
			if len(stack) == 0 {
				if root != nil {
					return nil, errors.New("more than one root element")
				}
				root = n
				if ns != pmmlNamespace {
					return nil, fmt.Errorf("root element in namespace %q, want %q (PMML 4.4)", ns, pmmlNamespace)
				}
			} else {
				if ns != "" && ns != pmmlNamespace {
					return nil, fmt.Errorf("element <%s> in namespace %q", n.name, ns)
				}
				p := stack[len(stack)-1]
				p.kids = append(p.kids, n)
			}
			stack = append(stack, n)
		case xml.EndElement:
			if len(stack) == 0 || stack[len(stack)-1].name != t.Name.Local {
				return nil, fmt.Errorf("unexpected end element </%s>", t.Name.Local)
			}
			stack = stack[:len(stack)-1]
		case xml.CharData:
			if len(stack) > 0 && len(bytes.TrimSpace(t)) > 0 {
				stack[len(stack)-1].text += string(t)
			}
		}
	}
	if root == nil {
		return nil, errors.New("no root element")
	}
	if len(stack) > 0 {
		return nil, fmt.Errorf("the document ends inside <%s>", stack[len(stack)-1].name)
	}
	return root, nil
}

// pmmlReader holds the document's data dictionary while models are read.
type pmmlReader struct {
	dict map[string]*xnode
}

// only fails when n has a child element outside allowed.
func only(n *xnode, allowed ...string) error {
	for _, k := range n.kids {
		if !slices.Contains(allowed, k.name) {
			return fmt.Errorf("unsupported element <%s> in <%s>", k.name, n.name)
		}
	}
	return nil
}

// need returns a required attribute.
func need(n *xnode, name string) (string, error) {
	v, ok := n.attr(name)
	if !ok {
		return "", fmt.Errorf("<%s> without attribute %q", n.name, name)
	}
	return v, nil
}

func needFloat(n *xnode, name string) (float64, error) {
	s, err := need(n, name)
	if err != nil {
		return 0, err
	}
	return parsePMMLFloat(n, name, s)
}

func parsePMMLFloat(n *xnode, name, s string) (float64, error) {
	v, err := strconv.ParseFloat(strings.TrimSpace(s), 64)
	if err != nil {
		return 0, fmt.Errorf("<%s> attribute %q: %q is not a number", n.name, name, s)
	}
	return v, nil
}

func children(n *xnode, name string) []*xnode {
	var out []*xnode
	for _, k := range n.kids {
		if k.name == name {
			out = append(out, k)
		}
	}
	return out
}

func child(n *xnode, name string) (*xnode, error) {
	c := children(n, name)
	if len(c) != 1 {
		return nil, fmt.Errorf("<%s> holds %d <%s> elements, want 1", n.name, len(c), name)
	}
	return c[0], nil
}

// exts maps our Extensions' names to their values.
func exts(n *xnode) (map[string]string, error) {
	out := map[string]string{}
	for _, e := range children(n, "Extension") {
		if x, _ := e.attr("extender"); x != pmmlExtender {
			return nil, fmt.Errorf("unsupported <Extension> by %q in <%s>", x, n.name)
		}
		name, _ := e.attr("name")
		v, _ := e.attr("value")
		out[name] = v
	}
	return out, nil
}

func extFloats(ex map[string]string, name string) ([]float64, bool, error) {
	s, ok := ex[name]
	if !ok {
		return nil, false, nil
	}
	out := []float64{}
	for _, f := range strings.Fields(s) {
		v, err := strconv.ParseFloat(f, 64)
		if err != nil {
			return nil, true, fmt.Errorf("extension %q: %q is not a number", name, f)
		}
		out = append(out, v)
	}
	return out, true, nil
}

func extInt(ex map[string]string, name string) (int, error) {
	v, err := strconv.Atoi(ex[name])
	if err != nil {
		return 0, fmt.Errorf("extension %q: %q is not an integer", name, ex[name])
	}
	return v, nil
}

// parseArray reads a PMML string Array body: values separated by white space, quoted
// ones with \" and \\ escapes.
func parseArray(s string) ([]string, error) {
	var out []string
	for i := 0; i < len(s); {
		switch c := s[i]; {
		case c == ' ' || c == '\t' || c == '\n' || c == '\r':
			i++
		case c == '"':
			var b strings.Builder
			i++
			for {
				if i >= len(s) {
					return nil, errors.New("unterminated quoted value")
				}
				if s[i] == '\\' && i+1 < len(s) {
					b.WriteByte(s[i+1])
					i += 2
					continue
				}
				if s[i] == '"' {
					i++
					break
				}
				b.WriteByte(s[i])
				i++
			}
			out = append(out, b.String())
		default:
			j := i
			for j < len(s) && !strings.ContainsRune(" \t\n\r", rune(s[j])) {
				j++
			}
			out = append(out, s[i:j])
			i = j
		}
	}
	return out, nil
}

func importDoc(root *xnode) (*Model, error) {
	if root.name != "PMML" {
		return nil, fmt.Errorf("root element <%s>, want <PMML>", root.name)
	}
	if v, _ := root.attr("version"); v != "4.4" {
		return nil, fmt.Errorf("PMML version %q, want \"4.4\"", v)
	}
	if err := only(root, "Header", "DataDictionary", "MiningModel", "RegressionModel"); err != nil {
		return nil, err
	}
	h, err := child(root, "Header")
	if err != nil {
		return nil, err
	}
	app, err := child(h, "Application")
	if err != nil {
		return nil, err
	}
	if name, _ := app.attr("name"); name != "copse" {
		return nil, fmt.Errorf("written by %q: only documents written by copse can be imported", name)
	}
	dd, err := child(root, "DataDictionary")
	if err != nil {
		return nil, err
	}
	if err := only(dd, "DataField"); err != nil {
		return nil, err
	}
	r := pmmlReader{dict: map[string]*xnode{}}
	for _, f := range dd.kids {
		name, err := need(f, "name")
		if err != nil {
			return nil, err
		}
		r.dict[name] = f
	}
	var models []*xnode
	for _, k := range root.kids {
		if k.name == "MiningModel" || k.name == "RegressionModel" {
			models = append(models, k)
		}
	}
	if len(models) != 1 {
		return nil, fmt.Errorf("%d models in the document, want 1", len(models))
	}
	return r.model(models[0])
}

// feature reads a DataField into a FeatureInfo.
func (r *pmmlReader) feature(name string) (FeatureInfo, error) {
	f := FeatureInfo{Name: name}
	df := r.dict[name]
	if df == nil {
		return f, fmt.Errorf("field %q is not in the data dictionary", name)
	}
	if err := only(df, "Extension", "Value"); err != nil {
		return f, err
	}
	switch op, _ := df.attr("optype"); op {
	case "continuous":
		f.Kind = Numeric
	case "categorical":
		f.Kind = Categorical
		f.Levels = []string{}
		for _, v := range children(df, "Value") {
			l, err := need(v, "value")
			if err != nil {
				return f, err
			}
			f.Levels = append(f.Levels, l)
		}
	default:
		return f, fmt.Errorf("field %q: optype %q, want continuous or categorical", name, op)
	}
	ex, err := exts(df)
	if err != nil {
		return f, err
	}
	f.Binning.Kind = f.Kind
	if f.Binning.Upper, _, err = extFloats(ex, "copse.binning.upper"); err != nil {
		return f, err
	}
	lb, ok, err := extFloats(ex, "copse.binning.levels")
	if err != nil {
		return f, err
	}
	if ok {
		f.Binning.LevelBin = make([]uint16, len(lb))
		for i, v := range lb {
			if v < 0 || v > math.MaxUint16 || v != math.Trunc(v) {
				return f, fmt.Errorf("field %q: level bin %v", name, v)
			}
			f.Binning.LevelBin[i] = uint16(v)
		}
	}
	if f.Binning.Counts, _, err = extFloats(ex, "copse.binning.counts"); err != nil {
		return f, err
	}
	return f, nil
}

// schema reads a MiningSchema: the model's features (active fields in the data
// dictionary but the exposure, in order) and its target.
func (r *pmmlReader) schema(n *xnode, exposure string) ([]FeatureInfo, string, error) {
	s, err := child(n, "MiningSchema")
	if err != nil {
		return nil, "", err
	}
	if err := only(s, "MiningField"); err != nil {
		return nil, "", err
	}
	var feats []FeatureInfo
	target := ""
	for _, mf := range s.kids {
		name, err := need(mf, "name")
		if err != nil {
			return nil, "", err
		}
		switch u, _ := mf.attr("usageType"); u {
		case "target":
			target = name
		case "active":
			if r.dict[name] == nil || name == exposure {
				continue // a chained model's output, or a Poisson model's exposure
			}
			f, err := r.feature(name)
			if err != nil {
				return nil, "", err
			}
			feats = append(feats, f)
		default:
			return nil, "", fmt.Errorf("mining field %q: usageType %q, want active or target", name, u)
		}
	}
	if target == "" {
		return nil, "", fmt.Errorf("<%s> has no target field", n.name)
	}
	return feats, target, nil
}

// model reads a model element.
func (r *pmmlReader) model(n *xnode) (*Model, error) {
	method, _ := n.attr("algorithmName")
	m := &Model{Method: Method(method)}
	switch fn, _ := n.attr("functionName"); fn {
	case "classification":
		m.Task = Classification
	case "regression":
		m.Task = Regression
	default:
		return nil, fmt.Errorf("<%s> functionName %q, want classification or regression", n.name, fn)
	}
	ex, err := exts(n)
	if err != nil {
		return nil, err
	}
	feats, target, err := r.schema(n, ex["copse.param.exposure"])
	if err != nil {
		return nil, err
	}
	m.Features, m.Target = feats, target
	if m.Task == Classification {
		tf, err := r.feature(target)
		if err != nil {
			return nil, err
		}
		m.Classes = tf.Levels
	}
	if m.Method != MethodBlend {
		if err := m.readMeta(ex); err != nil {
			return nil, err
		}
	}
	switch {
	case n.name == "RegressionModel" && m.Method == MethodLinear:
		err = r.linear(n, m)
	case n.name != "MiningModel":
		return nil, fmt.Errorf("<%s> with algorithmName %q", n.name, method)
	case m.Method == MethodBlend:
		return r.blend(n, m)
	case m.Method == MethodBoosting:
		err = r.boost(n, m)
	case m.Method == MethodTree || m.Method == MethodBagging || m.Method == MethodForest || m.Method == MethodAdaBoost:
		err = r.trees(n, m)
	default:
		return nil, fmt.Errorf("<%s> with unknown algorithmName %q", n.name, method)
	}
	if err != nil {
		return nil, fmt.Errorf("%s model: %w", m.Method, err)
	}
	if err := m.checkStructure(); err != nil {
		return nil, err
	}
	return m, nil
}

// readMeta reads the parameters and records our Extensions carry.
func (m *Model) readMeta(ex map[string]string) error {
	var err error
	if m.Rows, err = extInt(ex, "copse.rows"); err != nil {
		return err
	}
	p := &m.Params
	p.Method, p.Task = m.Method, m.Task
	get := func(name string) string { return ex["copse.param."+name] }
	p.Impurity = Impurity(get("impurity"))
	p.Loss = Loss(get("loss"))
	p.Exposure = get("exposure")
	if p.WithReplacement, err = strconv.ParseBool(get("with_replacement")); err != nil {
		return fmt.Errorf("parameter with_replacement: %q", get("with_replacement"))
	}
	if p.Seed, err = strconv.ParseUint(get("seed"), 10, 64); err != nil {
		return fmt.Errorf("parameter seed: %q", get("seed"))
	}
	for name, dst := range map[string]*int{"trees": &p.Trees, "max_depth": &p.MaxDepth, "bins": &p.Bins,
		"permutation_rows": &p.PermutationRows, "patience": &p.Patience, "leaf_limit": &p.LeafLimit} {
		if *dst, err = extInt(ex, "copse.param."+name); err != nil {
			return err
		}
	}
	for name, dst := range map[string]*float64{"min_leaf": &p.MinLeaf, "min_gain": &p.MinGain,
		"features_per_split": &p.FeaturesPerSplit, "row_fraction": &p.RowFraction, "ridge": &p.Ridge,
		"learning_rate": &p.LearningRate, "leaf_penalty": &p.LeafPenalty,
		"holdout_fraction": &p.HoldoutFraction, "quantile": &p.Quantile} {
		if *dst, err = strconv.ParseFloat(get(name), 64); err != nil {
			return fmt.Errorf("parameter %s: %q is not a number", name, get(name))
		}
	}
	for name, dst := range map[string]*[]float64{"impurity": &m.Importance.Impurity,
		"permutation": &m.Importance.Permutation, "permutation_std": &m.Importance.PermutationStd} {
		if *dst, _, err = extFloats(ex, "copse.importance."+name); err != nil {
			return err
		}
	}
	if m.Method == MethodBoosting {
		b := &Boost{Loss: p.Loss}
		if b.Rounds, err = extInt(ex, "copse.boost.rounds"); err != nil {
			return err
		}
		if b.BestRound, err = extInt(ex, "copse.boost.best_round"); err != nil {
			return err
		}
		if b.TrainLoss, _, err = extFloats(ex, "copse.boost.train_loss"); err != nil {
			return err
		}
		if b.HoldoutLoss, _, err = extFloats(ex, "copse.boost.holdout_loss"); err != nil {
			return err
		}
		m.Boost = b
	}
	if m.Method == MethodAdaBoost {
		a := &AdaBoost{}
		if a.Error, _, err = extFloats(ex, "copse.adaboost.error"); err != nil {
			return err
		}
		m.AdaBoost = a
	}
	if m.Method == MethodLinear {
		l := &Linear{}
		if l.Iterations, err = extInt(ex, "copse.linear.iterations"); err != nil {
			return err
		}
		m.Linear = l
	}
	return nil
}

// segments returns a MiningModel's Segmentation method and its segments' models.
func segments(n *xnode) (string, []*xnode, error) {
	if err := only(n, "Extension", "MiningSchema", "Output", "Segmentation"); err != nil {
		return "", nil, err
	}
	seg, err := child(n, "Segmentation")
	if err != nil {
		return "", nil, err
	}
	if err := only(seg, "Segment"); err != nil {
		return "", nil, err
	}
	method, _ := seg.attr("multipleModelMethod")
	return method, seg.kids, nil
}

// segmentModel returns a Segment's model, checking its predicate is True.
func segmentModel(s *xnode, models ...string) (*xnode, error) {
	if err := only(s, append([]string{"True"}, models...)...); err != nil {
		return nil, err
	}
	if len(s.kids) != 2 || s.kids[0].name != "True" {
		return nil, errors.New("a <Segment> holds <True/> and one model")
	}
	return s.kids[1], nil
}

func (r *pmmlReader) trees(n *xnode, m *Model) error {
	method, segs, err := segments(n)
	if err != nil {
		return err
	}
	want := "average"
	if m.AdaBoost != nil {
		want = "weightedMajorityVote"
	}
	if method != want {
		return fmt.Errorf("multipleModelMethod %q, want %q", method, want)
	}
	for _, s := range segs {
		tm, err := segmentModel(s, "TreeModel")
		if err != nil {
			return err
		}
		t, err := r.tree(tm, m, m.Width())
		if err != nil {
			return fmt.Errorf("tree %d: %w", len(m.Trees)+1, err)
		}
		m.Trees = append(m.Trees, t)
		if m.AdaBoost != nil {
			a, err := needFloat(s, "weight")
			if err != nil {
				return err
			}
			m.AdaBoost.Alpha = append(m.AdaBoost.Alpha, a)
		}
	}
	return nil
}

// sum reads a sum segmentation: the initial score and the trees.
func (r *pmmlReader) sum(method string, segs []*xnode, m *Model) (float64, []*Tree, error) {
	if method != "sum" {
		return 0, nil, fmt.Errorf("multipleModelMethod %q, want \"sum\"", method)
	}
	if len(segs) == 0 {
		return 0, nil, errors.New("a sum without its initial score")
	}
	var init float64
	var trees []*Tree
	for i, s := range segs {
		tm, err := segmentModel(s, "TreeModel")
		if err != nil {
			return 0, nil, err
		}
		t, err := r.tree(tm, m, 1)
		if err != nil {
			return 0, nil, fmt.Errorf("segment %d: %w", i+1, err)
		}
		if i == 0 {
			if len(t.Nodes) != 1 {
				return 0, nil, errors.New("the initial score's tree has splits")
			}
			init = t.Value[0]
			continue
		}
		trees = append(trees, t)
	}
	return init, trees, nil
}

func (r *pmmlReader) boost(n *xnode, m *Model) error {
	method, segs, err := segments(n)
	if err != nil {
		return err
	}
	b := m.Boost
	switch b.Loss {
	case LossLogistic, LossPoisson, LossMultinomial:
		if method != "modelChain" || len(segs) < 2 {
			return fmt.Errorf("multipleModelMethod %q with %d segments, want \"modelChain\"", method, len(segs))
		}
		if b.Loss == LossPoisson && len(segs) == 3 {
			if err := r.exposureStep(segs[2], m); err != nil {
				return err
			}
			segs = segs[:2]
		}
		link, err := segmentModel(segs[len(segs)-1], "RegressionModel")
		if err != nil {
			return err
		}
		want := map[Loss]string{LossLogistic: "logit", LossPoisson: "exp", LossMultinomial: "softmax"}[b.Loss]
		if nm, _ := link.attr("normalizationMethod"); nm != want {
			return fmt.Errorf("link normalizationMethod %q, want %q for loss %q", nm, want, b.Loss)
		}
		var perClass [][]*Tree
		for _, s := range segs[:len(segs)-1] {
			mm, err := segmentModel(s, "MiningModel")
			if err != nil {
				return err
			}
			method, sub, err := segments(mm)
			if err != nil {
				return err
			}
			init, trees, err := r.sum(method, sub, m)
			if err != nil {
				return err
			}
			b.InitScore = append(b.InitScore, init)
			perClass = append(perClass, trees)
		}
		// Round-major: tree t of the model adds to class t mod K.
		K := len(perClass)
		for i := range perClass[0] {
			for k := range K {
				if i >= len(perClass[k]) {
					return fmt.Errorf("class %d has %d trees, class 1 %d", k+1, len(perClass[k]), len(perClass[0]))
				}
				m.Trees = append(m.Trees, perClass[k][i])
			}
		}
		for k := range K {
			if len(perClass[k]) != len(perClass[0]) {
				return fmt.Errorf("class %d has %d trees, class 1 %d", k+1, len(perClass[k]), len(perClass[0]))
			}
		}
		return nil
	}
	init, trees, err := r.sum(method, segs, m)
	if err != nil {
		return err
	}
	b.InitScore, m.Trees = []float64{init}, trees
	return nil
}

// exposureStep checks the last step of a Poisson chain: the rate times the exposure.
func (r *pmmlReader) exposureStep(s *xnode, m *Model) error {
	rm, err := segmentModel(s, "RegressionModel")
	if err != nil {
		return err
	}
	if err := only(rm, "MiningSchema", "RegressionTable"); err != nil {
		return err
	}
	tb, err := child(rm, "RegressionTable")
	if err != nil {
		return err
	}
	if len(tb.kids) != 1 || tb.kids[0].name != "PredictorTerm" || len(tb.kids[0].kids) != 2 ||
		mustAttr(tb.kids[0].kids[1], "field") != m.Params.Exposure || m.Params.Exposure == "" {
		return fmt.Errorf("the Poisson chain's last step is not the rate times exposure %q", m.Params.Exposure)
	}
	return nil
}

func (r *pmmlReader) blend(n *xnode, m *Model) (*Model, error) {
	method, segs, err := segments(n)
	if err != nil {
		return nil, err
	}
	rule := BlendAverage
	switch method {
	case "weightedAverage":
	case "weightedMajorityVote":
		rule = BlendVote
	default:
		return nil, fmt.Errorf("blend: multipleModelMethod %q", method)
	}
	var members []*Model
	var names []string
	var weights []float64
	for _, s := range segs {
		sub, err := segmentModel(s, "MiningModel", "RegressionModel")
		if err != nil {
			return nil, err
		}
		name, err := need(s, "id")
		if err != nil {
			return nil, err
		}
		w, err := needFloat(s, "weight")
		if err != nil {
			return nil, err
		}
		mem, err := r.model(sub)
		if err != nil {
			return nil, fmt.Errorf("blend member %q: %w", name, err)
		}
		members, names, weights = append(members, mem), append(names, name), append(weights, w)
	}
	b, err := NewBlend(m.Target, members, names, weights, rule)
	if err != nil {
		return nil, err
	}
	// The written weights are the normalised ones; keep them bit for bit.
	b.Blend.Weights = weights
	if len(b.Features) != len(m.Features) {
		return nil, fmt.Errorf("blend of %d features, its members have %d", len(m.Features), len(b.Features))
	}
	return b, nil
}

// tree reads a TreeModel whose node ids are our node indices.
func (r *pmmlReader) tree(tm *xnode, m *Model, W int) (*Tree, error) {
	if err := only(tm, "MiningSchema", "Node"); err != nil {
		return nil, err
	}
	if s, _ := tm.attr("missingValueStrategy"); s != "defaultChild" {
		return nil, fmt.Errorf("missingValueStrategy %q, want \"defaultChild\"", s)
	}
	root, err := child(tm, "Node")
	if err != nil {
		return nil, err
	}
	at := map[string]int{}
	for i, f := range m.Features {
		at[f.Name] = i
	}
	// Node ids index the node arrays: bound them by the number of Node elements.
	var count func(n *xnode) int
	count = func(n *xnode) int {
		c := 1
		for _, k := range children(n, "Node") {
			c += count(k)
		}
		return c
	}
	total := count(root)
	t := &Tree{Width: W}
	var order []int // each categorical split's level set index, in node order
	var nodes []*xnode
	var collect func(n *xnode) error
	collect = func(n *xnode) error {
		id, err := need(n, "id")
		if err != nil {
			return err
		}
		i, err := strconv.Atoi(id)
		if err != nil || i < 0 || i >= total {
			return fmt.Errorf("node id %q: want 0 to %d", id, total-1)
		}
		for len(nodes) <= i {
			nodes = append(nodes, nil)
		}
		if nodes[i] != nil {
			return fmt.Errorf("node id %d repeated", i)
		}
		nodes[i] = n
		for _, k := range children(n, "Node") {
			if err := collect(k); err != nil {
				return err
			}
		}
		return nil
	}
	if err := collect(root); err != nil {
		return nil, err
	}
	if nodes[0] != root {
		return nil, errors.New("the root node's id is not 0")
	}
	N := len(nodes)
	t.Nodes = make([]Node, N)
	t.Gain, t.Cover, t.Value = make([]float64, N), make([]float64, N), make([]float64, N*W)
	for i, n := range nodes {
		if n == nil {
			return nil, fmt.Errorf("node id %d missing", i)
		}
		if err := only(n, "Extension", "True", "SimplePredicate", "SimpleSetPredicate", "ScoreDistribution", "Node"); err != nil {
			return nil, err
		}
		if c, ok := n.attr("recordCount"); ok { // absent on the initial score's node
			if t.Cover[i], err = parsePMMLFloat(n, "recordCount", c); err != nil {
				return nil, err
			}
		}
		ex, err := exts(n)
		if err != nil {
			return nil, err
		}
		if g, ok, err := extFloats(ex, "copse.gain"); err != nil {
			return nil, err
		} else if ok && len(g) == 1 {
			t.Gain[i] = g[0]
		}
		v := t.Value[i*W : (i+1)*W]
		if m.Boost == nil && m.Task == Classification && len(children(n, "Node")) > 0 {
			vals, _, err := extFloats(ex, "copse.value")
			if err != nil {
				return nil, err
			}
			if len(vals) != W {
				return nil, fmt.Errorf("node %d: %d class shares for %d classes", i, len(vals), W)
			}
			copy(v, vals)
		} else if m.Boost == nil && m.Task == Classification {
			sd := children(n, "ScoreDistribution")
			if len(sd) != W {
				return nil, fmt.Errorf("node %d: %d ScoreDistribution elements for %d classes", i, len(sd), W)
			}
			for k, s := range sd {
				if c, _ := s.attr("value"); c != m.Classes[k] {
					return nil, fmt.Errorf("node %d: ScoreDistribution %d is for %q, want %q", i, k+1, c, m.Classes[k])
				}
				if v[k], err = needFloat(s, "probability"); err != nil {
					return nil, err
				}
			}
		} else if v[0], err = needFloat(n, "score"); err != nil {
			return nil, err
		}
		kids := children(n, "Node")
		nd := &t.Nodes[i]
		nd.Left, nd.LevelSet = -1, -1
		if len(kids) == 0 {
			continue
		}
		if len(kids) != 2 {
			return nil, fmt.Errorf("node %d has %d children, want 2", i, len(kids))
		}
		l, _ := strconv.Atoi(mustAttr(kids[0], "id"))
		if rid, _ := strconv.Atoi(mustAttr(kids[1], "id")); l <= i || rid != l+1 {
			return nil, fmt.Errorf("node %d: children %d and %d; want two ids in a row after the node", i, l, rid)
		}
		nd.Left = int32(l)
		def, err := need(n, "defaultChild")
		if err != nil {
			return nil, err
		}
		switch def {
		case strconv.Itoa(l):
			nd.DefaultLeft = true
		case strconv.Itoa(l + 1):
		default:
			return nil, fmt.Errorf("node %d: defaultChild %q is not a child", i, def)
		}
		if err := t.readSplit(nd, kids[0], kids[1], m, at); err != nil {
			return nil, fmt.Errorf("node %d: %w", i, err)
		}
		if ls, ok, err := extFloats(ex, "copse.level_set"); err != nil {
			return nil, err
		} else if ok {
			if nd.LevelSet < 0 || len(ls) != 1 || ls[0] < 0 || ls[0] >= float64(N) || ls[0] != math.Trunc(ls[0]) {
				return nil, fmt.Errorf("node %d: level set %v", i, ls)
			}
			order = append(order, int(ls[0]))
		} else if nd.LevelSet >= 0 {
			order = append(order, int(nd.LevelSet))
		}
	}
	// Put the level sets in their recorded order: a permutation of the splits' sets.
	if len(order) > 0 {
		sets := make([][]uint64, len(t.LevelSets))
		seen := make([]bool, len(sets))
		for _, k := range order {
			if k >= len(sets) || seen[k] {
				return nil, fmt.Errorf("level set %d out of range or repeated", k)
			}
			seen[k] = true
		}
		for i := range t.Nodes {
			nd := &t.Nodes[i]
			if nd.LevelSet >= 0 {
				k := order[0]
				order = order[1:]
				sets[k] = t.LevelSets[nd.LevelSet]
				nd.LevelSet = int32(k)
			}
		}
		t.LevelSets = sets
	}
	return t, nil
}

func mustAttr(n *xnode, name string) string {
	v, _ := n.attr(name)
	return v
}

// predicate returns a node's predicate element.
func predicate(n *xnode) (*xnode, error) {
	for _, k := range n.kids {
		switch k.name {
		case "True", "SimplePredicate", "SimpleSetPredicate":
			return k, nil
		}
	}
	return nil, fmt.Errorf("node %s without a predicate", mustAttr(n, "id"))
}

// readSplit sets a split node's feature, threshold or level set from its children's
// predicates, which must be complements as ExportPMML writes them.
func (t *Tree) readSplit(nd *Node, ln, rn *xnode, m *Model, at map[string]int) error {
	lp, err := predicate(ln)
	if err != nil {
		return err
	}
	rp, err := predicate(rn)
	if err != nil {
		return err
	}
	field := mustAttr(lp, "field")
	f, ok := at[field]
	if !ok || mustAttr(rp, "field") != field {
		return fmt.Errorf("split on field %q, not a feature of the model's schema or not on both children", field)
	}
	nd.Feature = int32(f)
	fi := &m.Features[f]
	if lp.name == "SimplePredicate" {
		if fi.Kind != Numeric || rp.name != "SimplePredicate" || mustAttr(lp, "operator") != "lessOrEqual" ||
			mustAttr(rp, "operator") != "greaterThan" || mustAttr(lp, "value") != mustAttr(rp, "value") {
			return fmt.Errorf("split on %q: want lessOrEqual on the left child and greaterThan on the right, same value", field)
		}
		nd.Threshold, err = needFloat(lp, "value")
		return err
	}
	if lp.name != "SimpleSetPredicate" || rp.name != "SimpleSetPredicate" || fi.Kind != Categorical {
		return fmt.Errorf("split on %q: <%s> and <%s>", field, lp.name, rp.name)
	}
	set := func(p *xnode) (string, map[string]bool, error) {
		a, err := child(p, "Array")
		if err != nil {
			return "", nil, err
		}
		vals, err := parseArray(a.text)
		if err != nil {
			return "", nil, fmt.Errorf("split on %q: %w", field, err)
		}
		s := map[string]bool{}
		for _, v := range vals {
			if !slices.Contains(fi.Levels, v) {
				return "", nil, fmt.Errorf("split on %q: level %q is not in the data dictionary", field, v)
			}
			s[v] = true
		}
		return mustAttr(p, "booleanOperator"), s, nil
	}
	lop, ls, err := set(lp)
	if err != nil {
		return err
	}
	rop, rs, err := set(rp)
	if err != nil {
		return err
	}
	// The default child's predicate is isNotIn the other side's levels.
	var leftOf func(level string) bool
	switch {
	case nd.DefaultLeft && lop == "isNotIn" && rop == "isIn" && mapsEqual(ls, rs):
		leftOf = func(l string) bool { return !rs[l] }
	case !nd.DefaultLeft && lop == "isIn" && rop == "isNotIn" && mapsEqual(ls, rs):
		leftOf = func(l string) bool { return ls[l] }
	default:
		return fmt.Errorf("split on %q: want isIn on one child and isNotIn the same levels on the default child", field)
	}
	words := max(1, (len(fi.Levels)+63)/64)
	bits := make([]uint64, words)
	for c := range words * 64 {
		left := nd.DefaultLeft
		if c < len(fi.Levels) {
			left = leftOf(fi.Levels[c])
		}
		if left {
			bits[c>>6] |= 1 << (c & 63)
		}
	}
	nd.LevelSet = int32(len(t.LevelSets))
	t.LevelSets = append(t.LevelSets, bits)
	return nil
}

func mapsEqual(a, b map[string]bool) bool {
	if len(a) != len(b) {
		return false
	}
	for k := range a {
		if !b[k] {
			return false
		}
	}
	return true
}

// linear reads a RegressionModel into linear terms, in the order linearTerms lays them out.
func (r *pmmlReader) linear(n *xnode, m *Model) error {
	if err := only(n, "Extension", "MiningSchema", "LocalTransformations", "RegressionTable"); err != nil {
		return err
	}
	nm, _ := n.attr("normalizationMethod")
	if want := map[Task]string{Classification: "logit", Regression: ""}[m.Task]; nm != want {
		return fmt.Errorf("normalizationMethod %q, want %q", nm, want)
	}
	at := map[string]int{}
	for i, f := range m.Features {
		at[f.Name] = i
	}
	derived := map[string]Term{}
	for _, lt := range children(n, "LocalTransformations") {
		if err := only(lt, "DerivedField"); err != nil {
			return err
		}
		for _, df := range lt.kids {
			name := mustAttr(df, "name")
			if len(df.kids) != 1 {
				return fmt.Errorf("derived field %q: want one expression", name)
			}
			e := df.kids[0]
			switch {
			case e.name == "FieldRef":
				f, ok := at[mustAttr(e, "field")]
				fill, err := needFloat(e, "mapMissingTo")
				if !ok || err != nil || m.Features[f].Kind != Numeric {
					return fmt.Errorf("derived field %q: want a numeric feature with mapMissingTo", name)
				}
				derived[name] = Term{Kind: TermValue, Feature: f, Fill: fill}
			case e.name == "Apply" && mustAttr(e, "function") == "if" && len(e.kids) == 3 &&
				e.kids[0].name == "Apply" && mustAttr(e.kids[0], "function") == "isMissing" &&
				len(e.kids[0].kids) == 1 && strings.TrimSpace(e.kids[1].text) == "1" && strings.TrimSpace(e.kids[2].text) == "0":
				f, ok := at[mustAttr(e.kids[0].kids[0], "field")]
				if !ok {
					return fmt.Errorf("derived field %q: not on a feature", name)
				}
				k := TermMissing
				if m.Features[f].Kind == Categorical {
					k = TermNoLevel
				}
				derived[name] = Term{Kind: k, Feature: f}
			default:
				return fmt.Errorf("derived field %q: unsupported expression <%s>", name, e.name)
			}
		}
	}
	tables := children(n, "RegressionTable")
	want := 1
	if m.Task == Classification {
		want = 2
	}
	if len(tables) != want {
		return fmt.Errorf("%d regression tables, want %d", len(tables), want)
	}
	tb := tables[0]
	if m.Task == Classification {
		if c := mustAttr(tb, "targetCategory"); c != m.Classes[1] {
			return fmt.Errorf("first regression table for %q, want %q", c, m.Classes[1])
		}
		if c := mustAttr(tables[1], "targetCategory"); c != m.Classes[0] || len(tables[1].kids) != 0 || mustAttr(tables[1], "intercept") != "0" {
			return fmt.Errorf("second regression table: want %q with intercept 0 and no predictors", m.Classes[0])
		}
	}
	if err := only(tb, "Extension", "NumericPredictor", "CategoricalPredictor"); err != nil {
		return err
	}
	stats := func(n *xnode, t *Term) error {
		ex, err := exts(n)
		if err != nil {
			return err
		}
		s, _, err := extFloats(ex, "copse.term.stats")
		if err != nil {
			return err
		}
		t.StdError, t.Z, t.PValue = math.NaN(), math.NaN(), math.NaN()
		if len(s) == 3 {
			t.StdError, t.Z, t.PValue = s[0], s[1], s[2]
		}
		return nil
	}
	icpt := Term{Name: "(intercept)", Kind: TermIntercept}
	var err error
	if icpt.Estimate, err = needFloat(tb, "intercept"); err != nil {
		return err
	}
	if err := stats(tb, &icpt); err != nil {
		return err
	}
	var terms []Term
	for _, p := range tb.kids {
		var t Term
		switch p.name {
		case "Extension":
			continue
		case "NumericPredictor":
			d, ok := derived[mustAttr(p, "name")]
			if !ok {
				return fmt.Errorf("numeric predictor %q is not a derived field of ours", mustAttr(p, "name"))
			}
			t = d
		case "CategoricalPredictor":
			f, ok := at[mustAttr(p, "name")]
			if !ok || m.Features[f].Kind != Categorical {
				return fmt.Errorf("categorical predictor %q is not a categorical feature", mustAttr(p, "name"))
			}
			l := slices.Index(m.Features[f].Levels, mustAttr(p, "value"))
			if l < 0 {
				return fmt.Errorf("categorical predictor %q: level %q unknown", mustAttr(p, "name"), mustAttr(p, "value"))
			}
			t = Term{Kind: TermLevel, Feature: f, Level: l}
		}
		if t.Estimate, err = needFloat(p, "coefficient"); err != nil {
			return err
		}
		if err := stats(p, &t); err != nil {
			return err
		}
		name := m.Features[t.Feature].Name
		switch t.Kind {
		case TermLevel:
			name += "=" + m.Features[t.Feature].Levels[t.Level]
		case TermMissing, TermNoLevel:
			name += ":missing"
		}
		t.Name = name
		terms = append(terms, t)
	}
	// linearTerms' order: per feature, its value or level indicators (by code), then its
	// missing indicator.
	rank := func(t Term) [3]int {
		k := 0
		if t.Kind == TermMissing || t.Kind == TermNoLevel {
			k = 1
		}
		return [3]int{t.Feature, k, t.Level}
	}
	slices.SortStableFunc(terms, func(a, b Term) int {
		ra, rb := rank(a), rank(b)
		return slices.Compare(ra[:], rb[:])
	})
	m.Linear.Terms = append([]Term{icpt}, terms...)
	return nil
}
