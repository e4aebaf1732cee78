package udf

import (
	"context"
	"database/sql"
	"math"
	"slices"
	"strconv"
	"testing"

	"github.com/copse-dev/copse/forest"
)

// TestRelationsImportance checks that copse_importance returns the model's importances,
// ranked, for both measures.
func TestRelationsImportance(t *testing.T) {
	h := openHost(t)
	models := trainGen(t, h, forest.MethodForest)
	for name, m := range models {
		for _, c := range []struct {
			method    string
			imp, std  []float64
			namedArgs string
		}{
			{"impurity", m.Importance.Impurity, nil, ""},
			{"impurity", m.Importance.Impurity, nil, ", method := 'impurity'"},
			{"permutation", m.Importance.Permutation, m.Importance.PermutationStd, ", method := 'permutation'"},
		} {
			rows, err := h.db.Query("SELECT feature, importance, std, rank FROM copse_importance(?"+c.namedArgs+")", name)
			if err != nil {
				t.Fatal(err)
			}
			seen := 0
			prev := math.Inf(1)
			for rows.Next() {
				var feature string
				var imp float64
				var std sql.NullFloat64
				var rank int64
				if err := rows.Scan(&feature, &imp, &std, &rank); err != nil {
					t.Fatal(err)
				}
				f := slices.IndexFunc(m.Features, func(fi forest.FeatureInfo) bool { return fi.Name == feature })
				if f < 0 || imp != c.imp[f] || rank != int64(seen+1) || imp > prev {
					t.Fatalf("%s %s: row %d = %s %v rank %d; want importance %v, rank %d, descending", name, c.method, seen, feature, imp, rank, c.imp, seen+1)
				}
				if c.std == nil && std.Valid || c.std != nil && (!std.Valid || std.Float64 != c.std[f]) {
					t.Fatalf("%s %s: %s std %v, want %v", name, c.method, feature, std, c.std)
				}
				prev = imp
				seen++
			}
			rows.Close()
			if seen != len(m.Features) {
				t.Fatalf("%s %s: %d rows for %d features", name, c.method, seen, len(m.Features))
			}
		}
	}
	wantErr(t, h.db, "FROM copse_importance('reg', method := 'gain')", "'gain'", "'impurity'", "'permutation'")
	wantErr(t, h.db, "FROM copse_importance('nope')", "copse_importance", "model not found", `"nope"`)
	genTable(t, h.db, "tree_rows", 300, 5, false)
	trainOn(t, h, "one_tree", "SELECT x1, x2, y_value FROM tree_rows", "y_value", smallParams(forest.MethodTree, 1))
	wantErr(t, h.db, "FROM copse_importance('one_tree', method := 'permutation')", `"one_tree"`, "no permutation importance", "single tree")
	if n := queryFloats(t, h.db, "SELECT count(*) FROM copse_importance('one_tree')"); n[0] != 2 {
		t.Fatalf("single tree impurity importance: %v rows", n)
	}
}

// TestRelationsCurve checks that copse_curve is the model's out-of-bag curve.
func TestRelationsCurve(t *testing.T) {
	h := openHost(t)
	models := trainGen(t, h, forest.MethodForest)
	for name, m := range models {
		got := queryFloats(t, h.db, "SELECT value FROM copse_curve(?) ORDER BY trees", name)
		sameBits(t, name, got, m.OOB.Curve)
		metric := queryStrings(t, h.db, "SELECT DISTINCT metric FROM copse_curve(?)", name)
		if len(metric) != 1 || metric[0] != m.OOB.CurveMetric {
			t.Fatalf("%s: metric %v, want %q", name, metric, m.OOB.CurveMetric)
		}
		trees := queryFloats(t, h.db, "SELECT max(trees) FROM copse_curve(?)", name)
		if trees[0] != float64(len(m.Trees)) {
			t.Fatalf("%s: %v trees", name, trees)
		}
	}
	genTable(t, h.db, "tree_rows", 300, 5, false)
	trainOn(t, h, "one_tree", "SELECT x1, x2, y_value FROM tree_rows", "y_value", smallParams(forest.MethodTree, 1))
	wantErr(t, h.db, "FROM copse_curve('one_tree')", `"one_tree"`, "out-of-bag")
	wantErr(t, h.db, "FROM copse_oob('one_tree')", `"one_tree"`, "out-of-bag")
}

// TestRelationsOOB checks copse_oob's rows against the model's out-of-bag results, with
// row numbers and with stored keys.
func TestRelationsOOB(t *testing.T) {
	h := openHost(t)
	models := trainGen(t, h, forest.MethodForest)
	// Regression: key = row number.
	m := models["reg"]
	rows, err := h.db.Query("SELECT key, actual, value, trees_voting FROM copse_oob('reg')")
	if err != nil {
		t.Fatal(err)
	}
	i := 0
	for rows.Next() {
		var key int64
		var actual, value sql.NullFloat64
		var votes int64
		if err := rows.Scan(&key, &actual, &value, &votes); err != nil {
			t.Fatal(err)
		}
		want := m.OOB.Value[i]
		if key != int64(i+1) || actual.Valid || votes != int64(m.OOB.Votes[i]) || value.Valid == math.IsNaN(want) || value.Valid && value.Float64 != want {
			t.Fatalf("row %d: key %d actual %v value %v votes %d; want value %v votes %d", i, key, actual, value, votes, want, m.OOB.Votes[i])
		}
		i++
	}
	rows.Close()
	if i != len(m.OOB.Votes) {
		t.Fatalf("%d rows, want %d", i, len(m.OOB.Votes))
	}
	// Classification with keys: binary gives the positive class's probability,
	// multiclass the predicted class's.
	for _, name := range []string{"bin", "multi"} {
		m := models[name]
		keys := make([]string, len(m.OOB.Votes))
		for i := range keys {
			keys[i] = "k" + strconv.Itoa(i)
		}
		if _, err := h.saveModel(context.Background(), name+"_keyed", m, "test", keys, nil, nil, nil); err != nil {
			t.Fatal(err)
		}
		rows, err := h.db.Query("SELECT key, actual, predicted, probability, trees_voting FROM copse_oob(?)", name+"_keyed")
		if err != nil {
			t.Fatal(err)
		}
		W := m.Width()
		i := 0
		for rows.Next() {
			var key string
			var actual, predicted sql.NullString
			var prob sql.NullFloat64
			var votes int64
			if err := rows.Scan(&key, &actual, &predicted, &prob, &votes); err != nil {
				t.Fatal(err)
			}
			pred := m.OOB.Value[i*W : (i+1)*W]
			k := forest.Class(pred)
			wantP := pred[k]
			if W == 2 {
				wantP = pred[1]
			}
			if votes == 0 {
				if predicted.Valid || prob.Valid {
					t.Fatalf("%s row %d: no votes but a prediction", name, i)
				}
			} else if predicted.String != m.Classes[k] || prob.Float64 != wantP {
				t.Fatalf("%s row %d: %v %v, want %s %v", name, i, predicted, prob, m.Classes[k], wantP)
			}
			if key != keys[i] || actual.Valid || votes != int64(m.OOB.Votes[i]) {
				t.Fatalf("%s row %d: key %q actual %v votes %d", name, i, key, actual, votes)
			}
			i++
		}
		rows.Close()
		if i != len(keys) {
			t.Fatalf("%s: %d rows, want %d", name, i, len(keys))
		}
	}
}

// copse_curve for AdaBoost: per round the tree's weighted error and its α, equal to the
// stored record bit for bit, and α following SAMME's formula α = ν·(ln((1−ε)/ε) +
// ln(K−1)) (Zhu, Zou, Rosset & Hastie 2009) from the returned ε.
func TestRelationsCurveAdaBoost(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	mustExec(t, db, "CREATE TABLE iris AS SELECT * FROM read_csv('../testdata/iris.csv')")
	bsTrain(t, db, "ada", "iris", "target := 'species', method := 'adaboost', trees := 12, max_depth := 1, learning_rate := 0.5")
	m, _ := trModel(t, h, "ada")
	a := m.AdaBoost
	if a == nil || len(a.Alpha) < 2 {
		t.Fatalf("adaboost record %+v", a)
	}
	errs := queryFloats(t, db, "SELECT value FROM copse_curve('ada') WHERE metric = 'weighted_error' ORDER BY trees")
	alphas := queryFloats(t, db, "SELECT value FROM copse_curve('ada') WHERE metric = 'alpha' ORDER BY trees")
	sameBits(t, "weighted_error", errs, a.Error)
	sameBits(t, "alpha", alphas, a.Alpha)
	rounds := queryFloats(t, db, "SELECT DISTINCT trees FROM copse_curve('ada') ORDER BY trees")
	for r, v := range rounds {
		if v != float64(r+1) {
			t.Fatalf("rounds %v", rounds)
		}
	}
	if len(rounds) != len(m.Trees) {
		t.Errorf("%d rounds for %d trees", len(rounds), len(m.Trees))
	}
	K := float64(len(m.Classes))
	for r, e := range errs {
		want := 0.5 * (math.Log((1-e)/e) + math.Log(K-1))
		if math.Abs(alphas[r]-want) > 1e-12*math.Max(1, want) {
			t.Errorf("round %d: α %v, SAMME's formula gives %v for ε %v", r+1, alphas[r], want, e)
		}
	}
	if got := queryStrings(t, db, "SELECT metric FROM copse_curve('ada') WHERE trees = 1"); !slices.Equal(got, []string{curveWeightedError, curveAlpha}) {
		t.Errorf("round 1 metrics %v", got)
	}
}
