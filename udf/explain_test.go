package udf

import (
	"database/sql"
	"fmt"
	"math"
	"slices"
	"strings"
	"testing"

	"github.com/copse-dev/copse/forest"
)

// exRow is one row of copse_explain.
type exRow struct {
	key          string
	output       string // "" for NULL
	feature      string // "" for NULL (the baseline)
	value        string // "<NULL>" for NULL
	contribution float64
	space        string
}

// exQuery runs a copse_explain query and returns its rows in result order.
func exQuery(t testing.TB, db *sql.DB, q string) []exRow {
	t.Helper()
	rows, err := db.Query(q)
	if err != nil {
		t.Fatalf("%s: %v", q, err)
	}
	defer rows.Close()
	var out []exRow
	for rows.Next() {
		var key any
		var output, feature, value sql.NullString
		var r exRow
		if err := rows.Scan(&key, &output, &feature, &value, &r.contribution, &r.space); err != nil {
			t.Fatal(err)
		}
		r.key, r.output, r.feature, r.value = fmt.Sprint(key), output.String, feature.String, value.String
		if !value.Valid {
			r.value = "<NULL>"
		}
		out = append(out, r)
	}
	if err := rows.Err(); err != nil {
		t.Fatalf("%s: %v", q, err)
	}
	return out
}

// exTable makes the test rows: genTable's made-up rows (numeric, VARCHAR, BOOLEAN and
// DATE features with NULLs) plus a count target for the Poisson loss and a text key.
func exTable(t testing.TB, db *sql.DB) {
	t.Helper()
	genTable(t, db, "gen0", 300, 1, false)
	mustExec(t, db, "CREATE TABLE gen AS SELECT *, greatest(0, floor(y_value))::DOUBLE AS y_count, 'k' || id AS tag FROM gen0 ORDER BY id")
}

// exFeatures is the feature list every test model trains on.
const exFeatures = "x1, x2, colour, flag, day"

// exModels trains one model of every kind on the test rows and returns each one's
// training options by name.
func exModels(t testing.TB, db *sql.DB) {
	t.Helper()
	for _, m := range []struct{ name, target, opts string }{
		{"f_bin", "y_binary", "trees := 8, max_depth := 5"},
		{"f_multi", "y_class", "trees := 8, max_depth := 5"},
		{"f_reg", "y_value", "trees := 8, max_depth := 6"},
		{"t_reg", "y_value", "method := 'tree', max_depth := 5"},
		{"bag", "y_binary", "method := 'bagging', trees := 6, max_depth := 4"},
		{"b_log", "y_binary", "method := 'boosting', loss := 'logistic', trees := 15, max_depth := 3"},
		{"b_multi", "y_class", "method := 'boosting', loss := 'multinomial', trees := 8, max_depth := 3"},
		{"b_sq", "y_value", "method := 'boosting', trees := 15, max_depth := 3"},
		{"b_pois", "y_count", "method := 'boosting', loss := 'poisson', trees := 15, max_depth := 3"},
		{"ada", "y_class", "method := 'adaboost', trees := 6, max_depth := 2"},
		{"lin", "y_value", "method := 'linear'"},
		{"lin_log", "y_binary", "method := 'linear'"},
	} {
		bsTrain(t, db, m.name, "SELECT "+exFeatures+", "+m.target+" FROM gen", "target := '"+m.target+"', seed := 7, "+m.opts)
	}
	trRows(t, db, "FROM copse_blend('blend', members := ['f_reg', 'b_sq', 'lin'], weights := '2, 1, 1')")
	trRows(t, db, "FROM copse_blend('blend_cls', members := ['f_bin', 'bag'])")
}

// exScores returns copse_score of every row of gen (by id) for each output: the class
// names of a classification model, "" for a value.
func exScores(t testing.TB, db *sql.DB, m *forest.Model, name string) map[string][]float64 {
	t.Helper()
	out := map[string][]float64{}
	if m.Task != forest.Classification {
		out[""] = queryFloats(t, db, "SELECT copse_score('"+name+"', g) FROM gen g ORDER BY id")
		return out
	}
	for _, c := range m.Classes {
		out[c] = queryFloats(t, db, "SELECT copse_score('"+name+"', g, '"+c+"') FROM gen g ORDER BY id")
	}
	return out
}

// Additivity, the property that defines an explanation (Lundberg & Lee 2017, "local
// accuracy"): for every row of every model kind, baseline + Σ contributions equals
// copse_score in the model's space — directly for probabilities and values, through the
// link for margins (logistic, softmax, exp). The rows come in source order, baseline
// first, then features by |contribution|; the baseline is the same for every row; and
// the contributions are the engine's own, bit for bit.
func TestExplainAdditivity(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	exTable(t, db)
	exModels(t, db)
	for _, c := range []struct {
		name    string
		space   forest.Space
		outputs []string // shown outputs, "" for NULL
	}{
		{"f_bin", forest.SpaceProbability, []string{"on time"}},
		{"f_multi", forest.SpaceProbability, []string{"high", "low", "mid"}},
		{"f_reg", forest.SpaceValue, []string{""}},
		{"t_reg", forest.SpaceValue, []string{""}},
		{"bag", forest.SpaceProbability, []string{"on time"}},
		{"b_log", forest.SpaceMargin, []string{"on time"}},
		{"b_multi", forest.SpaceMargin, []string{"high", "low", "mid"}},
		{"b_sq", forest.SpaceValue, []string{""}},
		{"b_pois", forest.SpaceMargin, []string{""}},
		{"ada", forest.SpaceProbability, []string{"high", "low", "mid"}},
		{"lin", forest.SpaceValue, []string{""}},
		{"lin_log", forest.SpaceMargin, []string{"on time"}},
		{"blend", forest.SpaceValue, []string{""}},
		{"blend_cls", forest.SpaceProbability, []string{"on time"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			m, _ := trModel(t, h, c.name)
			F := len(m.Features)
			rows := exQuery(t, db, "SELECT * FROM copse_explain('"+c.name+"', 'gen', key := 'id')")
			per := len(c.outputs) * (F + 1)
			if len(rows) != 300*per {
				t.Fatalf("%d rows, want %d", len(rows), 300*per)
			}
			scores := exScores(t, db, m, c.name)
			cols := engineCols(t, db, m, "SELECT * FROM gen ORDER BY id")
			_, outputs, err := m.ExplainSpace()
			if err != nil {
				t.Fatal(err)
			}
			var e forest.Explanation
			row := make([]float64, F)
			baseline := map[string]float64{}
			for i := range 300 {
				for f := range F {
					row[f] = cols[f][i]
				}
				if err := m.Explain(row, &e); err != nil {
					t.Fatal(err)
				}
				total := map[string]float64{}
				for s, o := range c.outputs {
					block := rows[i*per+s*(F+1) : i*per+(s+1)*(F+1)]
					k := slices.Index(outputs, o)
					if o == "" {
						k = 0
					}
					b := block[0]
					if b.key != fmt.Sprint(i) || b.output != o || b.feature != "" || b.value != "<NULL>" || b.space != string(c.space) {
						t.Fatalf("row %d output %q: baseline row %+v", i, o, b)
					}
					if v, seen := baseline[o]; seen && v != b.contribution {
						t.Fatalf("row %d: baseline %v, row 0's %v", i, b.contribution, v)
					}
					baseline[o] = b.contribution
					sum := b.contribution
					want := e.Output(k)
					for j, r := range block[1:] {
						f := slices.IndexFunc(m.Features, func(fi forest.FeatureInfo) bool { return fi.Name == r.feature })
						if f < 0 || r.key != b.key || r.output != o || r.space != b.space {
							t.Fatalf("row %d: %+v", i, r)
						}
						if math.Float64bits(r.contribution) != math.Float64bits(want[f]) {
							t.Fatalf("row %d %s: contribution %v, the engine's %v", i, r.feature, r.contribution, want[f])
						}
						if j > 0 && math.Abs(r.contribution) > math.Abs(block[j].contribution) {
							t.Fatalf("row %d: %s after a smaller contribution", i, r.feature)
						}
						sum += r.contribution
					}
					total[o] = sum
				}
				for o, sum := range total {
					got := sum
					switch {
					case c.space != forest.SpaceMargin:
					case m.Task == forest.Regression: // Poisson: log of the mean
						got = math.Exp(sum)
					case len(c.outputs) == 1: // logistic: log-odds of the positive class
						got = 1 / (1 + math.Exp(-sum))
					default: // multinomial: softmax over the class scores
						den := 0.0
						for _, v := range total {
							den += math.Exp(v)
						}
						got = math.Exp(sum) / den
					}
					want := scores[o][i]
					if math.Abs(got-want) > 1e-9*math.Max(1, math.Abs(want)) {
						t.Fatalf("row %d output %q: baseline + Σ contributions gives %v, copse_score %v", i, o, got, want)
					}
				}
			}
		})
	}
}

// The value column shows each input as the source holds it: levels and numbers as text,
// BOOLEAN as true/false, DATE as a date, NULL for missing; a text key stays text.
func TestExplainValues(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	exTable(t, db)
	bsTrain(t, db, "m", "SELECT "+exFeatures+", y_value FROM gen", "target := 'y_value', trees := 3")
	want := trRows(t, db, `SELECT tag, f, v FROM (
		SELECT tag, id, 'x1' AS f, x1::VARCHAR AS v FROM gen UNION ALL
		SELECT tag, id, 'x2', x2::VARCHAR FROM gen UNION ALL
		SELECT tag, id, 'colour', colour FROM gen UNION ALL
		SELECT tag, id, 'flag', flag::VARCHAR FROM gen UNION ALL
		SELECT tag, id, 'day', day::VARCHAR FROM gen) ORDER BY id, f`)
	got := trRows(t, db, `SELECT key, feature, value FROM copse_explain('m', 'SELECT * FROM gen WHERE id < 1000', key := 'tag')
		WHERE feature IS NOT NULL ORDER BY substr(key, 2)::INTEGER, feature`)
	if len(got) != len(want) || len(got) != 5*300 {
		t.Fatalf("%d value rows, want %d", len(got), len(want))
	}
	for i := range got {
		if !slices.Equal(got[i], want[i]) {
			t.Fatalf("row %d: %v, want %v (DuckDB's text of the input)", i, got[i], want[i])
		}
	}
	if types := trRows(t, db, "SELECT DISTINCT typeof(key) FROM copse_explain('m', 'gen', key := 'tag')"); len(types) != 1 || types[0][0] != "VARCHAR" {
		t.Errorf("text key typed %v", types)
	}
	if types := trRows(t, db, "SELECT DISTINCT typeof(key) FROM copse_explain('m', 'gen', key := 'id')"); len(types) != 1 || types[0][0] != "BIGINT" {
		t.Errorf("integer key typed %v", types)
	}
}

// top := k keeps the k largest |contribution| of each key and output, after the
// baseline, in the full explanation's order; the threads never change the result.
func TestExplainTop(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	exTable(t, db)
	bsTrain(t, db, "multi", "SELECT "+exFeatures+", y_class FROM gen", "target := 'y_class', trees := 6, seed := 3")
	full := exQuery(t, db, "SELECT * FROM copse_explain('multi', 'gen', key := 'id', threads := 1)")
	for _, threads := range []int{2, 5} {
		again := exQuery(t, db, fmt.Sprintf("SELECT * FROM copse_explain('multi', 'gen', key := 'id', threads := %d)", threads))
		if !slices.Equal(again, full) {
			t.Fatalf("threads := %d changed the result", threads)
		}
	}
	for _, k := range []int{1, 2, 5, 9} {
		top := exQuery(t, db, fmt.Sprintf("SELECT * FROM copse_explain('multi', 'gen', key := 'id', top := %d)", k))
		var want []exRow
		for i := 0; i < len(full); i += 6 { // baseline + 5 features per key and output
			want = append(want, full[i:i+1+min(k, 5)]...)
		}
		if !slices.Equal(top, want) {
			t.Fatalf("top := %d: %d rows, want the first %d of each block (%d rows)", k, len(top), min(k, 5), len(want))
		}
	}
}

// copse_reasons: the features that push a row most toward the named outcome, rank 1
// first: the positive contributions to that class's output (the negated log-odds for
// the other class of a two-class margin model), or for a value the positive ('high') or
// negative ('low') ones, at most top of them.
func TestExplainReasons(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	exTable(t, db)
	for _, m := range []struct{ name, target, opts string }{
		{"f_multi", "y_class", "trees := 6"},
		{"b_log", "y_binary", "method := 'boosting', trees := 10"},
		{"f_reg", "y_value", "trees := 6"},
	} {
		bsTrain(t, db, m.name, "SELECT "+exFeatures+", "+m.target+" FROM gen", "target := '"+m.target+"', seed := 5, "+m.opts)
	}
	for _, c := range []struct {
		model, toward, output string
		top                   int
		sign                  float64
	}{
		{"f_multi", "low", "low", 4, 1},
		{"f_multi", "mid", "mid", 2, 1},
		{"b_log", "on time", "on time", 3, 1},
		{"b_log", "late", "on time", 4, -1},
		{"f_reg", "high", "", 4, 1},
		{"f_reg", "LOW", "", 5, -1},
	} {
		full := exQuery(t, db, "SELECT * FROM copse_explain('"+c.model+"', 'gen', key := 'id')")
		want := map[string][][]string{}
		for _, r := range full {
			if r.feature == "" || r.output != c.output || !(c.sign*r.contribution > 0) {
				continue
			}
			v := r.contribution
			if c.output != "" {
				v *= c.sign // a class's own contribution
			}
			want[r.key] = append(want[r.key], []string{r.feature, r.value, fmt.Sprint(v)})
		}
		q := fmt.Sprintf("SELECT key, rank, feature, value, contribution FROM copse_reasons('%s', 'gen', toward := '%s', top := %d, key := 'id')",
			c.model, c.toward, c.top)
		got := trRows(t, db, q)
		n := 0
		for _, w := range want {
			n += min(c.top, len(w))
		}
		if len(got) != n {
			t.Fatalf("%s: %d rows, want %d", q, len(got), n)
		}
		prevKey, rank := "", 0
		for _, r := range got {
			if r[0] != prevKey {
				prevKey, rank = r[0], 0
			}
			rank++
			w := want[r[0]][rank-1]
			if r[1] != fmt.Sprint(rank) || r[2] != w[0] || r[3] != strings.ReplaceAll(w[1], "<NULL>", "NULL") || r[4] != w[2] {
				t.Fatalf("%s: key %s rank %d: %v, want %v", q, r[0], rank, r[1:], w)
			}
		}
	}
	// The default top is 4.
	if got := trRows(t, db, "SELECT max(rank) FROM copse_reasons('f_reg', 'gen', toward := 'high', key := 'id')"); got[0][0] != "4" {
		t.Errorf("default top: max rank %v", got)
	}
}

// copse_dependence equals the engine's partial dependence (Friedman 2001, §8.2) on the
// same rows and grid, average and individual curves alike, for a numeric and a
// categorical feature.
func TestExplainDependence(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	exTable(t, db)
	bsTrain(t, db, "multi", "SELECT "+exFeatures+", y_class FROM gen", "target := 'y_class', trees := 6, seed := 3")
	bsTrain(t, db, "reg", "SELECT "+exFeatures+", y_value FROM gen", "target := 'y_value', trees := 6, seed := 3")
	for _, c := range []struct {
		model, feature string
		points         int
	}{
		{"reg", "x1", 7},
		{"reg", "colour", 20},
		{"multi", "x2", 5},
		{"multi", "DAY", 3},
	} {
		m, _ := trModel(t, h, c.model)
		f := slices.IndexFunc(m.Features, func(fi forest.FeatureInfo) bool { return strings.EqualFold(fi.Name, c.feature) })
		grid, err := m.DependenceGrid(f, c.points)
		if err != nil {
			t.Fatal(err)
		}
		cols := engineCols(t, db, m, "SELECT * FROM gen ORDER BY id")
		W, G, n := m.Width(), len(grid), len(cols[0])
		mean, curves := make([]float64, G*W), make([]float64, n*G*W)
		if err := m.Dependence(cols, f, grid, mean, curves, 1); err != nil {
			t.Fatal(err)
		}
		outputs := []string{""}
		if m.Task == forest.Classification {
			outputs = m.Classes
		}
		text := func(g int) string {
			if m.Features[f].Kind == forest.Categorical {
				return m.Features[f].Levels[int(grid[g])]
			}
			return numberLabel(grid[g], false)
		}
		q := fmt.Sprintf("SELECT point, feature_value, coalesce(output, ''), average_prediction FROM copse_dependence('%s', 'gen', '%s', points := %d)", c.model, c.feature, c.points)
		got := trRows(t, db, q)
		if len(got) != G*len(outputs) {
			t.Fatalf("%s: %d rows, want %d", q, len(got), G*len(outputs))
		}
		for r, row := range got {
			g, k := r/len(outputs), r%len(outputs)
			want := []string{fmt.Sprint(g + 1), text(g), outputs[k], fmt.Sprint(mean[g*W+k])}
			if !slices.Equal(row, want) {
				t.Fatalf("%s: row %d: %v, want %v", q, r, row, want)
			}
		}
		q = fmt.Sprintf("SELECT key, point, prediction, average_prediction FROM copse_dependence('%s', 'gen', '%s', points := %d, individual := true, key := 'id', threads := 2)",
			c.model, c.feature, c.points)
		ind := trRows(t, db, q)
		if len(ind) != n*G*len(outputs) {
			t.Fatalf("%s: %d rows, want %d", q, len(ind), n*G*len(outputs))
		}
		for r, row := range ind {
			i, g, k := r/(G*len(outputs)), (r/len(outputs))%G, r%len(outputs)
			want := []string{fmt.Sprint(i), fmt.Sprint(g + 1), fmt.Sprint(curves[(i*G+g)*W+k]), fmt.Sprint(mean[g*W+k])}
			if !slices.Equal(row, want) {
				t.Fatalf("%s: row %d: %v, want %v", q, r, row, want)
			}
		}
	}
}

// Bad input names the model, option, feature or column at fault and leaves the catalog
// as it was.
func TestExplainBadInput(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	exTable(t, db)
	bsTrain(t, db, "cls", "SELECT "+exFeatures+", y_binary FROM gen", "target := 'y_binary', trees := 3")
	bsTrain(t, db, "reg", "SELECT "+exFeatures+", y_value FROM gen", "target := 'y_value', trees := 3")
	trRows(t, db, "FROM copse_blend('vote', members := ['cls', 'cls'], rule := 'vote')")
	for _, c := range []struct {
		q    string
		want []string
	}{
		{"FROM copse_explain('nope', 'gen', key := 'id')", []string{"copse_explain", "model not found", `"nope"`}},
		{"FROM copse_reasons('nope', 'gen', toward := 'late', key := 'id')", []string{"copse_reasons", `"nope"`}},
		{"FROM copse_dependence('nope', 'gen', 'x1')", []string{"copse_dependence", `"nope"`}},
		{"FROM copse_explain('cls', 'gen', key := 'nope')", []string{"copse_explain", `key "nope"`, "no such column", `"tag"`}},
		{"FROM copse_explain('cls', 'gen', key := 'x1')", []string{"copse_explain", `key "x1"`, "also a feature"}},
		{"FROM copse_explain('cls', 'gen', key := 'id', top := 0)", []string{"copse_explain", "top := 0", "whole number"}},
		{"FROM copse_explain('cls', 'gen', key := 'id', top := 2.5)", []string{"copse_explain", "top := 2.5"}},
		{"FROM copse_explain('cls', 'gen', key := 'id', threads := 0)", []string{"copse_explain", "threads := 0"}},
		{"FROM copse_explain('cls', 'SELECT id, x1 FROM gen', key := 'id')", []string{"copse_explain", `feature "x2"`, "lacks"}},
		{"FROM copse_explain('cls', 'SELECT id, x1, x2, colour::INTEGER AS colour, flag, day FROM gen WHERE colour IS NULL', key := 'id')",
			[]string{"copse_explain", `feature "colour" is categorical`, "cast it to VARCHAR"}},
		{"FROM copse_explain('cls', 'SELECT id, x1::VARCHAR AS x1, x2, colour, flag, day FROM gen', key := 'id')",
			[]string{"copse_explain", `feature "x1" is numeric`}},
		{"FROM copse_explain('cls', 'no_such_table', key := 'id')", []string{"copse_explain", `source "no_such_table"`, "committed data only"}},
		{"FROM copse_explain('vote', 'gen', key := 'id')", []string{"copse_explain", `"vote"`, "only rule \"average\""}},
		{"FROM copse_reasons('cls', 'gen', toward := 'early', key := 'id')", []string{"copse_reasons", "toward := 'early'", "'late', 'on time'"}},
		{"FROM copse_reasons('cls', 'gen', key := 'id')", []string{"copse_reasons", "toward := is required", "'late', 'on time'"}},
		{"FROM copse_reasons('reg', 'gen', toward := 'late', key := 'id')", []string{"copse_reasons", "toward := 'late'", "'high' or 'low'"}},
		{"FROM copse_reasons('reg', 'gen', toward := 'high', key := 'id', top := -1)", []string{"copse_reasons", "top := -1"}},
		{"FROM copse_dependence('reg', 'gen', 'nope')", []string{"copse_dependence", `no feature "nope"`, `"x1"`}},
		{"FROM copse_dependence('reg', 'gen', 'x1', points := 0)", []string{"copse_dependence", "points := 0"}},
		{"FROM copse_dependence('reg', 'SELECT * FROM gen WHERE false', 'x1')", []string{"copse_dependence", "no rows"}},
	} {
		trWantErr(t, db, c.q, c.want...)
	}
}

// An empty source explains nothing, without error.
func TestExplainEmptySource(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	exTable(t, db)
	bsTrain(t, db, "reg", "SELECT "+exFeatures+", y_value FROM gen", "target := 'y_value', trees := 3")
	for _, q := range []string{
		"SELECT count(*) FROM copse_explain('reg', 'SELECT * FROM gen WHERE id < 0', key := 'id')",
		"SELECT count(*) FROM copse_reasons('reg', 'SELECT * FROM gen WHERE id < 0', key := 'id', toward := 'high')",
	} {
		if got := trRows(t, db, q); got[0][0] != "0" {
			t.Errorf("%s: %v", q, got)
		}
	}
}

// BenchmarkExplain measures copse_explain's rows per second on a forest of 100 trees of
// depth ≤ 12 (the speed figure: Tree SHAP costs O(T·L·D²) per row).
func BenchmarkExplain(b *testing.B) {
	h := openHost(b)
	db := h.DB()
	genTable(b, db, "gen", 2000, 1, false)
	bsTrain(b, db, "big", "SELECT x1, x2, colour, flag, day, small_int, y_value FROM gen", "target := 'y_value', trees := 100, max_depth := 12")
	const rows = 200 // explained per call; the forest grows about 800 leaves per tree
	b.ResetTimer()
	for range b.N {
		trRows(b, db, fmt.Sprintf("SELECT count(*) FROM copse_explain('big', 'SELECT * FROM gen ORDER BY id LIMIT %d', key := 'id', threads := 2)", rows))
	}
	b.ReportMetric(float64(rows*b.N)/b.Elapsed().Seconds(), "rows/s")
}

// Without key :=, rows are keyed by their position in the source: the same rows as
// with key := 'id' once each id is replaced by its row's position (gen is stored in id
// order), for explanations, reasons and individual curves.
func TestExplainSQLPositionKey(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	exTable(t, db)
	bsTrain(t, db, "cls", "SELECT "+exFeatures+", y_binary FROM gen", "target := 'y_binary', trees := 3")
	bsTrain(t, db, "reg", "SELECT "+exFeatures+", y_value FROM gen", "target := 'y_value', trees := 3")
	pos := "(SELECT id, row_number() OVER (ORDER BY id) AS k FROM gen) p"
	for _, q := range [][2]string{
		{"SELECT key, output, feature, contribution FROM copse_explain('cls', 'gen')",
			"SELECT p.k, e.output, e.feature, e.contribution FROM copse_explain('cls', 'gen', key := 'id') e JOIN " + pos + " ON p.id = e.key"},
		{"SELECT key, rank, feature, contribution FROM copse_reasons('reg', 'gen', toward := 'high')",
			"SELECT p.k, e.rank, e.feature, e.contribution FROM copse_reasons('reg', 'gen', toward := 'high', key := 'id') e JOIN " + pos + " ON p.id = e.key"},
		{"SELECT key, point, prediction FROM copse_dependence('reg', 'gen', 'x1', individual := true)",
			"SELECT p.k, e.point, e.prediction FROM copse_dependence('reg', 'gen', 'x1', individual := true, key := 'id') e JOIN " + pos + " ON p.id = e.key"},
	} {
		n := trRows(t, db, "SELECT count(*) FROM ("+q[0]+")")
		diff := trRows(t, db, "SELECT count(*) FROM (("+q[0]+") EXCEPT ALL ("+q[1]+")) UNION ALL SELECT count(*) FROM (("+q[1]+") EXCEPT ALL ("+q[0]+"))")
		if n[0][0] == "0" || diff[0][0] != "0" || diff[1][0] != "0" {
			t.Errorf("%s: %s rows, %v differ from the key := 'id' rows", q[0], n[0][0], diff)
		}
	}
}
