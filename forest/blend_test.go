package forest

import (
	"context"
	"math"
	"strings"
	"testing"
)

// blendMembers trains members on the mixed data set: for regression a forest, a linear
// model, a boosted model and a forest on only two features given in another order (city,
// flag), so the blend must map its rows; for classification (three classes) a forest, a
// tree, AdaBoost and multinomial boosting.
func blendMembers(t *testing.T, regression bool) ([]*Model, [][]float64) {
	t.Helper()
	d, cols := encMixedData(t, 120, regression)
	var ps []Params
	small := DefaultParams(MethodForest)
	small.Trees, small.MaxDepth, small.Bins = 5, 4, 16
	boost := DefaultParams(MethodBoosting)
	boost.Trees, boost.MaxDepth, boost.Bins = 10, 3, 16
	if regression {
		ps = []Params{small, DefaultParams(MethodLinear), boost}
	} else {
		tree := DefaultParams(MethodTree)
		tree.MaxDepth = 3
		ada := DefaultParams(MethodAdaBoost)
		ada.Trees, ada.Bins = 5, 8
		ps = []Params{small, tree, ada, boost}
	}
	var ms []*Model
	for _, p := range ps {
		m, err := Train(context.Background(), d, p)
		if err != nil {
			t.Fatal(err)
		}
		ms = append(ms, m)
	}
	if regression {
		full, _ := encMixedData(t, 120, true)
		sub := NewDataset(120)
		city := make([]int32, 120)
		for i, v := range cols[3] {
			city[i] = Missing
			if !math.IsNaN(v) {
				city[i] = int32(v)
			}
		}
		c := &full.features[full.names["city"]]
		if err := sub.AddCategorical("city", city, c.levels); err != nil {
			t.Fatal(err)
		}
		if err := sub.AddNumeric("flag", cols[1]); err != nil {
			t.Fatal(err)
		}
		if err := sub.SetRegressionTarget("y", full.target.num); err != nil {
			t.Fatal(err)
		}
		m, err := Train(context.Background(), sub, small)
		if err != nil {
			t.Fatal(err)
		}
		ms = append(ms, m)
	}
	return ms, cols
}

func blendNames(n int) []string {
	names := make([]string, n)
	for j := range names {
		names[j] = "m" + string(rune('a'+j))
	}
	return names
}

// memberRow is row i mapped to member m's features by name, from the mixed columns
// (x, flag, color, city).
func memberRow(m *Model, cols [][]float64, i int) []float64 {
	at := map[string]int{"x": 0, "flag": 1, "color": 2, "city": 3}
	r := make([]float64, len(m.Features))
	for f, fi := range m.Features {
		r[f] = cols[at[fi.Name]][i]
	}
	return r
}

// The average of a regression blend is the weighted sum of its members' predictions
// taken in member order with the normalised weights, bit for bit; with equal weights it
// equals the plain mean of the members' predictions within 1e-15 of the mean absolute
// member prediction (the two orders of rounding may differ in the last bits).
func TestBlendAverage(t *testing.T) {
	ms, cols := blendMembers(t, true)
	for _, weights := range [][]float64{nil, {3, 0, 1, 2}} {
		b, err := NewBlend("y", ms, blendNames(len(ms)), weights, BlendAverage)
		if err != nil {
			t.Fatal(err)
		}
		if got := len(b.Features); got != 4 {
			t.Fatalf("blend has %d features, want the union of 4", got)
		}
		w := b.Blend.Weights
		sum := 0.0
		for _, v := range w {
			sum += v
		}
		if math.Abs(sum-1) > 1e-15 {
			t.Errorf("weights %v sum to %v", w, sum)
		}
		blendCols := make([][]float64, len(b.Features))
		at := map[string]int{"x": 0, "flag": 1, "color": 2, "city": 3}
		for f, fi := range b.Features {
			blendCols[f] = cols[at[fi.Name]]
		}
		block, byRow := encPredictions(t, b, blendCols)
		encSameFloats(t, "Predict against PredictRow", block, byRow)
		one := make([]float64, 1)
		for i := range cols[0] {
			want, mean, scale := 0.0, 0.0, 0.0
			for j, m := range ms {
				p := m.PredictRow(memberRow(m, cols, i), one)[0]
				want += w[j] * p
				mean += p
				scale += math.Abs(p)
			}
			mean /= float64(len(ms))
			scale /= float64(len(ms))
			if math.Float64bits(byRow[i]) != math.Float64bits(want) {
				t.Fatalf("weights %v, row %d: blend %v, weighted sum %v", weights, i, byRow[i], want)
			}
			if weights == nil && math.Abs(byRow[i]-mean) > 1e-15*scale {
				t.Fatalf("row %d: blend %v, mean of members %v", i, byRow[i], mean)
			}
		}
	}
}

// Voting gives each class the summed weight of the members that pick it, so the
// weighted majority wins even against more members.
func TestBlendVote(t *testing.T) {
	ms, cols := blendMembers(t, false)
	weights := []float64{0.45, 0.2, 0.15, 0.2}
	b, err := NewBlend("y", ms, blendNames(len(ms)), weights, BlendVote)
	if err != nil {
		t.Fatal(err)
	}
	block, byRow := encPredictions(t, b, cols)
	encSameFloats(t, "Predict against PredictRow", block, byRow)
	W := b.Width()
	p := make([]float64, W)
	disagree := 0
	for i := range cols[0] {
		want := make([]float64, W)
		votes := map[int]int{}
		for j, m := range ms {
			k := Class(m.PredictRow(memberRow(m, cols, i), p))
			want[k] += b.Blend.Weights[j]
			votes[k]++
		}
		encSameFloats(t, "vote shares", want, byRow[i*W:(i+1)*W])
		// The first member holds 0.45: it loses only when all three others agree.
		first := Class(ms[0].PredictRow(memberRow(ms[0], cols, i), p))
		got := Class(byRow[i*W : (i+1)*W])
		if len(votes) > 1 {
			disagree++
		}
		if votes[first] == 1 && len(votes) > 2 && got != first {
			t.Errorf("row %d: the heaviest member's class %d lost to %d with votes %v", i, first, got, votes)
		}
	}
	if disagree == 0 {
		t.Error("the members never disagree: the test shows nothing")
	}
}

// A blend encodes with its members inside, decodes to the same model, and scores the
// same, by row and by batch; it needs nothing but its own bytes.
func TestBlendEncode(t *testing.T) {
	for _, regression := range []bool{true, false} {
		ms, cols := blendMembers(t, regression)
		rule := BlendAverage
		if !regression {
			rule = BlendVote
		}
		b, err := NewBlend("y", ms, blendNames(len(ms)), nil, rule)
		if err != nil {
			t.Fatal(err)
		}
		enc := encMust(t, b)
		d, err := Decode(enc)
		if err != nil {
			t.Fatal(err)
		}
		encSameModel(t, b, d)
		encCheckDecoded(t, d, enc)
		blendCols := make([][]float64, len(b.Features))
		at := map[string]int{"x": 0, "flag": 1, "color": 2, "city": 3}
		for f, fi := range b.Features {
			blendCols[f] = cols[at[fi.Name]]
		}
		b1, r1 := encPredictions(t, b, blendCols)
		b2, r2 := encPredictions(t, d, blendCols)
		encSameFloats(t, "Predict", b1, b2)
		encSameFloats(t, "PredictRow", r1, r2)
		encSameFloats(t, "Predict against PredictRow", b2, r2)
	}
}

// PredictRow on a blend borrows its scratch from a pool and does not allocate once warm.
func TestBlendPredictRowAllocs(t *testing.T) {
	ms, cols := blendMembers(t, true)
	b, err := NewBlend("y", ms, nil, nil, BlendAverage)
	if err != nil {
		t.Fatal(err)
	}
	row := make([]float64, len(b.Features))
	for f := range row {
		row[f] = cols[f][7]
	}
	dst := make([]float64, 1)
	b.PredictRow(row, dst)
	if n := testing.AllocsPerRun(200, func() { b.PredictRow(row, dst) }); n != 0 {
		t.Errorf("PredictRow allocates %v times a call", n)
	}
}

// Members that do not fit together are refused with an error naming the member, the
// feature or the option.
func TestBlendErrors(t *testing.T) {
	reg, _ := blendMembers(t, true)
	cls, _ := blendMembers(t, false)
	iris := readTable(t, "iris.csv")
	irisTree, err := Train(context.Background(), iris.dataset(t, "species"), DefaultParams(MethodTree))
	if err != nil {
		t.Fatal(err)
	}
	recolored := *reg[0]
	recolored.Features = append([]FeatureInfo(nil), reg[0].Features...)
	for f := range recolored.Features {
		if recolored.Features[f].Name == "color" {
			recolored.Features[f].Levels = []string{"white", "black", "blue", "green", "red"}
		}
	}
	blend, err := NewBlend("y", reg[:2], []string{"a", "b"}, nil, BlendAverage)
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		name    string
		members []*Model
		names   []string
		weights []float64
		rule    BlendRule
		want    string
	}{
		{"task", []*Model{reg[0], cls[0]}, []string{"late_forest", "late_class"}, nil, BlendAverage, `member "late_class" is classification`},
		{"classes", []*Model{cls[0], irisTree}, []string{"late_forest", "iris_tree"}, nil, BlendAverage, `member "iris_tree" has classes`},
		{"negative weight", reg[:2], []string{"a", "late_linear"}, []float64{1, -0.5}, BlendAverage, `weights: member "late_linear" has weight -0.5`},
		{"weights length", reg[:2], []string{"a", "b"}, []float64{1}, BlendAverage, "weights: 1 weights for 2 members"},
		{"zero weights", reg[:2], []string{"a", "b"}, []float64{0, 0}, BlendAverage, "weights: they sum to 0"},
		{"feature levels", []*Model{reg[1], &recolored}, []string{"a", "recolored"}, nil, BlendAverage, `feature "color": member "recolored"`},
		{"vote on regression", reg[:2], []string{"a", "b"}, nil, BlendVote, `rule "vote" needs classification`},
		{"unknown rule", reg[:2], []string{"a", "b"}, nil, "fit", `rule "fit"`},
		{"nested", []*Model{reg[0], blend}, []string{"a", "inner"}, nil, BlendAverage, `member "inner" is itself a blend`},
		{"no members", nil, nil, nil, BlendAverage, "no members"},
	} {
		_, err := NewBlend("y", c.members, c.names, c.weights, c.rule)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %v, want one containing %q", c.name, err, c.want)
		}
	}
}
