package forest

import (
	"bytes"
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"hash/crc32"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"reflect"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"testing"
)

// encFixture is a trained model and the feature columns of its training rows.
type encFixture struct {
	name string
	m    *Model
	cols [][]float64
}

// encMixedData makes a data set with categorical features and missing values: a numeric x
// (10 % missing), a 0/1 flag, a five-level color (10 % missing) and a 90-level city whose
// level sets take two words and whose last ten levels never occur.
func encMixedData(t testing.TB, rows int, regression bool) (*Dataset, [][]float64) {
	t.Helper()
	rng := rand.New(rand.NewPCG(2024, 7))
	x, flag := make([]float64, rows), make([]float64, rows)
	color, city := make([]int32, rows), make([]int32, rows)
	yc, yr := make([]int32, rows), make([]float64, rows)
	for i := range rows {
		x[i] = rng.Float64()
		if rng.IntN(10) == 0 {
			x[i] = math.NaN()
		}
		flag[i] = float64(rng.IntN(2))
		color[i] = int32(rng.IntN(5))
		if rng.IntN(10) == 0 {
			color[i] = Missing
		}
		city[i] = int32(rng.IntN(80))
		if rng.IntN(20) == 0 {
			city[i] = Missing
		}
		score := flag[i] / 2
		if x[i] > 0.5 {
			score++
		}
		if color[i] == 1 || color[i] == 3 {
			score++
		}
		if city[i] >= 0 && city[i]%3 == 0 {
			score++
		}
		yr[i] = score + 0.3*rng.NormFloat64()
		yc[i] = int32(min(2, max(0, int(math.Round(score/1.5+0.4*rng.NormFloat64())))))
	}
	cities := make([]string, 90)
	for i := range cities {
		cities[i] = fmt.Sprintf("city%02d", i)
	}
	d := NewDataset(rows)
	errs := []error{
		d.AddNumeric("x", x),
		d.AddNumeric("flag", flag),
		d.AddCategorical("color", color, []string{"red", "green", "blue", "black", "white"}),
		d.AddCategorical("city", city, cities),
	}
	if regression {
		errs = append(errs, d.SetRegressionTarget("y", yr))
	} else {
		errs = append(errs, d.SetClassTarget("y", yc, []string{"low", "mid", "high"}))
	}
	if err := errors.Join(errs...); err != nil {
		t.Fatal(err)
	}
	asFloat := func(codes []int32) []float64 {
		out := make([]float64, len(codes))
		for i, c := range codes {
			out[i] = float64(c)
			if c < 0 {
				out[i] = math.NaN()
			}
		}
		return out
	}
	return d, [][]float64{x, flag, asFloat(color), asFloat(city)}
}

// encFixtures trains a model per method, task and kind of data; breast_cancer/forest is a
// default 100-tree forest.
func encFixtures(t testing.TB) []encFixture {
	t.Helper()
	iris, fried, bc := readTable(t, "iris.csv"), readTable(t, "friedman1_train.csv"), readTable(t, "breast_cancer.csv")
	mixC, mixCols := encMixedData(t, 400, false)
	mixR, _ := encMixedData(t, 400, true)
	params := func(m Method, edit func(*Params)) Params {
		p := DefaultParams(m)
		p.Threads = 2
		if m != MethodTree {
			p.Trees = 10
		}
		if edit != nil {
			edit(&p)
		}
		return p
	}
	cases := []struct {
		name string
		d    *Dataset
		tb   *table // nil: cols
		cols [][]float64
		p    Params
	}{
		{"iris/tree", iris.dataset(t, "species"), iris, nil, params(MethodTree, nil)},
		{"iris/bagging", iris.dataset(t, "species"), iris, nil, params(MethodBagging, nil)},
		{"iris/forest", iris.dataset(t, "species"), iris, nil, params(MethodForest, func(p *Params) { p.Impurity = Entropy })},
		{"friedman1/tree", fried.dataset(t, "y"), fried, nil, params(MethodTree, nil)},
		{"friedman1/bagging", fried.dataset(t, "y"), fried, nil, params(MethodBagging, func(p *Params) {
			p.RowFraction, p.WithReplacement = 0.5, false
		})},
		{"friedman1/forest", fried.dataset(t, "y"), fried, nil, params(MethodForest, func(p *Params) { p.PermutationRows = -1 })},
		{"breast_cancer/forest", bc.dataset(t, "diagnosis"), bc, nil, params(MethodForest, func(p *Params) { p.Trees = 100 })},
		{"mixed/tree", mixC, nil, mixCols, params(MethodTree, nil)},
		{"mixed/forest", mixC, nil, mixCols, params(MethodForest, func(p *Params) { p.Trees = 20 })},
		{"mixed/bagging-regression", mixR, nil, mixCols, params(MethodBagging, func(p *Params) { p.MaxDepth = 6 })},
		{"mixed/forest-regression", mixR, nil, mixCols, params(MethodForest, func(p *Params) { p.FeaturesPerSplit = 0.5 })},
		{"friedman1/boosting", fried.dataset(t, "y"), fried, nil, params(MethodBoosting, func(p *Params) {
			p.RowFraction, p.LeafPenalty, p.HoldoutFraction, p.Patience = 0.7, 1, 0.2, 3
		})},
		{"breast_cancer/boosting", bc.dataset(t, "diagnosis"), bc, nil, params(MethodBoosting, func(p *Params) { p.MaxDepth = 3 })},
		{"mixed/boosting-regression", mixR, nil, mixCols, params(MethodBoosting, func(p *Params) { p.FeaturesPerSplit = 2 })},
		{"iris/adaboost", iris.dataset(t, "species"), iris, nil, params(MethodAdaBoost, nil)},
		{"mixed/adaboost", mixC, nil, mixCols, params(MethodAdaBoost, func(p *Params) { p.MaxDepth, p.LearningRate = 3, 0.5 })},
	}
	out := make([]encFixture, len(cases))
	for i, c := range cases {
		m, err := Train(context.Background(), c.d, c.p)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		cols := c.cols
		if c.tb != nil {
			cols = c.tb.columns(m)
		}
		out[i] = encFixture{c.name, m, cols}
	}
	return out
}

func encFixtureNamed(t testing.TB, fs []encFixture, name string) encFixture {
	t.Helper()
	for _, f := range fs {
		if f.name == name {
			return f
		}
	}
	t.Fatalf("no fixture %q", name)
	return encFixture{}
}

func encMust(t testing.TB, m *Model) []byte {
	t.Helper()
	b, err := m.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// encClone deep-copies a model through the encoding, which TestEncodeRoundTrip vouches for.
func encClone(t testing.TB, m *Model) *Model {
	t.Helper()
	c, err := Decode(encMust(t, m))
	if err != nil {
		t.Fatal(err)
	}
	return c
}

// encSameBits reports the first difference between a and b, comparing floats by their bit
// patterns (so NaN equals the same NaN and −0 differs from +0) and telling nil slices and
// pointers from empty ones.
func encSameBits(path string, a, b reflect.Value) error {
	switch a.Kind() {
	case reflect.Float32, reflect.Float64:
		if x, y := math.Float64bits(a.Float()), math.Float64bits(b.Float()); x != y {
			return fmt.Errorf("%s: %#x != %#x", path, x, y)
		}
	case reflect.Slice:
		if a.IsNil() != b.IsNil() || a.Len() != b.Len() {
			return fmt.Errorf("%s: nil %v, length %d != nil %v, length %d", path, a.IsNil(), a.Len(), b.IsNil(), b.Len())
		}
		for i := range a.Len() {
			if err := encSameBits(fmt.Sprintf("%s[%d]", path, i), a.Index(i), b.Index(i)); err != nil {
				return err
			}
		}
	case reflect.Pointer:
		if a.IsNil() != b.IsNil() {
			return fmt.Errorf("%s: nil %v != nil %v", path, a.IsNil(), b.IsNil())
		}
		if !a.IsNil() {
			return encSameBits(path, a.Elem(), b.Elem())
		}
	case reflect.Struct:
		for i := range a.NumField() {
			if err := encSameBits(path+"."+a.Type().Field(i).Name, a.Field(i), b.Field(i)); err != nil {
				return err
			}
		}
	case reflect.Func:
		if !a.IsNil() || !b.IsNil() {
			return fmt.Errorf("%s: function set", path)
		}
	default:
		if !a.Equal(b) {
			return fmt.Errorf("%s: %v != %v", path, a, b)
		}
	}
	return nil
}

func encSameModel(t testing.TB, want, got *Model) {
	t.Helper()
	if err := encSameBits("Model", reflect.ValueOf(want), reflect.ValueOf(got)); err != nil {
		t.Fatal(err)
	}
}

// encPredictions scores cols with Predict and, row by row, with PredictRow.
func encPredictions(t testing.TB, m *Model, cols [][]float64) (block, byRow []float64) {
	t.Helper()
	n, W := len(cols[0]), m.Width()
	block = make([]float64, n*W)
	if err := m.Predict(cols, block, 2); err != nil {
		t.Fatal(err)
	}
	byRow = make([]float64, n*W)
	row := make([]float64, len(cols))
	for i := range n {
		for f := range cols {
			row[f] = cols[f][i]
		}
		m.PredictRow(row, byRow[i*W:(i+1)*W])
	}
	return block, byRow
}

func encSameFloats(t testing.TB, what string, want, got []float64) {
	t.Helper()
	for i := range want {
		if math.Float64bits(want[i]) != math.Float64bits(got[i]) {
			t.Fatalf("%s: number %d is %v, want %v", what, i, got[i], want[i])
		}
	}
}

// encReseal recomputes the checksum, so that damage behind it reaches the decoder.
func encReseal(b []byte) []byte {
	b = slices.Clone(b)
	end := len(b) - encodingSum
	binary.LittleEndian.PutUint32(b[end:], crc32.Checksum(b[:end], castagnoli))
	return b
}

// encWrapBody frames section bytes with a valid head and checksum.
func encWrapBody(body []byte) []byte {
	b := binary.LittleEndian.AppendUint16([]byte(encodingMagic), encodingVersion)
	b = append(b, body...)
	return binary.LittleEndian.AppendUint32(b, crc32.Checksum(b, castagnoli))
}

func encMustCorrupt(t testing.TB, err error, want string) {
	t.Helper()
	switch {
	case err == nil:
		t.Fatalf("decoded; want an error containing %q", want)
	case !errors.Is(err, ErrCorrupt):
		t.Fatalf("error %q does not wrap ErrCorrupt", err)
	case !strings.HasPrefix(err.Error(), "forest: decode: "):
		t.Fatalf("error %q does not start with forest: decode:", err)
	case !strings.Contains(err.Error(), want):
		t.Fatalf("error %q does not contain %q", err, want)
	}
}

// encCheckDecoded checks what holds for every model Decode returns: it encodes back to the bytes it
// came from and scores odd rows without a panic.
func encCheckDecoded(t testing.TB, m *Model, b []byte) {
	t.Helper()
	again, err := m.MarshalBinary()
	if err != nil {
		t.Fatalf("a decoded model does not encode: %v", err)
	}
	if !bytes.Equal(again, b) {
		t.Fatalf("decoded %d bytes, re-encoded to %d different ones", len(b), len(again))
	}
	F, W := len(m.Features), m.Width()
	fills := []float64{math.NaN(), 0, -1, 0.5, 3, 70, 1e300, math.Inf(-1)}
	cols := make([][]float64, F)
	for f := range cols {
		cols[f] = fills
	}
	out := make([]float64, len(fills)*W)
	if err := m.Predict(cols, out, 1); err != nil {
		t.Fatal(err)
	}
	row := make([]float64, F)
	for _, v := range fills {
		for f := range row {
			row[f] = v
		}
		m.PredictRow(row, out[:W])
	}
	for _, tr := range m.Trees {
		tr.Depth()
		tr.Leaves()
	}
}

// Encoding then decoding gives the same model, bit for bit, the same predictions on every
// row, and the same bytes again.
func TestEncodeRoundTrip(t *testing.T) {
	for _, fx := range encFixtures(t) {
		t.Run(fx.name, func(t *testing.T) {
			b := encMust(t, fx.m)
			t.Logf("%d trees, %d bytes", len(fx.m.Trees), len(b))
			got, err := Decode(b)
			if err != nil {
				t.Fatal(err)
			}
			encSameModel(t, fx.m, got)
			if again := encMust(t, got); !bytes.Equal(again, b) {
				t.Fatalf("re-encoding gives %d bytes, first %d", len(again), len(b))
			}
			wantBlock, wantRows := encPredictions(t, fx.m, fx.cols)
			gotBlock, gotRows := encPredictions(t, got, fx.cols)
			encSameFloats(t, "Predict", wantBlock, gotBlock)
			encSameFloats(t, "PredictRow", wantRows, gotRows)
			var um Model
			if err := um.UnmarshalBinary(b); err != nil {
				t.Fatal(err)
			}
			encSameModel(t, fx.m, &um)
		})
	}
}

// The encoding must hold every field of the model: a new field fails this test until it is
// encoded (with a new format version) and added here.
func TestEncodeCoversEveryField(t *testing.T) {
	want := map[reflect.Type][]string{
		reflect.TypeFor[Model](): {"Method", "Task", "Target", "Classes", "Features", "Params", "Rows", "Trees", "OOB", "Importance", "Boost", "AdaBoost", "Linear", "Blend"},
		// index and scratch are derived from the members when a blend is built or decoded.
		reflect.TypeFor[Blend]():       {"Rule", "Members", "Names", "Weights", "Fitted", "index", "scratch"},
		reflect.TypeFor[FittedOn]():    {"Metric", "Rows", "Loss", "MemberLoss"},
		reflect.TypeFor[Linear]():      {"Terms", "Iterations"},
		reflect.TypeFor[Term]():        {"Name", "Kind", "Feature", "Level", "Fill", "Estimate", "StdError", "Z", "PValue"},
		reflect.TypeFor[AdaBoost]():    {"Alpha", "Error"},
		reflect.TypeFor[Boost]():       {"Loss", "InitScore", "Rounds", "BestRound", "TrainLoss", "HoldoutLoss"},
		reflect.TypeFor[FeatureInfo](): {"Name", "Kind", "Levels", "Binning"},
		reflect.TypeFor[Binning]():     {"Kind", "Upper", "LevelBin", "Counts"},
		reflect.TypeFor[Tree]():        {"Nodes", "Gain", "Cover", "Value", "Width", "LevelSets"},
		reflect.TypeFor[Node]():        {"Threshold", "Left", "Feature", "LevelSet", "DefaultLeft"},
		reflect.TypeFor[OOB]():         {"Votes", "Value", "Metrics", "Curve", "CurveMetric", "Scored"},
		reflect.TypeFor[Metric]():      {"Name", "Value"},
		reflect.TypeFor[Importance]():  {"Impurity", "Permutation", "PermutationStd"},
		// Threads and Progress are not stored: they never change the model.
		reflect.TypeFor[Params](): {"Method", "Task", "Impurity", "Trees", "MaxDepth", "MinLeaf", "MinGain",
			"FeaturesPerSplit", "RowFraction", "WithReplacement", "Bins", "Seed", "Threads", "PermutationRows", "Progress",
			"Loss", "LearningRate", "LeafPenalty", "HoldoutFraction", "Patience", "Quantile", "Exposure", "Ridge", "LeafLimit"},
	}
	for typ, names := range want {
		var have []string
		for i := range typ.NumField() {
			have = append(have, typ.Field(i).Name)
		}
		slices.Sort(have)
		slices.Sort(names)
		if !slices.Equal(have, names) {
			t.Errorf("%s has fields %v; the encoding knows %v", typ, have, names)
		}
	}
}

// encHandModel is a one-tree model small enough to write out byte by byte. It uses a NaN
// with a payload and a −0, which must survive.
func encHandModel() *Model {
	p := DefaultParams(MethodBagging)
	p.Task, p.Trees = Regression, 1
	return &Model{
		Method: MethodBagging, Task: Regression, Target: "y", Rows: 4, Params: p,
		Features: []FeatureInfo{{Name: "x", Kind: Numeric, Binning: Binning{
			Kind: Numeric, Upper: []float64{1.5, math.Inf(1)}, Counts: []float64{0, 2, 2},
		}}},
		Trees: []*Tree{{
			Nodes: []Node{
				{Threshold: 1.5, Left: 1, LevelSet: -1, DefaultLeft: true},
				{Left: -1, LevelSet: -1},
				{Left: -1, LevelSet: -1},
			},
			Gain: []float64{4, 0, 0}, Cover: []float64{4, 2, 2}, Value: []float64{2, 1, 3}, Width: 1,
		}},
		OOB: &OOB{
			Votes: []int32{1, 0, 1, 0}, Value: []float64{1, math.Float64frombits(0x7ff8_0000_dead_beef), 3, math.NaN()},
			Metrics: []Metric{{"mse", 0.5}}, Curve: []float64{0.5}, CurveMetric: "mse", Scored: 2,
		},
		Importance: Importance{Impurity: []float64{1}, Permutation: []float64{math.Copysign(0, -1)}},
	}
}

// encField is one named field of a hand-written encoding.
type encField struct {
	name string
	b    []byte
}

func encUv(v uint64) []byte { return binary.AppendUvarint(nil, v) }
func encSv(v int64) []byte  { return binary.AppendVarint(nil, v) }
func encStr(s string) []byte {
	return append(encUv(uint64(len(s))), s...)
}
func encF64(vs ...float64) []byte {
	var b []byte
	for _, v := range vs {
		b = binary.LittleEndian.AppendUint64(b, math.Float64bits(v))
	}
	return b
}
func encJoin(parts ...[]byte) []byte { return bytes.Join(parts, nil) }

// encHandSections is encHandModel's encoding, written from the layout table in encode.go.
func encHandSections() [][]encField {
	node := func(n string, flags byte, left uint64, rest ...[]byte) []encField {
		return []encField{{n + ".flags", []byte{flags}}, {n + ".left", encUv(left)}, {n + ".feature", encUv(0)},
			{n + ".level_set", encUv(0)}, {n + ".rest", encJoin(rest...)}}
	}
	trees := []encField{{"trees", encUv(1)}, {"t.nodes", encUv(3)}, {"t.level_sets", encUv(0)}}
	trees = append(trees, node("n0", 7, 1, encF64(1.5), encF64(4), encF64(4), encF64(2))...)
	trees = append(trees, node("n1", 0, 0, encF64(2), encF64(1))...)
	trees = append(trees, node("n2", 0, 0, encF64(2), encF64(3))...)
	return [][]encField{
		{{"method", encStr("bagging")}, {"task", encStr("regression")}, {"target", encStr("y")}, {"rows", encUv(4)}, {"classes", encUv(0)}},
		{{"p.method", encStr("bagging")}, {"p.task", encStr("regression")}, {"p.impurity", encStr("")},
			{"p.trees", encSv(1)}, {"p.max_depth", encSv(0)}, {"p.min_leaf", encF64(1)}, {"p.min_gain", encF64(0)},
			{"p.features_per_split", encF64(0)}, {"p.row_fraction", encF64(1)}, {"p.with_replacement", []byte{1}},
			{"p.bins", encSv(255)}, {"p.seed", encUv(1)}, {"p.permutation_rows", encSv(10000)},
			{"p.loss", encStr("")}, {"p.learning_rate", encF64(0)}, {"p.leaf_penalty", encF64(0)},
			{"p.holdout_fraction", encF64(0)}, {"p.patience", encSv(0)},
			{"p.quantile", encF64(0)}, {"p.exposure", encStr("")}, {"p.ridge", encF64(0)}, {"p.leaf_limit", encSv(0)}},
		{{"features", encUv(1)}, {"f.name", encStr("x")}, {"f.kind", []byte{1}}, {"f.levels", encUv(0)},
			{"f.upper", encJoin(encUv(3), encF64(1.5, math.Inf(1)))}, {"f.level_bins", encUv(0)}, {"f.counts", encJoin(encUv(4), encF64(0, 2, 2))}},
		trees,
		{{"o.votes", encJoin(encUv(5), encUv(1), encUv(0), encUv(1), encUv(0))},
			{"o.value", encJoin(encUv(5), encF64(1), binary.LittleEndian.AppendUint64(nil, 0x7ff8_0000_dead_beef), encF64(3, math.NaN()))},
			{"o.metrics", encJoin(encUv(2), encStr("mse"), encF64(0.5))}, {"o.curve", encJoin(encUv(2), encF64(0.5))},
			{"o.curve_metric", encStr("mse")}, {"o.scored", encUv(2)}},
		{{"imp.impurity", encJoin(encUv(2), encF64(1))}, {"imp.permutation", encJoin(encUv(2), encF64(math.Copysign(0, -1)))},
			{"imp.permutation_std", encUv(0)}},
		{}, // not boosted
		{}, // not AdaBoost
		{}, // not linear
		{}, // not a blend
	}
}

// encAssemble frames sections (tags 1, 2, …) with magic, version and checksum.
func encAssemble(secs [][]encField) []byte {
	var body []byte
	for i, s := range secs {
		var sb []byte
		for _, f := range s {
			sb = append(sb, f.b...)
		}
		body = append(body, byte(i+1))
		body = binary.AppendUvarint(body, uint64(len(sb)))
		body = append(body, sb...)
	}
	return encWrapBody(body)
}

// encSet replaces the bytes of the field called name, or, for a name ending in ".", of every
// field it starts: the first gets b, the rest nothing.
func encSet(secs [][]encField, name string, b []byte) [][]encField {
	found := false
	for _, s := range secs {
		for i := range s {
			if s[i].name == name || strings.HasSuffix(name, ".") && strings.HasPrefix(s[i].name, name) {
				if !found {
					s[i].b = b
				} else {
					s[i].b = nil
				}
				found = true
			}
		}
	}
	if !found {
		panic("no field " + name)
	}
	return secs
}

// The layout table in encode.go is the format: bytes written from it decode to the model,
// and the model encodes to them.
func TestEncodeLayout(t *testing.T) {
	want := encAssemble(encHandSections())
	got := encMust(t, encHandModel())
	if !bytes.Equal(got, want) {
		t.Fatalf("encoding differs from the layout table:\n got % x\nwant % x", got, want)
	}
	m, err := Decode(want)
	if err != nil {
		t.Fatal(err)
	}
	encSameModel(t, encHandModel(), m)
	if v := m.PredictRow([]float64{1}, make([]float64, 1)); v[0] != 1 {
		t.Errorf("x = 1 predicts %v, want 1", v[0])
	}
	if v := m.PredictRow([]float64{math.NaN()}, make([]float64, 1)); v[0] != 1 {
		t.Errorf("missing x predicts %v, want 1 (missing goes left)", v[0])
	}
}

func encAllocated(f func()) uint64 {
	var before, after runtime.MemStats
	runtime.ReadMemStats(&before)
	f()
	runtime.ReadMemStats(&after)
	return after.TotalAlloc - before.TotalAlloc
}

// Damage behind a valid checksum is caught field by field, without a panic and without
// allocating for counts the bytes cannot hold.
func TestDecodeCorruptFields(t *testing.T) {
	huge := uint64(1) << 40
	cases := []struct {
		name string
		edit func([][]encField) [][]encField
		want string
	}{
		{"rows not in shortest form", func(s [][]encField) [][]encField { return encSet(s, "rows", []byte{0x84, 0}) }, "rows: varint not in its shortest form"},
		{"rows overflow", func(s [][]encField) [][]encField { return encSet(s, "rows", bytes.Repeat([]byte{0xff}, 11)) }, "rows: varint overflows"},
		{"huge target", func(s [][]encField) [][]encField { return encSet(s, "target", encUv(huge)) }, "target: 1099511627776 elements"},
		{"huge class list", func(s [][]encField) [][]encField { return encSet(s, "classes", encUv(huge+1)) }, "classes: 1099511627776 elements"},
		{"huge feature count", func(s [][]encField) [][]encField { return encSet(s, "features", encUv(huge)) }, "feature count: 1099511627776 elements"},
		{"huge level list", func(s [][]encField) [][]encField { return encSet(s, "f.levels", encUv(huge+1)) }, "levels: 1099511627776 elements"},
		{"huge edge list", func(s [][]encField) [][]encField { return encSet(s, "f.upper", encUv(huge+1)) }, "bin edges: 1099511627776 elements"},
		{"huge level bin list", func(s [][]encField) [][]encField { return encSet(s, "f.level_bins", encUv(huge+1)) }, "level bins: 1099511627776 elements"},
		{"huge tree count", func(s [][]encField) [][]encField { return encSet(s, "trees", encUv(huge)) }, "tree count: 1099511627776 elements"},
		{"huge node count", func(s [][]encField) [][]encField { return encSet(s, "t.nodes", encUv(huge)) }, "node count: 1099511627776 elements"},
		{"huge level set list", func(s [][]encField) [][]encField { return encSet(s, "t.level_sets", encUv(huge+1)) }, "level sets: 1099511627776 elements"},
		{"huge level set", func(s [][]encField) [][]encField { return encSet(s, "t.level_sets", encJoin(encUv(2), encUv(huge+1))) }, "level set: 1099511627776 elements"},
		{"huge vote list", func(s [][]encField) [][]encField { return encSet(s, "o.votes", encUv(huge+1)) }, "votes: 1099511627776 elements"},
		{"huge metric list", func(s [][]encField) [][]encField { return encSet(s, "o.metrics", encUv(huge+1)) }, "metrics: 1099511627776 elements"},
		{"huge importance list", func(s [][]encField) [][]encField { return encSet(s, "imp.impurity", encUv(huge+1)) }, "impurity: 1099511627776 elements"},
		{"unknown method", func(s [][]encField) [][]encField { return encSet(s, "method", encStr("boost")) }, `unknown method "boost"`},
		{"unknown task", func(s [][]encField) [][]encField { return encSet(s, "task", encStr("ranking")) }, `unknown task "ranking"`},
		{"params disagree", func(s [][]encField) [][]encField { return encSet(s, "p.method", encStr("forest")) }, "params say forest regression"},
		{"unknown impurity", func(s [][]encField) [][]encField { return encSet(s, "p.impurity", encStr("chaos")) }, `unknown impurity "chaos"`},
		{"bool byte 2", func(s [][]encField) [][]encField { return encSet(s, "p.with_replacement", []byte{2}) }, "with_replacement: byte 2"},
		{"regression with classes", func(s [][]encField) [][]encField {
			return encSet(s, "classes", encJoin(encUv(3), encStr("a"), encStr("b")))
		}, "regression with 2 classes"},
		{"no features", func(s [][]encField) [][]encField { return encSet(encSet(s, "features", encUv(0)), "f.", nil) }, "0 features"},
		{"kind 0", func(s [][]encField) [][]encField { return encSet(s, "f.kind", []byte{0}) }, "unknown kind 0"},
		{"kind 3", func(s [][]encField) [][]encField { return encSet(s, "f.kind", []byte{3}) }, "unknown kind 3"},
		{"categorical with edges", func(s [][]encField) [][]encField { return encSet(s, "f.kind", []byte{2}) }, "categorical feature with 2 bin edges"},
		{"no edges", func(s [][]encField) [][]encField { return encSet(s, "f.upper", encUv(1)) }, "no bin edges"},
		{"nil edges", func(s [][]encField) [][]encField { return encSet(s, "f.upper", encUv(0)) }, "no bin edges"},
		{"edges descending", func(s [][]encField) [][]encField { return encSet(s, "f.upper", encJoin(encUv(3), encF64(2, 1))) }, "bin edge 1 (1) is NaN or not above"},
		{"NaN edge", func(s [][]encField) [][]encField {
			return encSet(s, "f.upper", encJoin(encUv(3), encF64(math.NaN(), 1)))
		}, "bin edge 0 (NaN)"},
		{"counts short", func(s [][]encField) [][]encField { return encSet(s, "f.counts", encJoin(encUv(3), encF64(0, 2))) }, "2 bin counts for 2 bin edges"},
		{"level bins on numeric", func(s [][]encField) [][]encField { return encSet(s, "f.level_bins", encJoin(encUv(2), []byte{0, 0})) }, "numeric feature with 0 levels and 1 level bins"},
		{"no trees", func(s [][]encField) [][]encField {
			for _, name := range []string{"t.", "n0.", "n1.", "n2."} {
				s = encSet(s, name, nil)
			}
			return encSet(encSet(s, "trees", encUv(0)), "o.curve", encUv(1))
		}, "no trees"},
		{"missing tree", func(s [][]encField) [][]encField { return encSet(s, "trees", encUv(2)) }, "tree 1: node count: unexpected end"},
		// A tree must hold a node, so a count of trees that leaves no room for one fails early.
		{"no nodes", func(s [][]encField) [][]encField {
			for _, name := range []string{"n0.", "n1.", "n2."} {
				s = encSet(s, name, nil)
			}
			return encSet(s, "t.nodes", encUv(0))
		}, "tree count: 1 elements of 22 or more bytes, but 2 bytes remain"},
		{"unknown node flag", func(s [][]encField) [][]encField { return encSet(s, "n1.flags", []byte{8}) }, "node 1: unknown flags 0x8"},
		{"threshold flagged but +0", func(s [][]encField) [][]encField { return encSet(s, "n0.rest", encF64(0, 4, 4, 2)) }, "threshold flagged but +0"},
		{"gain flagged but +0", func(s [][]encField) [][]encField { return encSet(s, "n0.rest", encF64(1.5, 0, 4, 2)) }, "gain flagged but +0"},
		{"left child past the end", func(s [][]encField) [][]encField { return encSet(s, "n0.left", encUv(3)) }, "left child: 3 is above 2"},
		{"right child past the end", func(s [][]encField) [][]encField { return encSet(s, "n0.left", encUv(2)) }, "node 0: children 2 and 3; want two after the node and below 3"},
		{"leaf links past the end", func(s [][]encField) [][]encField { return encSet(s, "n2.left", encUv(1)) }, "left child: 1 is above 0"},
		{"feature out of range", func(s [][]encField) [][]encField { return encSet(s, "n0.feature", encUv(1)) }, "node 0: feature 1 out of range (1 features)"},
		{"feature past int32", func(s [][]encField) [][]encField { return encSet(s, "n0.feature", encUv(1<<31)) }, "feature: 2147483648 is above"},
		{"level set on a numeric split", func(s [][]encField) [][]encField {
			return encSet(encSet(s, "n0.level_set", encUv(1)), "t.level_sets", encJoin(encUv(2), encUv(2), encF64(1)))
		}, "split on numeric feature 0 with level set 0"},
		{"level set on a leaf", func(s [][]encField) [][]encField { return encSet(s, "n1.level_set", encUv(1)) }, "node 1: leaf with left child -1 and level set 0"},
		{"oob cut short", func(s [][]encField) [][]encField { return encSet(s, "o.", []byte{0}) }, "section oob: value: unexpected end"},
		{"oob rows", func(s [][]encField) [][]encField {
			return encSet(s, "o.votes", encJoin(encUv(4), encUv(1), encUv(0), encUv(1)))
		}, "oob: 3 votes for 4 rows"},
		{"oob more votes than trees", func(s [][]encField) [][]encField {
			return encSet(s, "o.votes", encJoin(encUv(5), encUv(2), encUv(0), encUv(1), encUv(0)))
		}, "oob: row 0 has 2 votes from 1 trees"},
		{"oob values", func(s [][]encField) [][]encField { return encSet(s, "o.value", encJoin(encUv(4), encF64(1, 2, 3))) }, "oob: 3 values for 4 rows"},
		{"oob curve", func(s [][]encField) [][]encField { return encSet(s, "o.curve", encJoin(encUv(3), encF64(1, 2))) }, "oob: curve of 2 points for 1 trees"},
		{"oob scored", func(s [][]encField) [][]encField { return encSet(s, "o.scored", encUv(5)) }, "oob: 5 rows scored of 4"},
		{"importance length", func(s [][]encField) [][]encField {
			return encSet(s, "imp.impurity", encJoin(encUv(3), encF64(0.5, 0.5)))
		}, "impurity importance: 2 values for 1 features"},
		{"empty importance", func(s [][]encField) [][]encField { return encSet(s, "imp.permutation_std", encUv(1)) }, "permutation std importance: 0 values"},
		{"bytes left in a section", func(s [][]encField) [][]encField { s[0] = append(s[0], encField{"extra", []byte{0}}); return s }, "section model: 1 bytes left over"},
		{"eleventh section", func(s [][]encField) [][]encField { return append(s, nil) }, "2 bytes after the last section"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			b := encAssemble(c.edit(encHandSections()))
			var err error
			if n := encAllocated(func() { _, err = Decode(b) }); n > 1<<20 {
				t.Errorf("decoding %d bytes allocated %d bytes", len(b), n)
			}
			encMustCorrupt(t, err, c.want)
		})
	}
}

// The head is checked before the checksum, so the error names the real problem.
func TestDecodeHead(t *testing.T) {
	good := encMust(t, encHandModel())
	version := slices.Clone(good)
	version[4] = encodingVersion + 1
	version0 := slices.Clone(good)
	version0[4] = 0
	tag := encReseal(good)
	tag[6] = 2
	cases := []struct {
		name string
		b    []byte
		want string
	}{
		{"nil", nil, "0 bytes are too few"},
		{"short", good[:9], "9 bytes are too few"},
		{"magic", append([]byte("CPSX"), good[4:]...), `not a model: starts with "CPSX", want "CPSM"`},
		{"version", version, fmt.Sprintf("format version %d; this build reads versions 1 to %d", encodingVersion+1, encodingVersion)},
		{"version 0", version0, fmt.Sprintf("format version 0; this build reads versions 1 to %d", encodingVersion)},
		{"checksum", append(slices.Clone(good[:len(good)-1]), good[len(good)-1]^1), "checksum"},
		{"section order", encReseal(tag), "section tag 2 where 1 (model) belongs"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := Decode(c.b)
			encMustCorrupt(t, err, c.want)
		})
	}
}

// Any damaged byte fails the checksum (or, in the head, the magic or version check), and
// every cut-short encoding fails.
func TestDecodeDamaged(t *testing.T) {
	fs := encFixtures(t)
	for _, c := range []struct {
		name   string
		stride int
	}{{"iris/tree", 1}, {"mixed/tree", 1}, {"breast_cancer/forest", 61}} {
		t.Run(c.name, func(t *testing.T) {
			good := encMust(t, encFixtureNamed(t, fs, c.name).m)
			b := slices.Clone(good)
			for i := 0; i < len(b); i += c.stride {
				for _, mask := range []byte{0x01, 0x80, 0xff} {
					b[i] ^= mask
					_, err := Decode(b)
					want := "checksum"
					switch {
					case i < len(encodingMagic):
						want = "not a model"
					case i < encodingHead && !(i == len(encodingMagic) && b[i] >= 1 && b[i] <= encodingVersion):
						// An earlier version this build reads passes the head; the
						// checksum then fails.
						want = "format version"
					}
					encMustCorrupt(t, err, want)
					b[i] ^= mask
				}
			}
			for n := 0; n < len(good); n += c.stride {
				_, err := Decode(good[:n])
				encMustCorrupt(t, err, "")
				// The same prefix behind a valid checksum: a section is always cut short.
				if n >= encodingHead+encodingSum {
					_, err = Decode(encReseal(good[:n]))
					encMustCorrupt(t, err, "")
				}
			}
		})
	}
}

// Damage behind a recomputed checksum, at every byte, either fails with ErrCorrupt or
// yields a model that is sound: it encodes back to the same bytes and scores any row.
func TestDecodeResealed(t *testing.T) {
	fs := encFixtures(t)
	for _, name := range []string{"iris/tree", "mixed/tree"} {
		t.Run(name, func(t *testing.T) {
			good := encMust(t, encFixtureNamed(t, fs, name).m)
			failed, decoded := 0, 0
			for i := encodingHead; i < len(good)-encodingSum; i++ {
				for _, mask := range []byte{0x01, 0xff} {
					b := slices.Clone(good)
					b[i] ^= mask
					b = encReseal(b)
					m, err := Decode(b)
					if err != nil {
						encMustCorrupt(t, err, "")
						failed++
						continue
					}
					encCheckDecoded(t, m, b)
					decoded++
				}
			}
			t.Logf("%d bytes: %d damaged copies refused, %d decoded (damage in float values)", len(good), failed, decoded)
			if failed == 0 || decoded == 0 {
				t.Errorf("refused %d, decoded %d; want some of each", failed, decoded)
			}
		})
	}
}

// A model with a broken structure is refused by MarshalBinary and, written out anyway, by
// Decode; neither panics.
func TestEncodeBrokenStructure(t *testing.T) {
	fs := encFixtures(t)
	firstSplit := func(tr *Tree, from int, kind Kind, fs []FeatureInfo) int {
		for i := from; i < len(tr.Nodes); i++ {
			if n := tr.Nodes[i]; n.Left >= 0 && fs[n.Feature].Kind == kind {
				return i
			}
		}
		panic("no such split")
	}
	firstLeaf := func(tr *Tree) int { return slices.IndexFunc(tr.Nodes, func(n Node) bool { return n.Left < 0 }) }
	cases := []struct {
		name    string
		fixture string
		edit    func(m *Model)
		want    string // in MarshalBinary's error
		decode  string // in Decode's error on the bytes written anyway; "" when they cannot be written
	}{
		{"link back to the root", "iris/tree", func(m *Model) {
			t := m.Trees[0]
			t.Nodes[firstSplit(t, 1, Numeric, m.Features)].Left = 0
		}, "children 0 and 1; want two after the node", "left child"},
		{"right child past the end", "iris/tree", func(m *Model) {
			t := m.Trees[0]
			t.Nodes[firstSplit(t, 0, Numeric, m.Features)].Left = int32(len(t.Nodes) - 1)
		}, "want two after the node and below", "want two after the node and below"},
		{"leaf links -2", "iris/tree", func(m *Model) { t := m.Trees[0]; t.Nodes[firstLeaf(t)].Left = -2 }, "leaf with left child -2", "left child"},
		{"feature out of range", "iris/tree", func(m *Model) { m.Trees[0].Nodes[0].Feature = 4 }, "node 0: feature 4 out of range (4 features)", "node 0: feature 4 out of range"},
		{"negative feature", "iris/tree", func(m *Model) { m.Trees[0].Nodes[0].Feature = -1 }, "node 0: feature -1 out of range", "feature: 18446744073709551615 is above"},
		{"level set on a numeric split", "mixed/tree", func(m *Model) {
			t := m.Trees[0]
			t.Nodes[firstSplit(t, 0, Numeric, m.Features)].LevelSet = 0
		}, "split on numeric feature", "split on numeric feature"},
		{"categorical split without level set", "mixed/tree", func(m *Model) {
			t := m.Trees[0]
			t.Nodes[firstSplit(t, 0, Categorical, m.Features)].LevelSet = -1
		}, "split on categorical feature", "split on categorical feature"},
		{"level set out of range", "mixed/tree", func(m *Model) {
			t := m.Trees[0]
			t.Nodes[firstSplit(t, 0, Categorical, m.Features)].LevelSet = int32(len(t.LevelSets))
		}, "split on categorical feature", "split on categorical feature"},
		{"leaf with level set", "mixed/tree", func(m *Model) { t := m.Trees[0]; t.Nodes[firstLeaf(t)].LevelSet = 0 }, "leaf with left child -1 and level set 0", "leaf with left child -1 and level set 0"},
		{"kind changed", "iris/tree", func(m *Model) { m.Features[0].Kind = Categorical }, "binning kind numeric, feature kind categorical", "categorical feature with"},
		{"kind and binning changed", "iris/tree", func(m *Model) {
			m.Features[0].Kind, m.Features[0].Binning.Kind = Categorical, Categorical
		}, "categorical feature with", "categorical feature with"},
		{"level bin past the bins", "mixed/tree", func(m *Model) {
			b := &m.Features[2].Binning
			b.LevelBin[0] = uint16(len(b.Counts))
		}, "level 0 in bin", "level 0 in bin"},
		{"repeated feature name", "iris/tree", func(m *Model) { m.Features[1].Name = m.Features[0].Name }, "is empty or repeated", "is empty or repeated"},
		{"no trees", "iris/forest", func(m *Model) { m.Trees, m.OOB = nil, nil }, "no trees", "no trees"},
		{"one class", "iris/tree", func(m *Model) { m.Classes = m.Classes[:1] }, "classification with 1 classes", "classification with 1 classes"},
		{"regression with classes", "iris/tree", func(m *Model) { m.Task, m.Params.Task = Regression, Regression }, "regression with 3 classes", "regression with 3 classes"},
		{"negative rows", "iris/tree", func(m *Model) { m.Rows = -1 }, "-1 training rows", "rows: 18446744073709551615 is above"},
		{"oob votes short", "iris/bagging", func(m *Model) { m.OOB.Votes = m.OOB.Votes[:10] }, "oob: 10 votes for 150 rows", "oob: 10 votes for 150 rows"},
		{"oob negative votes", "iris/bagging", func(m *Model) { m.OOB.Votes[0] = -1 }, "oob: row 0 has -1 votes", "votes: 18446744073709551615 is above"},
		{"oob values short", "iris/bagging", func(m *Model) { m.OOB.Value = m.OOB.Value[:3] }, "oob: 3 values for 150 rows of width 3", "oob: 3 values"},
		{"oob curve short", "iris/bagging", func(m *Model) { m.OOB.Curve = nil }, "oob: curve of 0 points for 10 trees", "oob: curve of 0 points"},
		{"oob scored", "iris/bagging", func(m *Model) { m.OOB.Scored = -1 }, "oob: -1 rows scored", "scored: 18446744073709551615 is above"},
		{"importance short", "iris/bagging", func(m *Model) { m.Importance.Impurity = m.Importance.Impurity[:2] }, "impurity importance: 2 values for 4 features", "impurity importance: 2 values"},
		{"importance empty", "iris/bagging", func(m *Model) { m.Importance.Permutation = []float64{} }, "permutation importance: 0 values", "permutation importance: 0 values"},
		{"tree without nodes", "iris/bagging", func(m *Model) { m.Trees[3] = &Tree{Width: 3} }, "tree 3: 0 nodes", "tree 3: 0 nodes"},
		// The bytes cannot express these: lengths and the width are implied by the node count.
		{"gains short", "iris/tree", func(m *Model) { m.Trees[0].Gain = m.Trees[0].Gain[1:] }, "gains", ""},
		{"covers long", "iris/tree", func(m *Model) { m.Trees[0].Cover = append(m.Trees[0].Cover, 1) }, "covers", ""},
		{"values short", "iris/tree", func(m *Model) { m.Trees[0].Value = m.Trees[0].Value[1:] }, "values for", ""},
		{"width", "iris/tree", func(m *Model) { m.Trees[0].Width = 2 }, "tree 0: width 2; the model's is 3", ""},
		{"nil tree", "iris/bagging", func(m *Model) { m.Trees[2] = nil }, "tree 2: missing", ""},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			m := encClone(t, encFixtureNamed(t, fs, c.fixture).m)
			c.edit(m)
			_, err := m.MarshalBinary()
			if err == nil || !strings.HasPrefix(err.Error(), "forest: encode: ") || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("MarshalBinary: %v; want forest: encode: …%s…", err, c.want)
			}
			if c.decode != "" {
				_, err := Decode(m.encode())
				encMustCorrupt(t, err, c.decode)
			}
		})
	}
}

// encFuzzSeeds are encodings of small models.
func encFuzzSeeds(t testing.TB) [][]byte {
	t.Helper()
	iris := readTable(t, "iris.csv")
	stump := DefaultParams(MethodTree)
	stump.MaxDepth = 2
	mixed, _ := encMixedData(t, 60, false)
	mixedR, _ := encMixedData(t, 60, true)
	small := DefaultParams(MethodForest)
	small.Trees, small.MaxDepth, small.Bins = 2, 3, 8
	boost := DefaultParams(MethodBoosting)
	boost.Trees, boost.MaxDepth, boost.Bins, boost.HoldoutFraction = 3, 2, 8, 0.2
	bc := readTable(t, "breast_cancer.csv")
	// Multinomial (iris, three classes) and Poisson with an exposure.
	counts, _, _ := poissonSet(t, 60, 5)
	exposure := make([]float64, 60)
	for i := range exposure {
		exposure[i] = 1 + float64(i%4)
	}
	if err := counts.SetExposure("years", exposure); err != nil {
		t.Fatal(err)
	}
	poisson := boost
	poisson.Loss = LossPoisson
	ada := DefaultParams(MethodAdaBoost)
	ada.Trees, ada.Bins = 5, 8
	lin := DefaultParams(MethodLinear)
	seeds := [][]byte{encMust(t, encHandModel())}
	for _, c := range []struct {
		d *Dataset
		p Params
	}{{iris.dataset(t, "species"), stump}, {mixed, small}, {mixedR, small}, {bc.dataset(t, "diagnosis"), boost},
		{iris.dataset(t, "species"), boost}, {counts, poisson}, {iris.dataset(t, "species"), ada},
		{mixedR, lin}} {
		m, err := Train(context.Background(), c.d, c.p)
		if err != nil {
			t.Fatal(err)
		}
		seeds = append(seeds, encMust(t, m))
	}
	// A blend of the mixed regression forest and the linear model (seeds 3 and 8).
	var members []*Model
	for _, s := range []int{3, 8} {
		m, err := Decode(seeds[s])
		if err != nil {
			t.Fatal(err)
		}
		members = append(members, m)
	}
	b, err := NewBlend("y", members, []string{"mixed_forest@1", "mixed_linear@2"}, []float64{3, 1}, BlendAverage)
	if err != nil {
		t.Fatal(err)
	}
	return append(seeds, encMust(t, b))
}

// The seed files in testdata/fuzz/FuzzDecode named seed-* must stay valid encodings, so
// that the fuzzer starts from models and not from checksum failures; when the format
// changes, rewrite them from encFuzzSeeds.
func TestFuzzSeedFiles(t *testing.T) {
	paths, err := filepath.Glob(filepath.Join("testdata", "fuzz", "FuzzDecode", "seed-*"))
	if err != nil {
		t.Fatal(err)
	}
	if len(paths) == 0 {
		t.Fatal("no seed files")
	}
	for _, p := range paths {
		text, err := os.ReadFile(p)
		if err != nil {
			t.Fatal(err)
		}
		lines := strings.Split(strings.TrimSpace(string(text)), "\n")
		if len(lines) != 2 || lines[0] != "go test fuzz v1" ||
			!strings.HasPrefix(lines[1], "[]byte(") || !strings.HasSuffix(lines[1], ")") {
			t.Fatalf("%s is not a one-value corpus file", p)
		}
		s, err := strconv.Unquote(strings.TrimSuffix(strings.TrimPrefix(lines[1], "[]byte("), ")"))
		if err != nil {
			t.Fatalf("%s: %v", p, err)
		}
		m, err := Decode([]byte(s))
		if err != nil {
			t.Fatalf("%s: %v", p, err)
		}
		encCheckDecoded(t, m, []byte(s))
	}
}

// FuzzDecode feeds Decode arbitrary bytes: it must never panic, and a model it returns
// must be sound.
func FuzzDecode(f *testing.F) {
	for _, s := range encFuzzSeeds(f) {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, b []byte) {
		m, err := Decode(b)
		if err != nil {
			if !errors.Is(err, ErrCorrupt) {
				t.Fatalf("error %v does not wrap ErrCorrupt", err)
			}
			return
		}
		encCheckDecoded(t, m, b)
	})
}

// FuzzDecodeBody fuzzes what lies behind the checksum, which random bytes rarely pass:
// the input is framed with a valid head and checksum before decoding.
func FuzzDecodeBody(f *testing.F) {
	for _, s := range encFuzzSeeds(f) {
		f.Add(s[encodingHead : len(s)-encodingSum])
	}
	f.Fuzz(func(t *testing.T, body []byte) {
		b := encWrapBody(body)
		m, err := Decode(b)
		if err != nil {
			if !errors.Is(err, ErrCorrupt) {
				t.Fatalf("error %v does not wrap ErrCorrupt", err)
			}
			return
		}
		encCheckDecoded(t, m, b)
	})
}
