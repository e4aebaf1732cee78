package forest

import (
	"context"
	"encoding/json"
	"math"
	"slices"
	"strconv"
	"testing"
)

// The forest's out-of-bag error on the Wisconsin breast cancer data matches the reference
// library's (scikit-learn 1.2.1, reference.json "breast_cancer_forest_oob": 200 trees, 5 of
// 30 features per split, bootstrap, fully grown) within 1.5 points, averaged over seeds
// 1–5 on both sides. The RNGs differ, so only the mean is compared, not seed by seed.
func TestBreastCancerForestOOB(t *testing.T) {
	var ref struct {
		Trees            int                `json:"n_estimators"`
		FeaturesPerSplit int                `json:"features_per_split"`
		BySeed           map[string]float64 `json:"oob_error_by_random_state"`
		Mean             float64            `json:"oob_error_mean"`
	}
	if err := json.Unmarshal(reference(t)["breast_cancer_forest_oob"], &ref); err != nil {
		t.Fatal(err)
	}
	if ref.Trees != 200 || ref.FeaturesPerSplit != 5 || len(ref.BySeed) != 5 {
		t.Fatalf("reference.json changed: %+v", ref)
	}
	tb := readTable(t, "breast_cancer.csv")
	d := tb.dataset(t, "diagnosis")
	const tol = 0.015 // the acceptance bound: 1.5 points of error rate
	sum := 0.0
	for seed := uint64(1); seed <= 5; seed++ {
		p := DefaultParams(MethodForest)
		p.Trees = ref.Trees
		p.FeaturesPerSplit = float64(ref.FeaturesPerSplit)
		p.Seed = seed
		p.PermutationRows = -1 // not needed here; keeps the test fast
		m, err := Train(context.Background(), d, p)
		if err != nil {
			t.Fatal(err)
		}
		if m.OOB.Scored != tb.rows {
			// With 200 trees a row is left out by none of them with chance 0.632^200 ≈ 1e-40.
			t.Errorf("seed %d: %d rows scored out of bag, want all %d", seed, m.OOB.Scored, tb.rows)
		}
		e := MetricValue(m.OOB.Metrics, "error")
		t.Logf("seed %d: OOB error %.4f (reference seed %d: %.4f)", seed, e, seed, ref.BySeed[strconv.FormatUint(seed, 10)])
		sum += e
	}
	mean := sum / 5
	t.Logf("mean OOB error %.4f, reference mean %.4f", mean, ref.Mean)
	if math.Abs(mean-ref.Mean) > tol {
		t.Errorf("mean OOB error %.4f, reference %.4f: differ by more than %.3f", mean, ref.Mean, tol)
	}
}

// Friedman #1 (J.H. Friedman, "Multivariate adaptive regression splines", Annals of
// Statistics 19(1), 1991): x1…x10 ~ U(0,1),
//
//	y = 10 sin(π x1 x2) + 20 (x3 − 0.5)² + 10 x4 + 5 x5 + e,  e ~ N(0, 1),
//
// so x6…x10 are pure noise. A 500-tree regression forest with the default p/3 features
// per split scores a test R² no more than 0.01 below the reference library's (scikit-learn
// 1.2.1, reference.json "friedman1_forest", same files), and both importance measures rank
// every informative feature above every noise feature.
func TestFriedman1Forest(t *testing.T) {
	var ref struct {
		FeaturesPerSplit int                `json:"features_per_split"`
		TestR2           float64            `json:"test_r2"`
		TrueR2           float64            `json:"true_function_test_r2"`
		Importances      map[string]float64 `json:"impurity_importances"`
	}
	if err := json.Unmarshal(reference(t)["friedman1_forest"], &ref); err != nil {
		t.Fatal(err)
	}
	train, test := readTable(t, "friedman1_train.csv"), readTable(t, "friedman1_test.csv")
	p := DefaultParams(MethodForest)
	p.Trees = 500
	p.FeaturesPerSplit = 0 // the default, p/3 = 3 of 10 for regression
	m, err := Train(context.Background(), train.dataset(t, "y"), p)
	if err != nil {
		t.Fatal(err)
	}
	if m.Task != Regression {
		t.Fatalf("task %q, want regression", m.Task)
	}
	if k, err := m.Params.featuresPerSplit(m.Task, len(m.Features)); err != nil || k != ref.FeaturesPerSplit {
		t.Errorf("features per split %d (%v), reference %d", k, err, ref.FeaturesPerSplit)
	}
	pred := make([]float64, test.rows)
	if err := m.Predict(test.columns(m), pred, 2); err != nil {
		t.Fatal(err)
	}
	r2 := MetricValue(RegressionMetrics(test.num["y"], pred, nil), "r2")
	t.Logf("test R² %.4f, reference %.4f (noise-free formula %.4f); OOB R² %.4f",
		r2, ref.TestR2, ref.TrueR2, MetricValue(m.OOB.Metrics, "r2"))
	const tol = 0.01 // the acceptance bound
	if r2 < ref.TestR2-tol {
		t.Errorf("test R² %.4f is more than %.2f below the reference %.4f", r2, tol, ref.TestR2)
	}
	if r2 > ref.TrueR2 {
		t.Errorf("test R² %.4f beats the noise-free formula's %.4f: the test data leaked", r2, ref.TrueR2)
	}

	informative := []string{"x1", "x2", "x3", "x4", "x5"}
	for _, kind := range []struct {
		name string
		imp  []float64
	}{
		{"impurity", m.Importance.Impurity},
		{"permutation", m.Importance.Permutation},
	} {
		if len(kind.imp) != len(m.Features) {
			t.Errorf("%s importance: %d values, want %d", kind.name, len(kind.imp), len(m.Features))
			continue
		}
		lowest, highest := math.Inf(1), math.Inf(-1)
		for f, fi := range m.Features {
			if slices.Contains(informative, fi.Name) {
				lowest = math.Min(lowest, kind.imp[f])
			} else {
				highest = math.Max(highest, kind.imp[f])
			}
			t.Logf("%s importance %-3s %.4f (reference impurity %.4f)", kind.name, fi.Name, kind.imp[f], ref.Importances[fi.Name])
		}
		if !(lowest > highest) {
			t.Errorf("%s importance: weakest of x1…x5 %.4g is not above strongest of x6…x10 %.4g", kind.name, lowest, highest)
		}
	}
	// Impurity importances are normalised to sum to 1 (as the reference's are).
	if s := sum(m.Importance.Impurity); math.Abs(s-1) > 1e-12 {
		t.Errorf("impurity importances sum to %v, want 1", s)
	}
}

func sum(v []float64) float64 {
	s := 0.0
	for _, x := range v {
		s += x
	}
	return s
}
