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

// regData builds a one-target regression data set from feature columns.
func regData(t testing.TB, y []float64, cols ...[]float64) *Dataset {
	t.Helper()
	d := NewDataset(len(y))
	for f, c := range cols {
		if err := d.AddNumeric(string(rune('a'+f)), c); err != nil {
			t.Fatal(err)
		}
	}
	if err := d.SetRegressionTarget("y", y); err != nil {
		t.Fatal(err)
	}
	return d
}

// poissonDraw draws a Poisson count with mean mu (Knuth's product of uniforms).
func poissonDraw(rng *rand.Rand, mu float64) float64 {
	l, k, p := math.Exp(-mu), 0.0, 1.0
	for {
		p *= rng.Float64()
		if p <= l {
			return k
		}
		k++
	}
}

// poissonSet simulates counts with the known log-linear rate
// log μ = 0.5 + x₁ − 0.8x₂ (x uniform on [0, 1]).
func poissonSet(t testing.TB, n int, seed uint64) (*Dataset, [][]float64, []float64) {
	rng := rand.New(rand.NewPCG(seed, 3))
	x1, x2, y := make([]float64, n), make([]float64, n), make([]float64, n)
	for i := range n {
		x1[i], x2[i] = rng.Float64(), rng.Float64()
		y[i] = poissonDraw(rng, math.Exp(0.5+x1[i]-0.8*x2[i]))
	}
	return regData(t, y, x1, x2), [][]float64{x1, x2}, y
}

// poissonDeviance is the mean Poisson deviance 2(y log(y/μ) − (y − μ)).
func poissonDeviance(y, mu []float64) float64 {
	s := 0.0
	for i := range y {
		l := mu[i] - y[i]
		if y[i] > 0 {
			l += y[i] * math.Log(y[i]/mu[i])
		}
		s += 2 * l
	}
	return s / float64(len(y))
}

// Poisson boosting on simulated counts with a known log-linear rate. The balance property
// of the log link with an intercept (common practice for GLMs and Poisson boosting): the
// initial score log(ȳ) makes the predicted total equal the observed total, to rounding.
// Each Newton round keeps the total to first order in the step, so after the rounds it
// holds approximately: asserted within 1e-3 relative (measured in the test log). The
// training and test deviance fall below the intercept-only model's.
func TestBoostingPoisson(t *testing.T) {
	d, cols, y := poissonSet(t, 4000, 1)
	_, testCols, testY := poissonSet(t, 4000, 2)
	p := boostParams()
	p.Loss, p.Trees, p.MaxDepth = LossPoisson, 50, 3
	m, err := Train(context.Background(), d, p)
	if err != nil {
		t.Fatal(err)
	}
	total := 0.0
	for _, v := range y {
		total += v
	}
	init := math.Exp(m.Boost.InitScore[0]) * float64(len(y))
	if math.Abs(init-total) > 1e-6*total {
		t.Errorf("intercept-only total %v, observed %v", init, total)
	}
	mu := make([]float64, len(y))
	if err := m.Predict(cols, mu, 2); err != nil {
		t.Fatal(err)
	}
	pt := 0.0
	for _, v := range mu {
		pt += v
	}
	t.Logf("observed total %v, intercept-only %v (rel %.2e), after %d rounds %v (rel %.2e)",
		total, init, math.Abs(init-total)/total, len(m.Trees), pt, math.Abs(pt-total)/total)
	if math.Abs(pt-total) > 1e-3*total {
		t.Errorf("predicted total %v, observed %v", pt, total)
	}
	mean := total / float64(len(y))
	flat := make([]float64, len(y))
	for i := range flat {
		flat[i] = mean
	}
	dev, dev0 := poissonDeviance(y, mu), poissonDeviance(y, flat)
	testMu := make([]float64, len(testY))
	if err := m.Predict(testCols, testMu, 2); err != nil {
		t.Fatal(err)
	}
	testDev, testDev0 := poissonDeviance(testY, testMu), poissonDeviance(testY, flat)
	t.Logf("deviance: train %.4f (intercept only %.4f), test %.4f (%.4f)", dev, dev0, testDev, testDev0)
	if !(dev < dev0) || !(testDev < testDev0) {
		t.Errorf("deviance train %v test %v, not below the intercept-only %v and %v", dev, testDev, dev0, testDev0)
	}
	if last := m.Boost.TrainLoss[len(m.Boost.TrainLoss)-1]; math.Abs(last-dev) > 1e-9*dev {
		t.Errorf("training curve ends at %v, deviance from predictions %v", last, dev)
	}
	// A negative count is refused, naming the loss and the target.
	y[7] = -1
	if _, err := Train(context.Background(), regData(t, y, cols...), p); err == nil ||
		!strings.Contains(err.Error(), `loss "poisson"`) || !strings.Contains(err.Error(), `target "y"`) {
		t.Errorf("negative count: %v", err)
	}
}

// heteroscedastic draws y = x + (0.2 + x)·ε with ε standard normal, x uniform on [0, 2].
func heteroscedastic(t *testing.T, n int, seed uint64) (*Dataset, [][]float64, []float64) {
	rng := rand.New(rand.NewPCG(seed, 4))
	x, z, y := make([]float64, n), make([]float64, n), make([]float64, n)
	for i := range n {
		x[i], z[i] = 2*rng.Float64(), rng.Float64()
		y[i] = x[i] + (0.2+x[i])*rng.NormFloat64()
	}
	return regData(t, y, x, z), [][]float64{x, z}, y
}

// Quantile loss at 0.9 (Koenker & Bassett 1978; Friedman 2001 §4.3 for the leaf
// values) on heteroscedastic data: 0.9 ± 0.02 of the test rows fall below the
// prediction.
func TestBoostingQuantile(t *testing.T) {
	d, _, _ := heteroscedastic(t, 5000, 1)
	_, cols, y := heteroscedastic(t, 5000, 2)
	p := boostParams()
	p.Loss, p.Trees, p.MaxDepth = LossQuantile, 100, 3
	m, err := Train(context.Background(), d, p)
	if err != nil {
		t.Fatal(err)
	}
	if m.Params.Quantile != DefaultQuantile {
		t.Errorf("quantile %v, want the default %v", m.Params.Quantile, DefaultQuantile)
	}
	pred := make([]float64, len(y))
	if err := m.Predict(cols, pred, 2); err != nil {
		t.Fatal(err)
	}
	below := 0
	for i := range y {
		if y[i] < pred[i] {
			below++
		}
	}
	share := float64(below) / float64(len(y))
	t.Logf("share of test rows below the 0.9 quantile prediction: %.4f", share)
	if math.Abs(share-0.9) > 0.02 {
		t.Errorf("share below %.4f, want 0.9 ± 0.02", share)
	}
}

// outlierSet draws y = 3 sin(3x₁) + x₂ + ε, with 10 % of the rows shifted up by 30 (gross
// outliers on one side, which pull a mean but not a median).
func outlierSet(t *testing.T, n int, seed uint64) (*Dataset, [][]float64, []float64) {
	rng := rand.New(rand.NewPCG(seed, 5))
	x1, x2, y := make([]float64, n), make([]float64, n), make([]float64, n)
	for i := range n {
		x1[i], x2[i] = rng.Float64(), rng.Float64()
		y[i] = 3*math.Sin(3*x1[i]) + x2[i] + 0.3*rng.NormFloat64()
		if rng.Float64() < 0.1 {
			y[i] += 30
		}
	}
	return regData(t, y, x1, x2), [][]float64{x1, x2}, y
}

// Robust losses (Friedman 2001 §4.2 and §4.4): on data with gross outliers, absolute and
// Huber loss reach a lower test mean absolute error than squared loss.
func TestBoostingRobustLosses(t *testing.T) {
	d, _, _ := outlierSet(t, 3000, 1)
	_, cols, y := outlierSet(t, 3000, 2)
	mae := map[Loss]float64{}
	for _, loss := range []Loss{LossSquared, LossAbsolute, LossHuber} {
		p := boostParams()
		p.Loss, p.Trees, p.MaxDepth = loss, 100, 3
		m, err := Train(context.Background(), d, p)
		if err != nil {
			t.Fatal(err)
		}
		pred := make([]float64, len(y))
		if err := m.Predict(cols, pred, 2); err != nil {
			t.Fatal(err)
		}
		s := 0.0
		for i := range y {
			s += math.Abs(y[i] - pred[i])
		}
		mae[loss] = s / float64(len(y))
		c := m.Boost.TrainLoss
		if c[len(c)-1] >= c[0] {
			t.Errorf("%s: training loss went from %v to %v", loss, c[0], c[len(c)-1])
		}
	}
	t.Logf("test MAE: squared %.4f, absolute %.4f, huber %.4f", mae[LossSquared], mae[LossAbsolute], mae[LossHuber])
	if !(mae[LossAbsolute] < mae[LossSquared]) || !(mae[LossHuber] < mae[LossSquared]) {
		t.Errorf("test MAE: squared %v, absolute %v, huber %v", mae[LossSquared], mae[LossAbsolute], mae[LossHuber])
	}
}

// Every new loss: the model survives encode → decode, one-row and batch prediction agree
// bit for bit, and the model does not depend on the thread count.
func TestBoostingLossesEncodeAndThreads(t *testing.T) {
	d, cols, _ := poissonSet(t, 600, 3)
	for _, loss := range []Loss{LossAbsolute, LossHuber, LossQuantile, LossPoisson} {
		p := DefaultParams(MethodBoosting)
		p.Loss, p.Trees, p.MaxDepth, p.RowFraction, p.HoldoutFraction = loss, 15, 3, 0.7, 0.2
		if loss == LossQuantile {
			p.Quantile = 0.25
		}
		var enc [2][]byte
		var m *Model
		for k, threads := range []int{1, 2} {
			p.Threads = threads
			var err error
			if m, err = Train(context.Background(), d, p); err != nil {
				t.Fatal(err)
			}
			if enc[k], err = m.MarshalBinary(); err != nil {
				t.Fatal(err)
			}
		}
		if !bytes.Equal(enc[0], enc[1]) {
			t.Errorf("%s: models differ between 1 and 2 threads", loss)
		}
		m2, err := Decode(enc[0])
		if err != nil {
			t.Fatal(err)
		}
		encSameModel(t, m, m2)
		batch := make([]float64, d.rows)
		if err := m2.Predict(cols, batch, 2); err != nil {
			t.Fatal(err)
		}
		row, dst := make([]float64, 2), make([]float64, 1)
		for i := range d.rows {
			rowOf(d, i, row)
			if m.PredictRow(row, dst); math.Float64bits(dst[0]) != math.Float64bits(batch[i]) {
				t.Fatalf("%s row %d: PredictRow %v, decoded Predict %v", loss, i, dst[0], batch[i])
			}
		}
	}
}

// Validate names the quantile control when it is out of range or given to another loss.
func TestBoostingQuantileValidate(t *testing.T) {
	for _, c := range []struct {
		loss Loss
		q    float64
		want string
	}{
		{LossQuantile, 1, "quantile 1"},
		{LossQuantile, -0.1, "quantile -0.1"},
		{LossQuantile, math.NaN(), "quantile NaN"},
		{LossSquared, 0.5, "quantile 0.5"},
		{"cubic", 0, `loss "cubic"`},
	} {
		p := DefaultParams(MethodBoosting)
		p.Loss, p.Quantile = c.loss, c.q
		if err := p.Validate(); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("loss %q quantile %v: %v, want an error naming %q", c.loss, c.q, err, c.want)
		}
	}
	p := DefaultParams(MethodForest)
	p.Quantile = 0.5
	if err := p.Validate(); err == nil || !strings.Contains(err.Error(), "quantile") {
		t.Errorf("forest with a quantile: %v", err)
	}
}

// Poisson with an exposure offset (McCullagh & Nelder 1989, §6.2.3): counts drawn with
// mean e·exp(0.5 + x₁ − 0.8x₂) for exposures e in [0.5, 3]. The model predicts the rate
// per unit of exposure; times the exposure, the intercept-only total equals the observed
// total to rounding and the trained one within 1e-3 relative (as without exposure),
// and the deviance is below the intercept-only model's and below a model that ignores
// the exposure.
func TestBoostingPoissonExposure(t *testing.T) {
	n := 4000
	rng := rand.New(rand.NewPCG(8, 9))
	x1, x2, e, y := make([]float64, n), make([]float64, n), make([]float64, n), make([]float64, n)
	for i := range n {
		x1[i], x2[i], e[i] = rng.Float64(), rng.Float64(), 0.5+2.5*rng.Float64()
		y[i] = poissonDraw(rng, e[i]*math.Exp(0.5+x1[i]-0.8*x2[i]))
	}
	d := regData(t, y, x1, x2)
	if err := d.SetExposure("years", e); err != nil {
		t.Fatal(err)
	}
	p := boostParams()
	p.Loss, p.Trees, p.MaxDepth = LossPoisson, 50, 3
	m, err := Train(context.Background(), d, p)
	if err != nil {
		t.Fatal(err)
	}
	if m.Params.Exposure != "years" {
		t.Fatalf("exposure %q", m.Params.Exposure)
	}
	rate := make([]float64, n)
	if err := m.Predict([][]float64{x1, x2}, rate, 2); err != nil {
		t.Fatal(err)
	}
	total, ePred, eInit, sumE := 0.0, 0.0, 0.0, 0.0
	mu, flat := make([]float64, n), make([]float64, n)
	for i := range n {
		total += y[i]
		sumE += e[i]
		mu[i] = e[i] * rate[i]
		ePred += mu[i]
		eInit += e[i] * math.Exp(m.Boost.InitScore[0])
	}
	for i := range n {
		flat[i] = e[i] * total / sumE
	}
	t.Logf("observed total %v, intercept-only %v (rel %.2e), trained %v (rel %.2e)",
		total, eInit, math.Abs(eInit-total)/total, ePred, math.Abs(ePred-total)/total)
	if math.Abs(eInit-total) > 1e-9*total || math.Abs(ePred-total) > 1e-3*total {
		t.Errorf("totals: observed %v, intercept-only %v, trained %v", total, eInit, ePred)
	}
	p2 := p
	plain, err := Train(context.Background(), regData(t, y, x1, x2), p2)
	if err != nil {
		t.Fatal(err)
	}
	noExp := make([]float64, n)
	if err := plain.Predict([][]float64{x1, x2}, noExp, 2); err != nil {
		t.Fatal(err)
	}
	dev, dev0, devPlain := poissonDeviance(y, mu), poissonDeviance(y, flat), poissonDeviance(y, noExp)
	t.Logf("deviance with exposure %.4f, intercept-only %.4f, without exposure %.4f", dev, dev0, devPlain)
	if !(dev < dev0) || !(dev < devPlain) {
		t.Errorf("deviance %v, intercept-only %v, without exposure %v", dev, dev0, devPlain)
	}
	b, err := m.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	m2, err := Decode(b)
	if err != nil {
		t.Fatal(err)
	}
	encSameModel(t, m, m2)

	// Only the Poisson loss takes an exposure; exposure values must be above 0.
	p.Loss = LossSquared
	if _, err := Train(context.Background(), d, p); err == nil || !strings.Contains(err.Error(), `exposure "years"`) {
		t.Errorf("squared loss with exposure: %v", err)
	}
	e[3] = 0
	if err := regData(t, y, x1, x2).SetExposure("years", e); err == nil || !strings.Contains(err.Error(), `exposure "years"`) {
		t.Errorf("zero exposure: %v", err)
	}
	if err := regData(t, y, x1, x2).SetExposure("a", []float64{1}); err == nil {
		t.Error("short exposure accepted")
	}
}

// Iris (Fisher 1936, via Debian's python3-sklearn), a fixed 30 % test split:
// multinomial boosting against scikit-learn 1.2.1's HistGradientBoostingClassifier with
// the same settings (reference.json iris_boosting, from make_reference.py): test log
// loss within 2 % of the reference's and the same accuracy.
func TestBoostingIrisMultinomialReference(t *testing.T) {
	var ref struct {
		TestRows     []int   `json:"test_rows"`
		TestLogLoss  float64 `json:"test_log_loss"`
		TestAccuracy float64 `json:"test_accuracy"`
	}
	if err := json.Unmarshal(reference(t)["iris_boosting"], &ref); err != nil {
		t.Fatal(err)
	}
	iris := readTable(t, "iris.csv")
	train, test := iris.subset(ref.TestRows, false), iris.subset(ref.TestRows, true)
	m, err := Train(context.Background(), train.dataset(t, "species"), boostParams())
	if err != nil {
		t.Fatal(err)
	}
	K := len(m.Classes)
	if m.Boost.Loss != LossMultinomial || K != 3 || len(m.Boost.InitScore) != K || len(m.Trees) != K*m.Boost.BestRound {
		t.Fatalf("loss %q, %d classes, %d initial scores, %d trees for %d rounds", m.Boost.Loss, K, len(m.Boost.InitScore), len(m.Trees), m.Boost.BestRound)
	}
	pred := make([]float64, test.rows*K)
	if err := m.Predict(test.columns(m), pred, 2); err != nil {
		t.Fatal(err)
	}
	ll, right := 0.0, 0
	for i, name := range test.cat["species"] {
		p := pred[i*K : (i+1)*K]
		if s := p[0] + p[1] + p[2]; math.Abs(s-1) > 1e-12 {
			t.Fatalf("row %d: probabilities %v sum to %v", i, p, s)
		}
		c := slices.Index(m.Classes, name)
		ll -= math.Log(max(p[c], 1e-15))
		if Class(p) == c {
			right++
		}
	}
	ll /= float64(test.rows)
	acc := float64(right) / float64(test.rows)
	t.Logf("test log loss %.4f, reference %.4f (ratio %.4f); accuracy %.4f, reference %.4f",
		ll, ref.TestLogLoss, ll/ref.TestLogLoss, acc, ref.TestAccuracy)
	if ll > 1.02*ref.TestLogLoss {
		t.Errorf("test log loss %.4f more than 2 %% above the reference's %.4f", ll, ref.TestLogLoss)
	}
	if acc != ref.TestAccuracy {
		t.Errorf("test accuracy %.4f, reference %.4f", acc, ref.TestAccuracy)
	}
}

// Multinomial models: one-row and batch prediction agree bit for bit, the model
// survives encode → decode and does not depend on the thread count; decoding refuses a
// tree count that is not K per round.
func TestBoostingMultinomialEncodeAndThreads(t *testing.T) {
	iris := readTable(t, "iris.csv")
	d := iris.dataset(t, "species")
	p := DefaultParams(MethodBoosting)
	p.Trees, p.MaxDepth, p.RowFraction, p.HoldoutFraction, p.Patience = 30, 3, 0.8, 0.2, 3
	var enc [2][]byte
	var m *Model
	for k, threads := range []int{1, 2} {
		p.Threads = threads
		var err error
		if m, err = Train(context.Background(), d, p); err != nil {
			t.Fatal(err)
		}
		if enc[k], err = m.MarshalBinary(); err != nil {
			t.Fatal(err)
		}
	}
	if !bytes.Equal(enc[0], enc[1]) {
		t.Error("models differ between 1 and 2 threads")
	}
	if m.Params.Loss != LossMultinomial || len(m.Trees) != 3*m.Boost.BestRound {
		t.Fatalf("loss %q, %d trees for best round %d", m.Params.Loss, len(m.Trees), m.Boost.BestRound)
	}
	m2, err := Decode(enc[0])
	if err != nil {
		t.Fatal(err)
	}
	encSameModel(t, m, m2)
	cols := iris.columns(m)
	batch := make([]float64, iris.rows*3)
	if err := m2.Predict(cols, batch, 2); err != nil {
		t.Fatal(err)
	}
	row, dst := make([]float64, len(cols)), make([]float64, 3)
	for i := range iris.rows {
		for f := range cols {
			row[f] = cols[f][i]
		}
		m.PredictRow(row, dst)
		if !bitsEqual(dst, batch[i*3:(i+1)*3]) {
			t.Fatalf("row %d: PredictRow %v, decoded Predict %v", i, dst, batch[i*3:(i+1)*3])
		}
	}
	if a := testing.AllocsPerRun(100, func() { m.PredictRow(row, dst) }); a != 0 {
		t.Errorf("PredictRow allocates %v times", a)
	}
	// A model whose trees are not K per kept round is refused.
	bad := *m
	bad.Trees = m.Trees[:len(m.Trees)-1]
	if _, err := bad.MarshalBinary(); err == nil || !strings.Contains(err.Error(), "per round") {
		t.Errorf("a tree short: %v", err)
	}
	bad = *m
	bad.Boost = &Boost{}
	*bad.Boost = *m.Boost
	bad.Boost.InitScore = m.Boost.InitScore[:2]
	if _, err := bad.MarshalBinary(); err == nil || !strings.Contains(err.Error(), "initial scores") {
		t.Errorf("two initial scores for three classes: %v", err)
	}
	// Two classes take logistic; multinomial wants three or more.
	p.Loss, p.Threads = LossMultinomial, 0
	bc := readTable(t, "breast_cancer.csv").dataset(t, "diagnosis")
	if _, err := Train(context.Background(), bc, p); err == nil || !strings.Contains(err.Error(), `loss "multinomial"`) {
		t.Errorf("multinomial on two classes: %v", err)
	}
}
