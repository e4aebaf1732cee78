package udf

import (
	"math"
	"slices"
	"strconv"
	"strings"
	"testing"

	"github.com/copse-dev/copse/forest"
)

// Learned blend weights through SQL: members train on rows i < 300 and copse_blend
// learns their weights on the other 100 (weights := 'fit', holdout := …). The stored
// weights equal forest.FitBlendWeights on the members' copse_score of those rows; the
// blend's loss there — out of fold for every member — is not above its best member's (the
// issue's acceptance check; Breiman 1996, "Stacked regressions"); bad holdouts are refused
// by name with the catalog left as it was.

// blFit has a numeric target y (linear in x and region plus one interaction the linear
// member misses), a class cls and a pure-noise column z, 400 rows; the noise terms are
// fixed hashes of the row number.
const blFit = `CREATE TABLE fitrows AS SELECT i, (i % 9) - 4 AS x, ['east', 'north', 'south'][i % 3 + 1] AS region,
	((i * 7919) % 1000) / 1000.0 AS z,
	2 * ((i % 9) - 4) + (i % 3) + CASE WHEN (i % 9) > 4 AND i % 3 = 0 THEN 4 ELSE 0 END
		+ ((i * 104729) % 997) / 997.0 - 0.5 AS y,
	CASE WHEN (i % 9) + (i % 3) + ((i * 31) % 5) > 8 THEN 'hi' WHEN (i % 9) < 3 THEN 'lo' ELSE 'mid' END AS cls
	FROM range(400) t(i)`

// blHoldout is the holdout query the tests fit on.
const blHoldout = "SELECT * FROM fitrows WHERE i >= 300"

// blMemberScores are each member's copse_score columns on the holdout, in row order, and
// the target: class index or value.
func blMemberScores(t *testing.T, h *Host, members []string, target string) ([][]float64, []float64) {
	t.Helper()
	m, _ := trModel(t, h, members[0])
	var preds [][]float64
	W := m.Width()
	for _, ref := range members {
		var cols [][]float64
		if m.Task == forest.Classification {
			for _, c := range m.Classes {
				cols = append(cols, queryFloats(t, h.db, "SELECT copse_score('"+ref+"', r, '"+c+"') FROM ("+blHoldout+") r ORDER BY i"))
			}
		} else {
			cols = append(cols, queryFloats(t, h.db, "SELECT copse_score('"+ref+"', r) FROM ("+blHoldout+") r ORDER BY i"))
		}
		p := make([]float64, len(cols[0])*W)
		for k, col := range cols {
			for r, v := range col {
				p[r*W+k] = v
			}
		}
		preds = append(preds, p)
	}
	var y []float64
	if m.Task == forest.Classification {
		for _, s := range queryStrings(t, h.db, "SELECT "+target+" FROM ("+blHoldout+") r ORDER BY i") {
			y = append(y, float64(slices.Index(m.Classes, s)))
		}
	} else {
		y = queryFloats(t, h.db, "SELECT "+target+" FROM ("+blHoldout+") r ORDER BY i")
	}
	return preds, y
}

func TestBlendSQLFit(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	mustExec(t, db, blFit)
	mustExec(t, db, "CREATE VIEW fittrain AS SELECT * FROM fitrows WHERE i < 300")
	bsTrain(t, db, "rf", "fittrain", "target := 'y', trees := 8, exclude := ['i', 'cls']")
	bsTrain(t, db, "rb", "fittrain", "target := 'y', method := 'boosting', trees := 30, exclude := ['i', 'cls']")
	bsTrain(t, db, "rl", "fittrain", "target := 'y', method := 'linear', exclude := ['i', 'cls']")
	bsTrain(t, db, "rz", "fittrain", "target := 'y', method := 'tree', max_depth := 2, exclude := ['i', 'cls', 'x', 'region']")
	bsTrain(t, db, "cf", "fittrain", "target := 'cls', trees := 8, exclude := ['i', 'y']")
	bsTrain(t, db, "cb", "fittrain", "target := 'cls', method := 'boosting', trees := 20, exclude := ['i', 'y']")
	bsTrain(t, db, "cl", "fittrain", "target := 'cls', method := 'tree', max_depth := 2, exclude := ['i', 'y', 'x']")
	for _, tc := range []struct {
		name, rule, target, metric string
		members                    []string
	}{
		{"fit_reg", "average", "y", "holdout_mse", []string{"rf", "rb", "rl", "rz"}},
		{"fit_cls", "average", "cls", "holdout_log_loss", []string{"cf", "cb", "cl"}},
		// 'vote' fits its weights on the averaged probabilities as well.
		{"fit_vote", "vote", "cls", "holdout_log_loss", []string{"cf", "cb", "cl"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			q := "SELECT * FROM copse_blend('" + tc.name + "', members := ['" + strings.Join(tc.members, "', '") +
				"'], rule := '" + tc.rule + "', weights := 'fit', holdout := '" + blHoldout + "')"
			got := trRows(t, db, q)
			if len(got) != 1 || got[0][2] != "blend" || got[0][9] != tc.metric {
				t.Fatalf("summary %v", got)
			}
			summaryLoss, err := strconv.ParseFloat(got[0][10], 64)
			if err != nil {
				t.Fatal(err)
			}
			// The engine's fit on the members' own copse_score of the holdout rows.
			preds, y := blMemberScores(t, h, tc.members, tc.target)
			m, e := trModel(t, h, tc.name)
			want, err := forest.FitBlendWeights(m.Task, m.Width(), preds, y, nil)
			if err != nil {
				t.Fatal(err)
			}
			weights := queryFloats(t, db, "SELECT weight FROM copse_members('"+tc.name+"')")
			sum := 0.0
			for j, w := range weights {
				if !(w >= 0) {
					t.Errorf("member %s has weight %v", tc.members[j], w)
				}
				sum += w
				if math.Abs(w-want.Weights[j]) > 1e-9 {
					t.Errorf("member %s: weight %v, the engine's fit %v", tc.members[j], w, want.Weights[j])
				}
			}
			if math.Abs(sum-1) > 1e-12 {
				t.Errorf("weights %v sum to %v", weights, sum)
			}
			if math.Abs(summaryLoss-want.Loss) > 1e-12*math.Max(1, want.Loss) {
				t.Errorf("summary loss %v, the engine's %v", summaryLoss, want.Loss)
			}
			// Out-of-fold: the blend's own scores on the holdout, against each member's.
			blendPred, _ := blMemberScores(t, h, []string{tc.name}, tc.target)
			one, err := forest.FitBlendWeights(m.Task, m.Width(), blendPred, y, nil)
			if err != nil {
				t.Fatal(err)
			}
			best := slices.Min(want.MemberLoss)
			if tc.rule == "average" {
				if one.MemberLoss[0] > best+1e-12 {
					t.Errorf("blend's holdout loss %v is above its best member's %v (members %v)", one.MemberLoss[0], best, want.MemberLoss)
				}
				if math.Abs(one.MemberLoss[0]-want.Loss) > 1e-9 {
					t.Errorf("blend's scored loss %v, the fit's %v", one.MemberLoss[0], want.Loss)
				}
			}
			t.Logf("%s: weights %v, holdout loss %v, members alone %v", tc.name, weights, want.Loss, want.MemberLoss)
			if !strings.Contains(e.Source, "weights fitted on 100 holdout rows") || !strings.Contains(e.Source, blHoldout) {
				t.Errorf("catalog source %q does not record the fit", e.Source)
			}
			if rule := queryStrings(t, db, "SELECT DISTINCT rule FROM copse_members('"+tc.name+"')"); !slices.Equal(rule, []string{tc.rule}) {
				t.Errorf("rule %v", rule)
			}
			// The blend keeps its fit record: copse_members and copse_models return it.
			if f := m.Blend.Fitted; f == nil || f.Rows != 100 {
				t.Fatalf("stored fit record %+v", f)
			}
			rows := trRows(t, db, "SELECT fit_metric, fit_rows, member_loss, blend_loss FROM copse_members('"+tc.name+"')")
			for j, r := range rows {
				ml, _ := strconv.ParseFloat(r[2], 64)
				bl, _ := strconv.ParseFloat(r[3], 64)
				if r[0] != tc.metric || r[1] != "100" || math.Abs(ml-want.MemberLoss[j]) > 1e-9*math.Max(1, ml) || bl != summaryLoss {
					t.Errorf("copse_members row %d: %v; want %s over 100 rows, member %v, blend %v", j, r, tc.metric, want.MemberLoss[j], summaryLoss)
				}
			}
			listed := trRows(t, db, "SELECT oob_metric, oob_value FROM copse_models() WHERE name = '"+tc.name+"'")
			if len(listed) != 1 || listed[0][0] != tc.metric || listed[0][1] != got[0][10] {
				t.Errorf("copse_models lists %v, copse_blend returned %v", listed, got[0][9:11])
			}
		})
	}
}

func TestBlendSQLFitBadInput(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	mustExec(t, db, blFit)
	mustExec(t, db, "CREATE VIEW fittrain AS SELECT * FROM fitrows WHERE i < 300")
	bsTrain(t, db, "rf", "fittrain", "target := 'y', trees := 3, exclude := ['i', 'cls']")
	bsTrain(t, db, "rl", "fittrain", "target := 'y', method := 'linear', exclude := ['i', 'cls', 'z']")
	bsTrain(t, db, "cf", "fittrain", "target := 'cls', trees := 3, exclude := ['i', 'y']")
	bsTrain(t, db, "cl", "fittrain", "target := 'cls', method := 'tree', max_depth := 2, exclude := ['i', 'y', 'x']")
	trRows(t, db, "SELECT * FROM copse_blend('bl', members := ['rf', 'rl'])")
	// Given weights have no fit record.
	if got := trRows(t, db, "SELECT fit_metric, fit_rows, member_loss, blend_loss FROM copse_members('bl')"); len(got) != 2 ||
		!slices.Equal(got[0], []string{"NULL", "NULL", "NULL", "NULL"}) {
		t.Errorf("copse_members of given weights: %v", got)
	}
	before := trCatalog(t, db)
	const reg = "SELECT * FROM copse_blend('bl', members := ['rf', 'rl'], weights := 'fit', holdout := "
	const cls = "SELECT * FROM copse_blend('bc', members := ['cf', 'cl'], weights := 'fit', holdout := "
	for _, tc := range []struct {
		q    string
		want []string
	}{
		{"SELECT * FROM copse_blend('bl', members := ['rf', 'rl'], weights := 'fit')", []string{"weights := 'fit' needs holdout := "}},
		{"SELECT * FROM copse_blend('bl', members := ['rf', 'rl'], holdout := 'fitrows')", []string{"holdout := ", "weights := 'fit'"}},
		{"SELECT * FROM copse_blend('bl', members := ['rf', 'rl'], rule := 'fit')", []string{"rule 'fit'", "weights := 'fit'"}},
		{reg + "'SELECT i, x, region, z FROM fitrows')", []string{`"bl"`, `no column "y"`, "target"}},
		{reg + "'SELECT * FROM fitrows WHERE i < 0')", []string{`"bl"`, "no rows with a y value"}},
		{reg + "'SELECT i, x, region, z, NULL::DOUBLE AS y FROM fitrows')", []string{"no rows with a y value"}},
		{reg + "'SELECT i, x, z, y FROM fitrows')", []string{`member "rf@1" cannot score`, "region"}},
		{reg + "'SELECT i, x, region, z, cls AS y FROM fitrows')", []string{`target column "y" is VARCHAR`}},
		{reg + "'no_such_table')", []string{`holdout "no_such_table"`, "no_such_table"}},
		{reg + "'')", []string{"weights := 'fit' needs holdout := "}},
		{cls + "'SELECT * REPLACE (''other'' AS cls) FROM fitrows')", []string{`"bc"`, "cls 'other' is not one of the members' classes"}},
	} {
		trWantErr(t, db, tc.q, tc.want...)
	}
	if got := trCatalog(t, db); got != before {
		t.Errorf("catalog changed:\n%s\nwant\n%s", got, before)
	}
}

// A numeric or BOOLEAN class target in the holdout is matched to the members' classes by
// value, as copse_train names them ("0", "1"; "false", "true").
func TestBlendSQLFitNumericClasses(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	mustExec(t, db, blFit)
	mustExec(t, db, "CREATE VIEW fitnum AS SELECT i, x, region, z, CASE WHEN cls = 'hi' THEN 1 ELSE 0 END AS k, cls = 'hi' AS b FROM fitrows")
	mustExec(t, db, "CREATE VIEW numtrain AS SELECT * FROM fitnum WHERE i < 300")
	for _, target := range []string{"k", "b"} {
		other := map[string]string{"k": "b", "b": "k"}[target]
		opts := "target := '" + target + "', task := 'classification', exclude := ['i', '" + other + "']"
		bsTrain(t, db, "f"+target, "numtrain", opts+", trees := 5")
		bsTrain(t, db, "l"+target, "numtrain", opts+", method := 'linear'")
		got := trRows(t, db, "SELECT * FROM copse_blend('b"+target+"', members := ['f"+target+"', 'l"+target+"'], weights := 'fit', holdout := 'SELECT * FROM fitnum WHERE i >= 300')")
		if len(got) != 1 || got[0][9] != "holdout_log_loss" {
			t.Fatalf("%s: summary %v", target, got)
		}
		m, _ := trModel(t, h, "b"+target)
		if f := m.Blend.Fitted; f == nil || f.Rows != 100 || f.Loss > slices.Min(f.MemberLoss)+1e-12 {
			t.Errorf("%s: fit record %+v", target, f)
		}
	}
}
