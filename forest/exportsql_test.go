package forest

import (
	"context"
	"math"
	"math/rand/v2"
	"strconv"
	"strings"
	"testing"
)

// Every number is written so that it reads back as the same double (strconv's shortest
// round-trip form, common practice for exact decimal transfer of doubles).
func TestSQLNumberRoundTrip(t *testing.T) {
	x := &sqlExport{}
	for _, v := range []float64{0, math.Copysign(0, -1), 0.1, 1.0 / 3, -2.5, 1e21, 123456789012345678,
		math.SmallestNonzeroFloat64, math.MaxFloat64, 2.2250738585072014e-308, math.Nextafter(1, 2)} {
		s := x.num(v)
		if !strings.Contains(s, "E") {
			t.Errorf("%v written %q: want E-notation (an approximate numeric literal)", v, s)
		}
		back, err := strconv.ParseFloat(s, 64)
		if err != nil || math.Float64bits(back) != math.Float64bits(v) {
			t.Errorf("%v written %q reads back as %v (%v)", v, s, back, err)
		}
	}
	if x.err != nil {
		t.Fatal(x.err)
	}
	x.num(math.NaN())
	if x.err == nil || !strings.Contains(x.err.Error(), "NaN") {
		t.Errorf("NaN: error %v, want one naming NaN", x.err)
	}
}

// stump is a one-split regression model on feature f: left leaf 1.5, right leaf −2.5.
func stump(f FeatureInfo, n Node, sets [][]uint64) *Model {
	n.Left = 1
	return &Model{Method: MethodTree, Task: Regression, Target: "y", Features: []FeatureInfo{f},
		Trees: []*Tree{{Nodes: []Node{n, {Left: -1, LevelSet: -1}, {Left: -1, LevelSet: -1}},
			Value: []float64{0, 1.5, -2.5}, Width: 1, LevelSets: sets}}}
}

// The split conditions route missing values and unseen levels as Tree.Leaf does: a
// categorical split with default left sends a row right only when its level is a known
// level sent right (so NULL and unseen levels fail IN and go left); with default right
// a row goes left only when its level is one sent left.
func TestExportSQLSplits(t *testing.T) {
	colour := FeatureInfo{Name: `we"ird`, Kind: Categorical, Levels: []string{"a", "it's", "c"}}
	num := FeatureInfo{Name: "x", Kind: Numeric}
	tests := []struct {
		name  string
		model *Model
		want  string
	}{
		{"categorical default left", stump(colour, Node{LevelSet: 0, DefaultLeft: true}, [][]uint64{{0b001}}),
			"CASE WHEN f0 IN ('it''s', 'c') THEN -2.5E0 ELSE 1.5E0 END AS t0"},
		{"categorical default right", stump(colour, Node{LevelSet: 0}, [][]uint64{{0b101}}),
			"CASE WHEN f0 IN ('a', 'c') THEN 1.5E0 ELSE -2.5E0 END AS t0"},
		{"categorical all known levels left, default left", stump(colour, Node{LevelSet: 0, DefaultLeft: true}, [][]uint64{{0b111}}),
			"1.5E0 AS t0"},
		{"numeric default left", stump(num, Node{Threshold: 0.1, LevelSet: -1, DefaultLeft: true}, nil),
			"CASE WHEN f0 IS NULL OR f0 <= 0.1E0 THEN 1.5E0 ELSE -2.5E0 END AS t0"},
		{"numeric default right", stump(num, Node{Threshold: -3, LevelSet: -1}, nil),
			"CASE WHEN f0 <= -3E0 THEN 1.5E0 ELSE -2.5E0 END AS t0"},
		{"missing apart, default right", stump(num, Node{Threshold: math.Inf(1), LevelSet: -1}, nil),
			"CASE WHEN f0 IS NOT NULL THEN 1.5E0 ELSE -2.5E0 END AS t0"},
		{"missing apart, default left", stump(num, Node{Threshold: math.Inf(1), LevelSet: -1, DefaultLeft: true}, nil),
			"1.5E0 AS t0"},
		{"minus infinity", stump(num, Node{Threshold: math.Inf(-1), LevelSet: -1}, nil),
			"CASE WHEN f0 < -1.7976931348623157E+308 THEN 1.5E0 ELSE -2.5E0 END AS t0"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			text, err := tc.model.ExportSQL(SQLOptions{Keys: []string{"id"}})
			if err != nil {
				t.Fatal(err)
			}
			if !strings.Contains(text, tc.want) {
				t.Errorf("text lacks %q:\n%s", tc.want, text)
			}
			name := quoteSQLIdent(tc.model.Features[0].Name)
			if !strings.Contains(text, name) || !strings.Contains(text, `"id" AS k0`) || !strings.Contains(text, `FROM "input_rows"`) {
				t.Errorf("text does not read %s, id and input_rows quoted:\n%s", name, text)
			}
			again, _ := tc.model.ExportSQL(SQLOptions{Keys: []string{"id"}})
			if again != text {
				t.Error("two exports differ")
			}
		})
	}
	// The categorical cases above agree with Tree.Leaf on known and missing codes (the
	// host reads NULL and unseen levels alike as missing).
	for _, tc := range tests[:3] {
		tr := tc.model.Trees[0]
		for _, code := range []float64{0, 1, 2, math.NaN(), -1} {
			leaf := tr.Leaf([]float64{code})
			left := leaf == 1
			n := tr.Nodes[0]
			var sentRight bool
			if code >= 0 {
				sentRight = tr.LevelSets[0][0]&(1<<uint(code)) == 0
			} else {
				sentRight = !n.DefaultLeft
			}
			if left == sentRight {
				t.Errorf("%s: code %v reaches leaf %d", tc.name, code, leaf)
			}
		}
	}
}

// Many trees are split into stages of at most exportTreesPerStage tree columns, and no
// sum adds more terms than that in one expression.
func TestExportSQLStages(t *testing.T) {
	m := stump(FeatureInfo{Name: "x", Kind: Numeric}, Node{Threshold: 1, LevelSet: -1}, nil)
	m.Method = MethodBoosting
	m.Boost = &Boost{Loss: LossPoisson, InitScore: []float64{0.25}}
	for range 249 {
		m.Trees = append(m.Trees, m.Trees[0])
	}
	for _, d := range SQLDialects {
		text, err := m.ExportSQL(SQLOptions{Dialect: d})
		if err != nil {
			t.Fatal(err)
		}
		for _, want := range []string{"copse_stage_3 AS", "AS t249", "EXP(s0)"} {
			if !strings.Contains(text, want) {
				t.Errorf("%s: text lacks %q", d, want)
			}
		}
		for _, line := range strings.Split(text, "\n") {
			if n := strings.Count(line, " + "); n > exportTreesPerStage+1 {
				t.Errorf("%s: a line adds %d terms", d, n)
			}
		}
		if strings.Count(text, " AS t") != 250 {
			t.Errorf("%s: %d tree columns, want 250", d, strings.Count(text, " AS t"))
		}
		if got := strings.Contains(text, "CAST(0.25E0 AS DOUBLE PRECISION)"); got != (d == DialectPostgres) {
			t.Errorf("%s: literal cast %v", d, got)
		}
	}
}

// Models or options that cannot be written give an error naming what is missing.
func TestExportSQLErrors(t *testing.T) {
	num := FeatureInfo{Name: "x", Kind: Numeric}
	ok := func() *Model { return stump(num, Node{Threshold: 1, LevelSet: -1}, nil) }
	cls := ok()
	cls.Task, cls.Classes = Classification, []string{"no", "yes", "maybe"}
	cls.Trees[0].Width, cls.Trees[0].Value = 3, make([]float64, 9)
	nan := ok()
	nan.Trees[0].Value[2] = math.NaN()
	deep := ok()
	deep.Trees[0].Nodes = nil
	for i := range exportMaxDepth + 1 {
		deep.Trees[0].Nodes = append(deep.Trees[0].Nodes, Node{Left: int32(2*i + 1), LevelSet: -1}, Node{Left: -1, LevelSet: -1})
	}
	deep.Trees[0].Nodes = append(deep.Trees[0].Nodes, Node{Left: -1, LevelSet: -1})
	empty := ok()
	empty.Trees = nil
	tests := []struct {
		name  string
		model *Model
		opt   SQLOptions
		want  string
	}{
		{"dialect", ok(), SQLOptions{Dialect: "oracle"}, `dialect "oracle"`},
		{"class on regression", ok(), SQLOptions{Class: "yes"}, `class "yes": the model is a regression model`},
		{"unknown class", cls, SQLOptions{Class: "perhaps"}, `class "perhaps"`},
		{"key collides", ok(), SQLOptions{Keys: []string{"score"}}, `key column "score"`},
		{"class column collides", cls, SQLOptions{Keys: []string{"maybe"}}, `key column "maybe"`},
		{"relation", ok(), SQLOptions{Relation: "copse_stage_1"}, `relation "copse_stage_1"`},
		{"empty relation part", ok(), SQLOptions{Relation: "s."}, `relation "s."`},
		{"NaN leaf", nan, SQLOptions{}, "NaN"},
		{"deep tree", deep, SQLOptions{}, "tree 1 is 901 levels deep"},
		{"no trees", empty, SQLOptions{}, `method "tree" has no trees`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := tc.model.ExportSQL(tc.opt)
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("error %v, want one containing %q", err, tc.want)
			}
		})
	}
}

// BenchmarkExportSQL writes a 500-tree forest (regression, 2000 rows, numeric and
// categorical inputs with missing values) as SQL; bytes/op-text is the text's size.
func BenchmarkExportSQL(b *testing.B) {
	const n = 2000
	rng := rand.New(rand.NewPCG(5, 6))
	x1, x2, y := make([]float64, n), make([]float64, n), make([]float64, n)
	codes := make([]int32, n)
	for i := range n {
		x1[i], x2[i], codes[i] = rng.Float64(), rng.NormFloat64(), int32(rng.IntN(4))
		y[i] = 3*x1[i] + x2[i] + float64(codes[i]) + 0.3*rng.NormFloat64()
		if i%13 == 0 {
			x2[i] = math.NaN()
		}
	}
	d := NewDataset(n)
	for _, err := range []error{d.AddNumeric("x1", x1), d.AddNumeric("x2", x2),
		d.AddCategorical("c", codes, []string{"a", "b", "c", "d"}), d.SetRegressionTarget("y", y)} {
		if err != nil {
			b.Fatal(err)
		}
	}
	p := DefaultParams(MethodForest)
	p.Trees, p.Seed = 500, 1
	m, err := Train(context.Background(), d, p)
	if err != nil {
		b.Fatal(err)
	}
	b.ResetTimer()
	size := 0
	for b.Loop() {
		text, err := m.ExportSQL(SQLOptions{Dialect: DialectDuckDB})
		if err != nil {
			b.Fatal(err)
		}
		size = len(text)
	}
	b.ReportMetric(float64(size), "bytes-text")
}
