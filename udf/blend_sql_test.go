package udf

import (
	"math"
	"slices"
	"testing"

	"github.com/copse-dev/copse/forest"
)

// Blends through SQL: copse_blend stores forest.NewBlend's model as a new version;
// copse_score equals the engine's prediction bit for bit and the weighted average of the
// members' copse_score within 1e-12; copse_members lists members and weights; bad input
// is refused by name with the catalog left as it was; a blend keeps scoring after a
// member is dropped.

const blMix = `CREATE TABLE mix AS SELECT i, CASE WHEN i % 5 = 0 THEN NULL ELSE (i % 7) - 3 END AS x,
	['east', 'north', 'south'][i % 3 + 1] AS region, ((i * 13) % 11) / 10.0 AS z,
	1 + 2 * coalesce((i % 7) - 3, 0) + (i % 3) + 0.1 * ((i * 7) % 5) AS y,
	CASE WHEN (i % 7) + (i % 3) > 4 THEN 'hi' ELSE 'lo' END AS cls FROM range(120) t(i)`

func TestBlendSQLAverage(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	mustExec(t, db, blMix)
	bsTrain(t, db, "fo", "mix", "target := 'y', trees := 5, exclude := ['i', 'cls']")
	bsTrain(t, db, "bo", "mix", "target := 'y', method := 'boosting', trees := 10, exclude := ['i', 'cls']")
	bsTrain(t, db, "bo", "mix", "target := 'y', method := 'boosting', trees := 20, exclude := ['i', 'cls']")
	bsTrain(t, db, "lm", "mix", "target := 'y', method := 'linear', exclude := ['i', 'cls', 'z']")
	got := trRows(t, db, "SELECT * FROM copse_blend('bl', members := ['fo', 'bo@1', 'lm'], weights := '5, 3, 2')")
	if len(got) != 1 || got[0][0] != "bl" || got[0][1] != "1" || got[0][2] != "blend" || got[0][3] != "regression" || got[0][4] != "y" {
		t.Fatalf("copse_blend summary %v", got)
	}
	m, _ := trModel(t, h, "bl")
	if m.Blend == nil || m.Blend.Rule != forest.BlendAverage {
		t.Fatalf("stored model is %s", m.Method)
	}
	members := trRows(t, db, "SELECT member, weight, rule FROM copse_members('bl')")
	want := [][]string{{"fo@1", "0.5", "average"}, {"bo@1", "0.3", "average"}, {"lm@1", "0.2", "average"}}
	if len(members) != 3 {
		t.Fatalf("copse_members: %v", members)
	}
	for j, r := range members {
		if !slices.Equal(r, want[j]) {
			t.Errorf("copse_members row %d: %v, want %v", j, r, want[j])
		}
	}
	engine := enginePredict(t, db, m, "SELECT * FROM mix ORDER BY i")
	score := queryFloats(t, db, "SELECT copse_score('bl', m) FROM mix m ORDER BY i")
	sameBits(t, "copse_score", score, engine)
	sameBits(t, "copse_predict", queryFloats(t, db, "SELECT prediction FROM copse_predict('bl', 'mix') ORDER BY i"), engine)
	fo := queryFloats(t, db, "SELECT copse_score('fo', m) FROM mix m ORDER BY i")
	bo := queryFloats(t, db, "SELECT copse_score('bo@1', m) FROM mix m ORDER BY i")
	lm := queryFloats(t, db, "SELECT copse_score('lm', m) FROM mix m ORDER BY i")
	for i := range score {
		avg := 0.5*fo[i] + 0.3*bo[i] + 0.2*lm[i]
		if math.Abs(score[i]-avg) > 1e-12*math.Max(1, math.Abs(avg)) {
			t.Fatalf("row %d: blend %v, weighted average of members %v", i, score[i], avg)
		}
	}
	if n := len(trRows(t, db, "SELECT * FROM copse_models() WHERE name = 'bl' AND method = 'blend'")); n != 1 {
		t.Errorf("copse_models lists the blend %d times", n)
	}
	// The members live inside the blend: dropping one leaves it scoring the same.
	trRows(t, db, "SELECT * FROM copse_drop('fo')")
	h.cache = modelCache{}
	sameBits(t, "copse_score after dropping a member", queryFloats(t, db, "SELECT copse_score('bl', m) FROM mix m ORDER BY i"), engine)
}

func TestBlendSQLVote(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	mustExec(t, db, blMix)
	bsTrain(t, db, "fc", "mix", "target := 'cls', trees := 5, exclude := ['i', 'y']")
	bsTrain(t, db, "tc", "mix", "target := 'cls', method := 'tree', max_depth := 2, exclude := ['i', 'y']")
	bsTrain(t, db, "lc", "mix", "target := 'cls', method := 'linear', exclude := ['i', 'y']")
	trRows(t, db, "SELECT * FROM copse_blend('cv', members := ['fc', 'tc', 'lc'], rule := 'vote')")
	m, _ := trModel(t, h, "cv")
	engine := enginePredict(t, db, m, "SELECT * FROM mix ORDER BY i")
	W := m.Width()
	var labels []string
	for i := range len(engine) / W {
		labels = append(labels, m.Classes[forest.Class(engine[i*W:(i+1)*W])])
	}
	if got := queryStrings(t, db, "SELECT copse_label('cv', m) FROM mix m ORDER BY i"); !slices.Equal(got, labels) {
		t.Error("copse_label differs from the engine's classes")
	}
	if got := queryStrings(t, db, "SELECT prediction FROM copse_predict('cv', 'mix') ORDER BY i"); !slices.Equal(got, labels) {
		t.Error("copse_predict differs from the engine's classes")
	}
}

func TestBlendSQLBadInput(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	mustExec(t, db, blMix)
	trExec(t, db, "CREATE TABLE iris AS SELECT * FROM read_csv('../testdata/iris.csv')")
	bsTrain(t, db, "fo", "mix", "target := 'y', trees := 3, exclude := ['i', 'cls']")
	bsTrain(t, db, "lm", "mix", "target := 'y', method := 'linear', exclude := ['i', 'cls']")
	bsTrain(t, db, "fc", "mix", "target := 'cls', trees := 3, exclude := ['i', 'y']")
	bsTrain(t, db, "ir", "iris", "target := 'species', trees := 3")
	mustExec(t, db, "ALTER TABLE iris RENAME COLUMN species TO cls")
	bsTrain(t, db, "ic", "iris", "target := 'cls', trees := 3")
	trRows(t, db, "SELECT * FROM copse_blend('bl', members := ['fo', 'lm'])")
	before := trCatalog(t, db)
	for _, tc := range []struct {
		q    string
		want []string
	}{
		{"SELECT * FROM copse_blend('bl', members := ['fo', 'nope'])", []string{"member 'nope'", "nope"}},
		{"SELECT * FROM copse_blend('bl', members := ['fo', 'fc'])", []string{"predicts", "'fc'"}},
		{"SELECT * FROM copse_blend('bl', members := ['fc', 'ic'])", []string{`member "ic@1" has classes`}},
		{"SELECT * FROM copse_blend('bl', members := ['fo', 'lm'], weights := '1, -1')", []string{"weights", "member 'lm'", "-1"}},
		{"SELECT * FROM copse_blend('bl', members := ['fo', 'lm'], weights := '1, 2, 3')", []string{"weights", "3 weights for 2 members"}},
		{"SELECT * FROM copse_blend('bl', members := ['fo', 'lm'], weights := '0, 0')", []string{"weights", "sum to 0"}},
		{"SELECT * FROM copse_blend('bl', members := ['fo', 'lm'], rule := 'vote')", []string{`rule "vote" needs classification`}},
		{"SELECT * FROM copse_blend('bl', members := ['fo', 'lm'], rule := 'fit')", []string{"rule 'fit'", "weights := 'fit'"}},
		{"SELECT * FROM copse_blend('bl', members := ['fo', 'lm'], weights := 'fit')", []string{"weights := 'fit' needs holdout := "}},
		{"SELECT * FROM copse_blend('bl', members := ['fo', 'bl'])", []string{`member "bl@1" is itself a blend`}},
		{"SELECT * FROM copse_blend('bl')", []string{"members := "}},
		{"SELECT * FROM copse_blend('b@l', members := ['fo'])", []string{"'@'"}},
		{"SELECT * FROM copse_members('fo')", []string{`"fo"`, "no members"}},
		{"SELECT * FROM copse_importance('bl')", []string{`"bl"`, "blend", "copse_members"}},
		{"SELECT * FROM copse_oob('bl')", []string{`"bl"`}},
		{"SELECT * FROM copse_curve('bl')", []string{`"bl"`}},
		{"SELECT * FROM copse_coefficients('bl')", []string{`"bl"`}},
	} {
		trWantErr(t, db, tc.q, tc.want...)
	}
	if got := trCatalog(t, db); got != before {
		t.Errorf("catalog changed:\n%s\nwant\n%s", got, before)
	}
}
