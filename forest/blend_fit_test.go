package forest

import (
	"encoding/binary"
	"encoding/json"
	"hash/crc32"
	"math"
	"math/rand/v2"
	"os"
	"slices"
	"strings"
	"testing"
)

// blendReference is testdata/reference/blend_reference.json, made by
// testdata/reference/blend_reference.py with Debian's python3-scipy 1.10.1.
type blendReference struct {
	Regression struct {
		Target  []float64   `json:"target"`
		Members [][]float64 `json:"members"`
		Weights []float64   `json:"weights"`
		MSE     float64     `json:"mse"`
	} `json:"regression"`
	Classification struct {
		Target  []float64   `json:"target"`
		Classes int         `json:"classes"`
		Members [][]float64 `json:"members"`
		Weights []float64   `json:"weights"`
		LogLoss float64     `json:"log_loss"`
	} `json:"classification"`
}

func readBlendReference(t *testing.T) *blendReference {
	t.Helper()
	b, err := os.ReadFile("../testdata/reference/blend_reference.json")
	if err != nil {
		t.Fatal(err)
	}
	var r blendReference
	if err := json.Unmarshal(b, &r); err != nil {
		t.Fatal(err)
	}
	return &r
}

// checkFit asserts what every fit must give: weights ≥ 0 summing to 1, the reported loss
// equal to the loss recomputed here, and that loss not above the best member's (the
// members alone are feasible points of a convex problem: Breiman 1996, and the issue's
// acceptance check).
func checkFit(t *testing.T, fit *BlendFit, task Task, width int, preds [][]float64, y []float64) {
	t.Helper()
	sum := 0.0
	for j, a := range fit.Weights {
		if !(a >= 0) {
			t.Errorf("weight %d is %v", j, a)
		}
		sum += a
	}
	if math.Abs(sum-1) > 1e-12 {
		t.Errorf("weights %v sum to %v", fit.Weights, sum)
	}
	// The loss recomputed from the blended predictions, independent of the solver.
	loss := 0.0
	for r := range y {
		if task == Classification {
			k := int(y[r])
			p := 0.0
			for j := range preds {
				p += fit.Weights[j] * max(preds[j][r*width+k], 1e-15)
			}
			loss -= math.Log(p)
		} else {
			v := 0.0
			for j := range preds {
				v += fit.Weights[j] * preds[j][r]
			}
			loss += (y[r] - v) * (y[r] - v)
		}
	}
	loss /= float64(len(y))
	if math.Abs(loss-fit.Loss) > 1e-12*math.Max(1, loss) {
		t.Errorf("reported loss %v, recomputed %v", fit.Loss, loss)
	}
	best := slices.Min(fit.MemberLoss)
	if fit.Loss > best+1e-12 {
		t.Errorf("blend loss %v is above its best member's %v (member losses %v)", fit.Loss, best, fit.MemberLoss)
	}
}

// Regression weights match scipy.optimize.nnls (python3-scipy 1.10.1) on the system
// augmented to enforce Σa = 1; classification weights match scipy's SLSQP minimising the
// same log loss. The reference's sum constraint holds to ~1e-9 (penalty 1e4), hence 1e-6.
func TestFitBlendWeightsReference(t *testing.T) {
	ref := readBlendReference(t)
	rg := ref.Regression
	fit, err := FitBlendWeights(Regression, 1, rg.Members, rg.Target, nil)
	if err != nil {
		t.Fatal(err)
	}
	checkFit(t, fit, Regression, 1, rg.Members, rg.Target)
	for j := range rg.Weights {
		if math.Abs(fit.Weights[j]-rg.Weights[j]) > 1e-6 {
			t.Errorf("regression weight %d: %v, scipy nnls %v", j, fit.Weights[j], rg.Weights[j])
		}
	}
	t.Logf("regression: weights %v (scipy %v), mse %v (scipy %v), %d steps", fit.Weights, rg.Weights, fit.Loss, rg.MSE, fit.Steps)
	if fit.Weights[3] != 0 {
		t.Errorf("the pure-noise member keeps weight %v; nnls gives it 0", fit.Weights[3])
	}
	if fit.Loss > rg.MSE+1e-9 || math.Abs(fit.Loss-rg.MSE) > 1e-7 {
		t.Errorf("regression mse %v, scipy's %v", fit.Loss, rg.MSE)
	}
	if fit.Metric != "mse" || fit.Rows != len(rg.Target) {
		t.Errorf("metric %q over %d rows", fit.Metric, fit.Rows)
	}

	cl := ref.Classification
	fit, err = FitBlendWeights(Classification, cl.Classes, cl.Members, cl.Target, nil)
	if err != nil {
		t.Fatal(err)
	}
	checkFit(t, fit, Classification, cl.Classes, cl.Members, cl.Target)
	for j := range cl.Weights {
		if math.Abs(fit.Weights[j]-cl.Weights[j]) > 1e-6 {
			t.Errorf("classification weight %d: %v, scipy SLSQP %v", j, fit.Weights[j], cl.Weights[j])
		}
	}
	t.Logf("classification: weights %v (scipy %v), log loss %v (scipy %v), %d steps", fit.Weights, cl.Weights, fit.Loss, cl.LogLoss, fit.Steps)
	// At least as good as the reference's optimum, and equal to it to rounding.
	if fit.Loss > cl.LogLoss+1e-12 || math.Abs(fit.Loss-cl.LogLoss) > 1e-9 {
		t.Errorf("log loss %v, scipy's %v", fit.Loss, cl.LogLoss)
	}
	if fit.Metric != "log_loss" {
		t.Errorf("metric %q", fit.Metric)
	}
}

// blendSynth makes n rows where member 0 is the truth plus noise and member 1 pure noise
// (unrelated to the row); further members, if asked, mix the two.
func blendSynth(task Task, n, K int, seed uint64) ([][]float64, []float64) {
	rng := rand.New(rand.NewPCG(seed, 1))
	y := make([]float64, n)
	good, noise := make([]float64, 0, n*K), make([]float64, 0, n*K)
	soft := func(z []float64) []float64 {
		s := 0.0
		for k := range z {
			z[k] = math.Exp(z[k])
			s += z[k]
		}
		for k := range z {
			z[k] /= s
		}
		return z
	}
	for r := range n {
		if task == Classification {
			c := rng.IntN(K)
			y[r] = float64(c)
			g, u := make([]float64, K), make([]float64, K)
			for k := range K {
				g[k] = rng.NormFloat64()
				u[k] = 2 * rng.NormFloat64()
			}
			g[c] += 2.5
			good = append(good, soft(g)...)
			noise = append(noise, soft(u)...)
			continue
		}
		y[r] = 10 * rng.Float64()
		good = append(good, y[r]+0.5*rng.NormFloat64())
		noise = append(noise, 10*rng.Float64())
	}
	return [][]float64{good, noise}, y
}

// When one member is the truth plus noise and the other pure noise, the weight goes to
// the first (Breiman 1996: stacking picks the members that predict).
func TestFitBlendWeightsFindsTheInformativeMember(t *testing.T) {
	for _, tc := range []struct {
		name string
		task Task
		K    int
	}{
		{"regression", Regression, 1},
		{"binary", Classification, 2},
		{"three classes", Classification, 3},
	} {
		t.Run(tc.name, func(t *testing.T) {
			preds, y := blendSynth(tc.task, 400, tc.K, 3)
			// The noise member first, so that order does not decide.
			preds[0], preds[1] = preds[1], preds[0]
			fit, err := FitBlendWeights(tc.task, tc.K, preds, y, nil)
			if err != nil {
				t.Fatal(err)
			}
			checkFit(t, fit, tc.task, tc.K, preds, y)
			if fit.Weights[1] < 0.9 {
				t.Errorf("informative member's weight %v, noise member's %v", fit.Weights[1], fit.Weights[0])
			}
		})
	}
}

// Row weights act as repetition counts (common practice): weight 2 on a row fits the same
// weights as the row given twice; and the fit is deterministic to the bit.
func TestFitBlendWeightsRowWeights(t *testing.T) {
	for _, tc := range []struct {
		task Task
		K    int
	}{{Regression, 1}, {Classification, 3}} {
		preds, y := blendSynth(tc.task, 150, tc.K, 11)
		// A third member, half way between, so the optimum is inside the simplex.
		mid := make([]float64, len(preds[0]))
		for i := range mid {
			mid[i] = 0.5*preds[0][i] + 0.5*preds[1][i]
		}
		preds = append(preds, mid)
		w := make([]float64, len(y))
		var dupPreds [][]float64 = make([][]float64, len(preds))
		var dupY []float64
		for r := range y {
			w[r] = float64(1 + r%2)
			for range int(w[r]) {
				dupY = append(dupY, y[r])
				for j := range preds {
					dupPreds[j] = append(dupPreds[j], preds[j][r*tc.K:(r+1)*tc.K]...)
				}
			}
		}
		a, err := FitBlendWeights(tc.task, tc.K, preds, y, w)
		if err != nil {
			t.Fatal(err)
		}
		b, err := FitBlendWeights(tc.task, tc.K, dupPreds, dupY, nil)
		if err != nil {
			t.Fatal(err)
		}
		for j := range a.Weights {
			if math.Abs(a.Weights[j]-b.Weights[j]) > 1e-7 {
				t.Errorf("%s: weight %d: %v with row weights, %v with rows repeated", tc.task, j, a.Weights[j], b.Weights[j])
			}
		}
		if math.Abs(a.Loss-b.Loss) > 1e-12 {
			t.Errorf("%s: loss %v with row weights, %v with rows repeated", tc.task, a.Loss, b.Loss)
		}
		again, _ := FitBlendWeights(tc.task, tc.K, preds, y, w)
		if !slices.Equal(again.Weights, a.Weights) || again.Loss != a.Loss {
			t.Errorf("%s: a second fit differs: %v, then %v", tc.task, a.Weights, again.Weights)
		}
	}
}

// Identical members (a singular problem) and a single member still give valid weights.
func TestFitBlendWeightsDegenerate(t *testing.T) {
	preds, y := blendSynth(Regression, 50, 1, 5)
	twin := [][]float64{preds[0], slices.Clone(preds[0]), preds[1]}
	fit, err := FitBlendWeights(Regression, 1, twin, y, nil)
	if err != nil {
		t.Fatal(err)
	}
	checkFit(t, fit, Regression, 1, twin, y)
	if fit.Weights[0]+fit.Weights[1] < 0.9 {
		t.Errorf("twins share %v", fit.Weights[0]+fit.Weights[1])
	}
	// Weights do not depend on the target's units (common practice): the same problem in
	// millions gives the same weights.
	three := [][]float64{preds[0], preds[1], make([]float64, len(y))}
	for r := range y {
		three[2][r] = 0.3*preds[0][r] + 0.7*y[r] + 1
	}
	small, err := FitBlendWeights(Regression, 1, three, y, nil)
	if err != nil {
		t.Fatal(err)
	}
	big := make([][]float64, len(three))
	for j := range three {
		for _, v := range three[j] {
			big[j] = append(big[j], 1e6*v)
		}
	}
	bigY := make([]float64, len(y))
	for r, v := range y {
		bigY[r] = 1e6 * v
	}
	large, err := FitBlendWeights(Regression, 1, big, bigY, nil)
	if err != nil {
		t.Fatal(err)
	}
	checkFit(t, large, Regression, 1, big, bigY)
	for j := range small.Weights {
		if math.Abs(small.Weights[j]-large.Weights[j]) > 1e-9 {
			t.Errorf("weight %d: %v, in millions %v", j, small.Weights[j], large.Weights[j])
		}
	}
	if large.Steps > 3 {
		t.Errorf("a least-squares fit took %d Newton steps; its quadratic model is exact", large.Steps)
	}
	one, err := FitBlendWeights(Regression, 1, preds[:1], y, nil)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(one.Weights, []float64{1}) {
		t.Errorf("one member's weights %v", one.Weights)
	}
}

func TestFitBlendWeightsErrors(t *testing.T) {
	p := [][]float64{{0.2, 0.8, 0.6, 0.4}, {0.5, 0.5, 0.5, 0.5}}
	y := []float64{1, 0}
	for _, tc := range []struct {
		name  string
		task  Task
		width int
		preds [][]float64
		y, w  []float64
		want  string
	}{
		{"no members", Classification, 2, nil, y, nil, "no members"},
		{"one class", Classification, 1, p, y, nil, "1 classes"},
		{"regression width", Regression, 2, p, y, nil, "width 2"},
		{"short member", Classification, 2, [][]float64{p[0], p[1][:3]}, y, nil, "member 2: 3 predictions"},
		{"class out of range", Classification, 2, p, []float64{1, 2}, nil, "row 2: class index 2"},
		{"fractional class", Classification, 2, p, []float64{0.5, 1}, nil, "row 1: class index 0.5"},
		{"NaN target", Regression, 1, [][]float64{{1, 2}}, []float64{math.NaN(), 1}, nil, "row 1: target NaN"},
		{"probability above 1", Classification, 2, [][]float64{{0, 1.5, 0.5, 0.5}}, []float64{1, 0}, nil, "member 1, row 1: prediction 1.5"},
		{"NaN prediction", Regression, 1, [][]float64{{1, math.NaN()}}, []float64{1, 1}, nil, "member 1, row 2: prediction NaN"},
		{"negative weight", Classification, 2, p, y, []float64{1, -1}, "row 2: weight -1"},
		{"weights length", Classification, 2, p, y, []float64{1}, "1 row weights for 2 rows"},
		{"zero weights", Classification, 2, p, y, []float64{0, 0}, "no rows with positive weight"},
		{"no rows", Regression, 1, [][]float64{{}}, nil, nil, "no rows with positive weight"},
	} {
		_, err := FitBlendWeights(tc.task, tc.width, tc.preds, tc.y, tc.w)
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: error %v, want one containing %q", tc.name, err, tc.want)
		}
	}
}

// A blend with learned weights keeps its fit record through the encoding; a record that
// does not fit the blend, or a fitted byte other than 0 or 1, is refused.
func TestFittedBlendEncode(t *testing.T) {
	ms, _ := blendMembers(t, true)
	preds, y := blendSynth(Regression, 80, 1, 9)
	for len(preds) < len(ms) {
		preds = append(preds, preds[0])
	}
	fit, err := FitBlendWeights(Regression, 1, preds, y, nil)
	if err != nil {
		t.Fatal(err)
	}
	b, err := NewFittedBlend("y", ms, blendNames(len(ms)), fit, BlendAverage)
	if err != nil {
		t.Fatal(err)
	}
	if f := b.Blend.Fitted; f == nil || f.Rows != 80 || f.Metric != FitMSE || f.Loss != fit.Loss || !slices.Equal(f.MemberLoss, fit.MemberLoss) {
		t.Fatalf("fit record %+v, fit %+v", b.Blend.Fitted, fit.FittedOn)
	}
	enc := encMust(t, b)
	d, err := Decode(enc)
	if err != nil {
		t.Fatal(err)
	}
	encSameModel(t, b, d)
	encCheckDecoded(t, d, enc)
	if g, w := d.Blend.Fitted, b.Blend.Fitted; g == nil || g.Metric != w.Metric || g.Rows != w.Rows || g.Loss != w.Loss || !slices.Equal(g.MemberLoss, w.MemberLoss) {
		t.Errorf("decoded fit record %+v, want %+v", d.Blend.Fitted, b.Blend.Fitted)
	}
	for _, tc := range []struct {
		name  string
		spoil func(f *FittedOn)
		want  string
	}{
		{"classification loss on regression", func(f *FittedOn) { f.Metric = FitLogLoss }, `fitted on "log_loss"`},
		{"no rows", func(f *FittedOn) { f.Rows = 0 }, "fitted on 0 rows"},
		{"member losses", func(f *FittedOn) { f.MemberLoss = f.MemberLoss[:1] }, "1 member losses"},
		{"NaN loss", func(f *FittedOn) { f.Loss = math.NaN() }, "loss NaN"},
		{"negative member loss", func(f *FittedOn) { f.MemberLoss[0] = -1 }, "loss -1"},
	} {
		bad, _ := Decode(enc)
		tc.spoil(bad.Blend.Fitted)
		if _, err := Decode(bad.encode()); err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: error %v, want one naming %q", tc.name, err, tc.want)
		}
	}
	// Without a record the section ends in the fitted byte 0, just before the checksum.
	plain, err := NewBlend("y", ms, blendNames(len(ms)), nil, BlendAverage)
	if err != nil {
		t.Fatal(err)
	}
	raw := encMust(t, plain)
	end := len(raw) - encodingSum
	if raw[end-1] != 0 {
		t.Fatalf("last body byte %d, want the fitted byte 0", raw[end-1])
	}
	raw[end-1] = 2
	raw = binary.LittleEndian.AppendUint32(raw[:end], crc32.Checksum(raw[:end], castagnoli))
	if _, err := Decode(raw); err == nil || !strings.Contains(err.Error(), "fitted byte 2") {
		t.Errorf("fitted byte 2: error %v", err)
	}
}

// BenchmarkFitBlendWeights: five members, three classes, 10,000 rows.
func BenchmarkFitBlendWeights(b *testing.B) {
	preds, y := blendSynth(Classification, 10000, 3, 2)
	for j := 0; len(preds) < 5; j++ {
		mix := make([]float64, len(preds[0]))
		for i := range mix {
			mix[i] = (float64(j+1)*preds[0][i] + preds[1][i]) / float64(j+2)
		}
		preds = append(preds, mix)
	}
	b.ResetTimer()
	for range b.N {
		if _, err := FitBlendWeights(Classification, 3, preds, y, nil); err != nil {
			b.Fatal(err)
		}
	}
}
