package forest

import (
	"bytes"
	"context"
	"encoding/json"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"
)

// subset keeps the listed rows of a table (or, with keep false, every other row).
func (tb *table) subset(rows []int, keep bool) *table {
	in := make([]bool, tb.rows)
	for _, i := range rows {
		in[i] = true
	}
	out := &table{names: tb.names, num: map[string][]float64{}, cat: map[string][]string{}}
	for i := range tb.rows {
		if in[i] != keep {
			continue
		}
		out.rows++
		for name, v := range tb.num {
			out.num[name] = append(out.num[name], v[i])
		}
		for name, v := range tb.cat {
			out.cat[name] = append(out.cat[name], v[i])
		}
	}
	return out
}

// boostParams are the settings shared with the reference library's run in
// make_reference.py: 100 rounds, depth 6, learning rate 0.1, leaves of 20 or more.
func boostParams() Params {
	p := DefaultParams(MethodBoosting)
	p.Trees, p.MaxDepth, p.LearningRate, p.MinLeaf, p.Threads = 100, 6, 0.1, 20, 2
	return p
}

// Friedman #1 (Friedman 1991): boosted test RMSE no more than 2 % above scikit-learn
// 1.2.1's HistGradientBoostingRegressor with the same rounds, depth, learning rate and
// least leaf size (reference.json friedman1_boosting, from make_reference.py).
func TestBoostingFriedman1Reference(t *testing.T) {
	var ref struct {
		TestRMSE float64 `json:"test_rmse"`
	}
	if err := json.Unmarshal(reference(t)["friedman1_boosting"], &ref); err != nil {
		t.Fatal(err)
	}
	train, test := readTable(t, "friedman1_train.csv"), readTable(t, "friedman1_test.csv")
	m, err := Train(context.Background(), train.dataset(t, "y"), boostParams())
	if err != nil {
		t.Fatal(err)
	}
	pred := make([]float64, test.rows)
	if err := m.Predict(test.columns(m), pred, 2); err != nil {
		t.Fatal(err)
	}
	rmse := math.Sqrt(MetricValue(RegressionMetrics(test.num["y"], pred, nil), "mse"))
	t.Logf("test RMSE %.4f, reference %.4f (ratio %.4f)", rmse, ref.TestRMSE, rmse/ref.TestRMSE)
	if rmse > 1.02*ref.TestRMSE {
		t.Errorf("test RMSE %.4f is more than 2 %% above the reference's %.4f", rmse, ref.TestRMSE)
	}
}

// Wisconsin breast cancer (UCI, via Debian's python3-sklearn), a fixed 30 % test split:
// logistic boosting's test log loss within 2 % of scikit-learn 1.2.1's
// HistGradientBoostingClassifier with the same settings (reference.json
// breast_cancer_boosting, from make_reference.py).
func TestBoostingBreastCancerReference(t *testing.T) {
	var ref struct {
		TestRows    []int   `json:"test_rows"`
		TestLogLoss float64 `json:"test_log_loss"`
	}
	if err := json.Unmarshal(reference(t)["breast_cancer_boosting"], &ref); err != nil {
		t.Fatal(err)
	}
	all := readTable(t, "breast_cancer.csv")
	train, test := all.subset(ref.TestRows, false), all.subset(ref.TestRows, true)
	m, err := Train(context.Background(), train.dataset(t, "diagnosis"), boostParams())
	if err != nil {
		t.Fatal(err)
	}
	if m.Width() != 2 || m.Classes[1] != "malignant" {
		t.Fatalf("width %d, classes %v", m.Width(), m.Classes)
	}
	pred := make([]float64, test.rows*2)
	if err := m.Predict(test.columns(m), pred, 2); err != nil {
		t.Fatal(err)
	}
	loss := 0.0
	for i, c := range test.cat["diagnosis"] {
		p := pred[2*i+1]
		if c == "benign" {
			p = pred[2*i]
		}
		loss -= math.Log(max(p, 1e-15))
	}
	loss /= float64(test.rows)
	t.Logf("test log loss %.4f, reference %.4f (ratio %.4f)", loss, ref.TestLogLoss, loss/ref.TestLogLoss)
	if loss > 1.02*ref.TestLogLoss {
		t.Errorf("test log loss %.4f is more than 2 %% above the reference's %.4f", loss, ref.TestLogLoss)
	}
}

// Squared loss with learning rate ≤ 1: each leaf moves its rows' scores a share of the
// way to their mean residual, which cannot raise the training error (Newton steps on a
// convex loss; common practice), so the training curve never rises.
func TestBoostingSquaredTrainLossDecreases(t *testing.T) {
	d := readTable(t, "friedman1_train.csv").dataset(t, "y")
	for _, lr := range []float64{0.1, 0.5, 1} {
		p := DefaultParams(MethodBoosting)
		p.Trees, p.MaxDepth, p.LearningRate = 30, 3, lr
		m, err := Train(context.Background(), d, p)
		if err != nil {
			t.Fatal(err)
		}
		c := m.Boost.TrainLoss
		if len(c) != 30 || m.Boost.Rounds != 30 || m.Boost.BestRound != 30 || len(m.Trees) != 30 {
			t.Fatalf("learning rate %g: %d losses, %d rounds, best %d, %d trees", lr, len(c), m.Boost.Rounds, m.Boost.BestRound, len(m.Trees))
		}
		for r := 1; r < len(c); r++ {
			if c[r] > c[r-1]*(1+1e-12) {
				t.Errorf("learning rate %g: training loss rose from %v to %v at round %d", lr, c[r-1], c[r], r+1)
			}
		}
	}
}

// noisyData is a small, noisy regression and classification set on which deep trees
// soon overfit, so the holdout loss turns up.
func noisyData(t *testing.T, n int, classify bool) *Dataset {
	rng := rand.New(rand.NewPCG(11, 12))
	x1, x2 := make([]float64, n), make([]float64, n)
	y := make([]float64, n)
	yc := make([]int32, n)
	for i := range n {
		x1[i], x2[i] = rng.Float64(), rng.Float64()
		y[i] = x1[i] + 2*rng.NormFloat64()
		if rng.Float64() < 0.3+0.4*x1[i] {
			yc[i] = 1
		}
	}
	d := NewDataset(n)
	errs := []error{d.AddNumeric("x1", x1), d.AddNumeric("x2", x2)}
	if classify {
		errs = append(errs, d.SetClassTarget("y", yc, []string{"no", "yes"}))
	} else {
		errs = append(errs, d.SetRegressionTarget("y", y))
	}
	for _, err := range errs {
		if err != nil {
			t.Fatal(err)
		}
	}
	return d
}

// Early stopping keeps the round with the least holdout loss and stops Patience rounds
// after it; the model is the same, byte for byte, on 1 and 2 threads.
func TestBoostingEarlyStopping(t *testing.T) {
	for _, classify := range []bool{false, true} {
		d := noisyData(t, 200, classify)
		p := DefaultParams(MethodBoosting)
		p.Trees, p.MaxDepth, p.MinLeaf, p.LearningRate = 300, 8, 1, 0.3
		p.HoldoutFraction, p.Patience, p.RowFraction, p.Seed = 0.3, 5, 0.8, 3
		var enc [2][]byte
		for k, threads := range []int{1, 2} {
			p.Threads = threads
			m, err := Train(context.Background(), d, p)
			if err != nil {
				t.Fatal(err)
			}
			b := m.Boost
			hl := b.HoldoutLoss
			if len(hl) != b.Rounds || len(b.TrainLoss) != b.Rounds {
				t.Fatalf("%d holdout and %d training losses for %d rounds", len(hl), len(b.TrainLoss), b.Rounds)
			}
			if b.Rounds >= p.Trees {
				t.Fatalf("classify %v: trained all %d rounds; the holdout loss should turn up", classify, b.Rounds)
			}
			best := 0
			for r := range hl {
				if hl[r] < hl[best] {
					best = r
				}
			}
			if b.BestRound != best+1 || len(m.Trees) != b.BestRound || b.Rounds != b.BestRound+p.Patience {
				t.Errorf("classify %v: best round %d, %d trees, %d rounds; want best %d and %d more rounds",
					classify, b.BestRound, len(m.Trees), b.Rounds, best+1, p.Patience)
			}
			if enc[k], err = m.MarshalBinary(); err != nil {
				t.Fatal(err)
			}
		}
		if !bytes.Equal(enc[0], enc[1]) {
			t.Errorf("classify %v: models differ between 1 and 2 threads", classify)
		}
	}
}

// A boosted model survives encode → decode with identical predictions; one-row and batch
// predictions agree bit for bit, and one-row prediction does not allocate.
func TestBoostingPredictAndEncode(t *testing.T) {
	for _, classify := range []bool{false, true} {
		d := noisyData(t, 300, classify)
		p := DefaultParams(MethodBoosting)
		p.Trees, p.MaxDepth, p.LeafPenalty, p.FeaturesPerSplit = 20, 4, 2, 1
		m, err := Train(context.Background(), d, p)
		if err != nil {
			t.Fatal(err)
		}
		b, err := m.MarshalBinary()
		if err != nil {
			t.Fatal(err)
		}
		m2, err := Decode(b)
		if err != nil {
			t.Fatal(err)
		}
		W := m.Width()
		n, F := d.rows, len(d.features)
		cols := make([][]float64, F)
		for f := range cols {
			cols[f] = d.features[f].num
		}
		batch := make([]float64, n*W)
		if err := m2.Predict(cols, batch, 2); err != nil {
			t.Fatal(err)
		}
		row, dst := make([]float64, F), make([]float64, W)
		for i := range n {
			rowOf(d, i, row)
			m.PredictRow(row, dst)
			for k := range W {
				if math.Float64bits(dst[k]) != math.Float64bits(batch[i*W+k]) {
					t.Fatalf("classify %v row %d: PredictRow %v, decoded Predict %v", classify, i, dst, batch[i*W:(i+1)*W])
				}
			}
			if classify && math.Abs(dst[0]+dst[1]-1) > 1e-15 {
				t.Fatalf("row %d: probabilities %v do not sum to 1", i, dst)
			}
		}
		if a := testing.AllocsPerRun(100, func() { m.PredictRow(row, dst) }); a != 0 {
			t.Errorf("PredictRow allocates %v times", a)
		}
		if m.OOB != nil || m.Importance.Permutation != nil || len(m.Importance.Impurity) != F {
			t.Errorf("OOB %v, permutation importance %v, impurity importance %v", m.OOB, m.Importance.Permutation, m.Importance.Impurity)
		}
	}
}

// Validate names each boosting control it refuses.
func TestBoostingValidate(t *testing.T) {
	cases := []struct {
		name string
		edit func(*Params)
		want string
	}{
		{"defaults", func(*Params) {}, ""},
		{"learning_rate 0", func(p *Params) { p.LearningRate = 0 }, "learning_rate"},
		{"learning_rate 1.5", func(p *Params) { p.LearningRate = 1.5 }, "learning_rate"},
		{"learning_rate NaN", func(p *Params) { p.LearningRate = math.NaN() }, "learning_rate"},
		{"learning_rate 1", func(p *Params) { p.LearningRate = 1 }, ""},
		{"leaf_penalty -1", func(p *Params) { p.LeafPenalty = -1 }, "leaf_penalty"},
		{"leaf_penalty Inf", func(p *Params) { p.LeafPenalty = math.Inf(1) }, "leaf_penalty"},
		{"holdout_fraction 1", func(p *Params) { p.HoldoutFraction = 1 }, "holdout_fraction"},
		{"holdout_fraction -0.1", func(p *Params) { p.HoldoutFraction = -0.1 }, "holdout_fraction"},
		{"patience 0", func(p *Params) { p.Patience = 0 }, "patience"},
		{"loss unknown", func(p *Params) { p.Loss = "hinge" }, "loss"},
		{"loss logistic for regression", func(p *Params) { p.Loss, p.Task = LossLogistic, Regression }, "loss"},
		{"loss squared for classification", func(p *Params) { p.Loss, p.Task = LossSquared, Classification }, "loss"},
		{"with replacement", func(p *Params) { p.WithReplacement = true }, "with_replacement"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			p := DefaultParams(MethodBoosting)
			c.edit(&p)
			err := p.Validate()
			switch {
			case c.want == "" && err != nil:
				t.Errorf("Validate: %v, want no error", err)
			case c.want != "" && (err == nil || !strings.Contains(err.Error(), c.want)):
				t.Errorf("Validate: %v, want an error naming %s", err, c.want)
			}
		})
	}
	p := DefaultParams(MethodForest)
	p.Loss = LossSquared
	if err := p.Validate(); err == nil || !strings.Contains(err.Error(), "loss") {
		t.Errorf("forest with a loss: %v, want an error naming loss", err)
	}
	// The loss must fit the data's task, which Validate cannot see.
	p = DefaultParams(MethodBoosting)
	p.Loss = LossLogistic
	if _, err := Train(context.Background(), noisyData(t, 50, false), p); err == nil || !strings.Contains(err.Error(), "loss") {
		t.Errorf("logistic loss on a numeric target: %v, want an error naming loss", err)
	}
}

// Large nodes split their histogram and partition work between threads (by features,
// and in row blocks past 2·histBlockRows and partitionBlock rows); on amd64 the
// histograms come from an assembly loop. The model must not change with either.
func TestBoostingDeterministicAcrossThreads(t *testing.T) {
	n := partitionBlock + 2*histBlockRows + 123
	rng := rand.New(rand.NewPCG(5, 6))
	d := NewDataset(n)
	y := make([]int32, n)
	w := make([]float64, n)
	var cols [4][]float64
	for f := range cols {
		cols[f] = make([]float64, n)
	}
	for i := range n {
		for f := range cols {
			cols[f][i] = rng.NormFloat64()
		}
		if cols[0][i]+cols[1][i]*cols[2][i]+rng.NormFloat64() > 0 {
			y[i] = 1
		}
		if i%17 == 0 {
			cols[3][i] = math.NaN()
		}
		w[i] = float64(1 + i%3)
	}
	for f, c := range cols {
		if err := d.AddNumeric(string(rune('a'+f)), c); err != nil {
			t.Fatal(err)
		}
	}
	if err := d.SetClassTarget("y", y, []string{"no", "yes"}); err != nil {
		t.Fatal(err)
	}
	p := DefaultParams(MethodBoosting)
	p.Trees, p.MaxDepth, p.RowFraction, p.HoldoutFraction = 5, 3, 0.9, 0.1
	p.MinLeaf = 12000 // binding, so that every histogram sum matters
	loops := []bool{false}
	if useAVX2 {
		loops = append(loops, true)
	}
	defer func(v bool) { useAVX2 = v }(useAVX2)
	for _, weighted := range []bool{false, true} {
		if weighted {
			if err := d.SetWeights(w); err != nil {
				t.Fatal(err)
			}
		}
		var first []byte
		for _, avx := range loops {
			useAVX2 = avx
			for _, threads := range []int{1, 2, 3} {
				p.Threads = threads
				m, err := Train(context.Background(), d, p)
				if err != nil {
					t.Fatal(err)
				}
				enc, err := m.MarshalBinary()
				if err != nil {
					t.Fatal(err)
				}
				if first == nil {
					first = enc
				} else if !bytes.Equal(first, enc) {
					t.Errorf("weighted %v, assembly loop %v, %d threads: model differs from the first", weighted, avx, threads)
				}
			}
		}
	}
}

// Training updates the scores of a tree's own rows from its partition of their bins and
// walks the tree for the rest; either way each row's raw score must be the one prediction
// gives, so the last training loss recomputed from predictions is the same number (up
// to the order of the sum).
func TestBoostingTrainingScoresMatchPrediction(t *testing.T) {
	d, cols := encMixedData(t, 400, true) // categorical levels and missing values
	for _, rowFraction := range []float64{1, 0.6} {
		p := DefaultParams(MethodBoosting)
		p.Trees, p.MaxDepth, p.RowFraction, p.MinLeaf = 15, 5, rowFraction, 3
		m, err := Train(context.Background(), d, p)
		if err != nil {
			t.Fatal(err)
		}
		pred := make([]float64, d.rows)
		if err := m.Predict(cols, pred, 2); err != nil {
			t.Fatal(err)
		}
		sum := 0.0
		for i, y := range d.target.num {
			sum += (y - pred[i]) * (y - pred[i])
		}
		got, want := sum/float64(d.rows), m.Boost.TrainLoss[len(m.Boost.TrainLoss)-1]
		if math.Abs(got-want) > 1e-13*want {
			t.Errorf("row fraction %g: loss from predictions %v, training loss %v", rowFraction, got, want)
		}
	}
}

// Best-first growth (LeafLimit): each tree has at most that many leaves, a limit no
// tree reaches grows the same splits as depth-first growth (the same predictions), a
// limit of 2 keeps the root's split, and the model does not depend on the threads.
func TestBoostingLeafLimit(t *testing.T) {
	d := noisyData(t, 3000, true)
	base := DefaultParams(MethodBoosting)
	base.Trees, base.MaxDepth, base.Threads, base.Seed = 12, 4, 1, 5
	depthFirst, err := Train(context.Background(), d, base)
	if err != nil {
		t.Fatal(err)
	}
	leaves := func(tr *Tree) int {
		n := 0
		for i := range tr.Nodes {
			if tr.Nodes[i].IsLeaf() {
				n++
			}
		}
		return n
	}
	cols := make([][]float64, len(depthFirst.Features))
	for f, fi := range depthFirst.Features {
		cols[f] = d.features[f].num
		if fi.Kind == Categorical {
			t.Fatal("noisyData is numeric")
		}
	}
	predict := func(m *Model) []float64 {
		out := make([]float64, d.rows*m.Width())
		if err := m.Predict(cols, out, 1); err != nil {
			t.Fatal(err)
		}
		return out
	}
	want := predict(depthFirst)
	cases := []struct {
		limit int
		same  bool // same predictions as depth-first growth
	}{{16, true}, {1 << 10, true}, {5, false}, {2, false}}
	for _, c := range cases {
		p := base
		p.LeafLimit = c.limit
		var enc []byte
		for _, threads := range []int{1, 2} {
			p.Threads = threads
			m, err := Train(context.Background(), d, p)
			if err != nil {
				t.Fatal(err)
			}
			b, err := m.MarshalBinary()
			if err != nil {
				t.Fatal(err)
			}
			if enc != nil && !bytes.Equal(enc, b) {
				t.Errorf("leaf limit %d: models differ between 1 and 2 threads", c.limit)
			}
			enc = b
			most := 0
			for _, tr := range m.Trees {
				most = max(most, leaves(tr))
			}
			if most > c.limit {
				t.Errorf("leaf limit %d: a tree has %d leaves", c.limit, most)
			}
			if c.limit == 2 && (most != 2 || m.Trees[0].Nodes[0].Feature != depthFirst.Trees[0].Nodes[0].Feature) {
				t.Errorf("leaf limit 2: %d leaves, root feature %d, want 2 and %d", most, m.Trees[0].Nodes[0].Feature, depthFirst.Trees[0].Nodes[0].Feature)
			}
			got := predict(m)
			same := slices.Equal(got, want)
			if same != c.same {
				t.Errorf("leaf limit %d: predictions equal to depth-first growth: %v, want %v", c.limit, same, c.same)
			}
		}
	}
	p := base
	p.LeafLimit = 1
	if _, err := Train(context.Background(), d, p); err == nil || !strings.Contains(err.Error(), "leaf_limit") {
		t.Errorf("leaf limit 1: %v, want an error naming leaf_limit", err)
	}
	p = DefaultParams(MethodForest)
	p.LeafLimit = 8
	if _, err := Train(context.Background(), d, p); err == nil || !strings.Contains(err.Error(), "leaf_limit") {
		t.Errorf("leaf limit on a forest: %v, want an error naming leaf_limit", err)
	}
}

// Holdout rows marked in the data set (SetHoldout) are the ones boosting stops on: the
// model equals one trained on the other rows alone with the same early stopping record
// shape, and its holdout curve is the loss on exactly those rows.
func TestBoostingMarkedHoldout(t *testing.T) {
	d := noisyData(t, 2000, true)
	mask := make([]bool, d.rows)
	for i := range mask {
		mask[i] = i%4 == 0
	}
	if err := d.SetHoldout(mask); err != nil {
		t.Fatal(err)
	}
	p := DefaultParams(MethodBoosting)
	p.Trees, p.MaxDepth, p.Patience, p.Threads = 60, 3, 5, 2
	m, err := Train(context.Background(), d, p)
	if err != nil {
		t.Fatal(err)
	}
	b := m.Boost
	if len(b.HoldoutLoss) != b.Rounds || b.BestRound < 1 || b.BestRound > b.Rounds {
		t.Fatalf("boost record: %d rounds, %d holdout losses, best %d", b.Rounds, len(b.HoldoutLoss), b.BestRound)
	}
	best := slices.Min(b.HoldoutLoss)
	if b.HoldoutLoss[b.BestRound-1] != best {
		t.Errorf("best round %d has holdout loss %g, the least is %g", b.BestRound, b.HoldoutLoss[b.BestRound-1], best)
	}
	// The holdout loss of the kept model, recomputed from predictions on the marked
	// rows, is the curve's value at the best round.
	cols := make([][]float64, len(m.Features))
	for f := range cols {
		cols[f] = d.features[f].num
	}
	pred := make([]float64, d.rows*2)
	if err := m.Predict(cols, pred, 1); err != nil {
		t.Fatal(err)
	}
	ll, n := 0.0, 0
	for i, held := range mask {
		if held {
			ll -= math.Log(pred[2*i+int(d.target.codes[i])])
			n++
		}
	}
	if got := ll / float64(n); math.Abs(got-best) > 1e-9*best {
		t.Errorf("log loss on the marked rows %.12g, curve says %.12g", got, best)
	}
	for _, bad := range []func(*Params){
		func(p *Params) { p.HoldoutFraction = 0.2 },
		func(p *Params) { *p = DefaultParams(MethodForest) },
	} {
		q := p
		bad(&q)
		if _, err := Train(context.Background(), d, q); err == nil || !strings.Contains(err.Error(), "holdout") {
			t.Errorf("%+v with marked holdout rows: %v, want an error naming the holdout", q.Method, err)
		}
	}
	if err := d.SetHoldout(mask[:10]); err == nil {
		t.Error("a short holdout mask was accepted")
	}
}
