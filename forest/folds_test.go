package forest

import (
	"context"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"
)

// imbalanced is a generated class target: 1000 rows of which 3 % are "rare" and 7 rows
// are "tiny" (fewer than some fold counts), the rest "common".
func imbalanced(t testing.TB) *Dataset {
	t.Helper()
	const n = 1000
	rng := rand.New(rand.NewPCG(7, 7))
	x := make([]float64, n)
	labels := make([]string, n)
	for i := range x {
		x[i] = rng.NormFloat64()
		switch {
		case i%100 < 3:
			labels[i] = "rare"
		case i < 7*97 && i%97 == 50:
			labels[i] = "tiny"
		default:
			labels[i] = "common"
		}
	}
	d := NewDataset(n)
	c, l := codes(labels)
	if err := d.AddNumeric("x", x); err != nil {
		t.Fatal(err)
	}
	if err := d.SetClassTarget("y", c, l); err != nil {
		t.Fatal(err)
	}
	return d
}

// checkPartition wants every row in exactly one fold and fold sizes within one row.
func checkPartition(t *testing.T, folds [][]int32, rows int) {
	t.Helper()
	seen := make([]int, rows)
	lo, hi := rows, 0
	for _, f := range folds {
		if !slices.IsSorted(f) {
			t.Errorf("a fold's rows are not in ascending order")
		}
		for _, r := range f {
			seen[r]++
		}
		lo, hi = min(lo, len(f)), max(hi, len(f))
	}
	for r, n := range seen {
		if n != 1 {
			t.Fatalf("row %d is in %d folds, want 1", r, n)
		}
	}
	if hi-lo > 1 {
		t.Errorf("fold sizes range from %d to %d, want within one row", lo, hi)
	}
}

// TestFoldsStratified checks that each fold holds every class within one row of its
// exact share n_c/k (common practice for stratified k-fold cross-validation), on iris
// (Fisher 1936, via Debian's python3-sklearn) and on a generated imbalanced set.
func TestFoldsStratified(t *testing.T) {
	iris := readTable(t, "iris.csv").dataset(t, "species")
	for _, tc := range []struct {
		name string
		d    *Dataset
		k    int
		seed uint64
	}{
		{"iris k=5", iris, 5, 1},
		{"iris k=7", iris, 7, 42},
		{"iris k=150", iris, 150, 3},
		{"imbalanced k=5", imbalanced(t), 5, 1},
		{"imbalanced k=10", imbalanced(t), 10, 9},
	} {
		t.Run(tc.name, func(t *testing.T) {
			folds, err := Folds(tc.d, tc.k, tc.seed)
			if err != nil {
				t.Fatal(err)
			}
			if len(folds) != tc.k {
				t.Fatalf("%d folds, want %d", len(folds), tc.k)
			}
			checkPartition(t, folds, tc.d.Rows())
			K := len(tc.d.target.levels)
			total := make([]int, K)
			for _, c := range tc.d.target.codes {
				total[c]++
			}
			for i, f := range folds {
				count := make([]int, K)
				for _, r := range f {
					count[tc.d.target.codes[r]]++
				}
				for c := range K {
					share := float64(total[c]) / float64(tc.k)
					if math.Abs(float64(count[c])-share) >= 1 {
						t.Errorf("fold %d holds %d rows of class %q, want within one row of %.2f", i, count[c], tc.d.target.levels[c], share)
					}
				}
			}
			again, _ := Folds(tc.d, tc.k, tc.seed)
			if !slices.EqualFunc(folds, again, slices.Equal) {
				t.Errorf("the same seed gave different folds")
			}
			other, _ := Folds(tc.d, tc.k, tc.seed+1)
			if tc.k < tc.d.Rows() && slices.EqualFunc(folds, other, slices.Equal) {
				t.Errorf("another seed gave the same folds")
			}
		})
	}
}

func TestFoldsRegression(t *testing.T) {
	d := readTable(t, "friedman1_train.csv").dataset(t, "y")
	for _, k := range []int{2, 5, 10} {
		folds, err := Folds(d, k, 5)
		if err != nil {
			t.Fatal(err)
		}
		checkPartition(t, folds, d.Rows())
		// A seeded shuffle, not blocks of consecutive rows: the first fold must not be
		// the first rows.
		if folds[0][len(folds[0])-1] < int32(d.Rows()/2) {
			t.Errorf("k=%d: fold 1 holds only early rows: not shuffled", k)
		}
	}
}

func TestFoldsErrors(t *testing.T) {
	d := readTable(t, "iris.csv").dataset(t, "species")
	for _, tc := range []struct {
		k    int
		want string
	}{{1, "folds 1: want at least 2"}, {0, "folds 0"}, {151, "folds 151: the data has only 150 rows"}} {
		_, err := Folds(d, tc.k, 1)
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("k=%d: error %v, want %q", tc.k, err, tc.want)
		}
	}
}

// TestSubsetRows checks that a subset holds exactly the chosen rows and keeps the class
// list even when a class is absent from it.
func TestSubsetRows(t *testing.T) {
	tb := readTable(t, "iris.csv")
	d := tb.dataset(t, "species")
	rows := []int32{0, 3, 49, 120, 149} // no versicolor (rows 50–99)
	s, err := d.Subset(rows)
	if err != nil {
		t.Fatal(err)
	}
	if s.Rows() != len(rows) || s.Features() != d.Features() {
		t.Fatalf("subset has %d rows, %d features", s.Rows(), s.Features())
	}
	if !slices.Equal(s.target.levels, d.target.levels) {
		t.Errorf("classes %q, want %q", s.target.levels, d.target.levels)
	}
	got, want := make([]float64, d.Features()), make([]float64, d.Features())
	for j, r := range rows {
		rowOf(s, j, got)
		rowOf(d, int(r), want)
		if !slices.Equal(got, want) || s.target.codes[j] != d.target.codes[r] {
			t.Errorf("subset row %d differs from row %d", j, r)
		}
	}
	if _, err := d.Subset([]int32{150}); err == nil {
		t.Errorf("row 150 of 150: no error")
	}
}

// TestCrossValidateDeterministic runs the same cross-validation twice and on 1 and 2
// threads and wants bit-identical numbers.
func TestCrossValidateDeterministic(t *testing.T) {
	ctx := context.Background()
	for _, tc := range []struct {
		name, file, target string
		method             Method
	}{
		{"iris forest", "iris.csv", "species", MethodForest},
		{"friedman1 boosting", "friedman1_train.csv", "y", MethodBoosting},
	} {
		t.Run(tc.name, func(t *testing.T) {
			d := readTable(t, tc.file).dataset(t, tc.target)
			var runs [][][]Metric
			for _, threads := range []int{1, 2, 1} {
				p := DefaultParams(tc.method)
				p.Trees, p.Seed, p.Threads = 20, 11, threads
				folds, err := Folds(d, 4, 11)
				if err != nil {
					t.Fatal(err)
				}
				done := 0
				ms, err := CrossValidate(ctx, d, p, folds, func(int, int, int) { done++ })
				if err != nil {
					t.Fatal(err)
				}
				if done != 4*20 && tc.method == MethodForest {
					t.Errorf("progress called %d times, want %d", done, 4*20)
				}
				runs = append(runs, ms)
			}
			for r := 1; r < len(runs); r++ {
				for i := range runs[0] {
					for j, m := range runs[0][i] {
						if g := runs[r][i][j]; math.Float64bits(g.Value) != math.Float64bits(m.Value) || g.Name != m.Name {
							t.Errorf("run %d fold %d %s: %v, first run %v", r, i, m.Name, g.Value, m.Value)
						}
					}
				}
			}
			want := ValidationMetrics(Task(map[bool]string{true: "classification", false: "regression"}[tc.method == MethodForest]), 3)
			for i, f := range runs[0] {
				var names []string
				for _, m := range f {
					names = append(names, m.Name)
					if math.IsNaN(m.Value) {
						t.Errorf("fold %d %s is NaN", i, m.Name)
					}
				}
				if !slices.Equal(names, want) {
					t.Errorf("fold %d metrics %q, want %q", i, names, want)
				}
			}
		})
	}
}

// TestCrossValidationNearOOB compares the cross-validated error of a forest on the
// Wisconsin breast cancer data (via Debian's python3-sklearn) with its out-of-bag error:
// Breiman (2001, "Random Forests", Machine Learning 45:5–32, §3.1) shows the out-of-bag
// estimate to be as accurate as a test set of the training set's size, so the two
// estimates of the generalisation error must agree within 2 percentage points.
func TestCrossValidationNearOOB(t *testing.T) {
	d := readTable(t, "breast_cancer.csv").dataset(t, "diagnosis")
	p := DefaultParams(MethodForest)
	p.Trees, p.Seed, p.PermutationRows = 100, 3, -1
	m, err := Train(context.Background(), d, p)
	if err != nil {
		t.Fatal(err)
	}
	oob, err := OOBMetrics(m, d)
	if err != nil {
		t.Fatal(err)
	}
	folds, err := Folds(d, 5, 3)
	if err != nil {
		t.Fatal(err)
	}
	per, err := CrossValidate(context.Background(), d, p, folds, nil)
	if err != nil {
		t.Fatal(err)
	}
	mean, std := Summarize(per)
	cv, ob := MetricValue(mean, "error"), MetricValue(oob, "error")
	t.Logf("cross-validated error %.4f (std %.4f over folds), out-of-bag error %.4f", cv, MetricValue(std, "error"), ob)
	if math.Abs(cv-ob) > 0.02 {
		t.Errorf("cross-validated error %.4f and out-of-bag error %.4f differ by more than 0.02", cv, ob)
	}
	// OOBMetrics computes the engine's own out-of-bag figures alike.
	for _, name := range []string{"error", "log_loss", "auc", "brier"} {
		if g, w := MetricValue(oob, name), MetricValue(m.OOB.Metrics, name); math.Abs(g-w) > 1e-12 {
			t.Errorf("OOBMetrics %s = %v, the model's out-of-bag %s = %v", name, g, name, w)
		}
	}
}

// TestCrossValidateMissingClass: a class with one row is absent from the training rows
// of one fold; that fold's model still predicts every class, and the fold is scored.
func TestCrossValidateMissingClass(t *testing.T) {
	const n = 60
	x := make([]float64, n)
	labels := make([]string, n)
	for i := range x {
		x[i] = float64(i)
		labels[i] = []string{"a", "b"}[i%2]
	}
	labels[17] = "c"
	d := NewDataset(n)
	c, l := codes(labels)
	if err := d.AddNumeric("x", x); err != nil {
		t.Fatal(err)
	}
	if err := d.SetClassTarget("y", c, l); err != nil {
		t.Fatal(err)
	}
	folds, err := Folds(d, 3, 1)
	if err != nil {
		t.Fatal(err)
	}
	p := DefaultParams(MethodForest)
	p.Trees = 5
	for i, f := range folds {
		m, ms, err := TrainFold(context.Background(), d, p, folds, i)
		if err != nil {
			t.Fatalf("fold %d: %v", i+1, err)
		}
		if len(m.Classes) != 3 || len(ms) != 4 {
			t.Errorf("fold %d: classes %q, metrics %v", i+1, m.Classes, ms)
		}
		if slices.Contains(f, 17) && MetricValue(ms, "error") == 0 {
			t.Errorf("fold %d holds the only row of class c, which its model never saw, yet has error 0", i+1)
		}
	}
}

func TestSummarize(t *testing.T) {
	per := [][]Metric{{{"a", 1}, {"b", math.NaN()}}, {{"a", 2}, {"b", 4}}, {{"a", 6}, {"b", 8}}}
	mean, std := Summarize(per)
	for _, tc := range []struct {
		got, want float64
		what      string
	}{
		{mean[0].Value, 3, "mean a"},
		{std[0].Value, math.Sqrt(7), "std a"}, // ((1−3)² + (2−3)² + (6−3)²) / 2 = 7
		{mean[1].Value, 6, "mean b (NaN fold left out)"},
		{std[1].Value, math.Sqrt(8), "std b"},
	} {
		if math.Abs(tc.got-tc.want) > 1e-12 {
			t.Errorf("%s = %v, want %v", tc.what, tc.got, tc.want)
		}
	}
}
