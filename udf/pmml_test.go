package udf

import (
	"bytes"
	"database/sql"
	"strings"
	"testing"
)

// PMML through SQL: copse_pmml's document imported by copse_import scores, through
// copse_score, bit for bit as the original on rows with missing values and unseen
// levels; bad documents and names are refused by name with the catalog unchanged.

// pmmlText returns copse_pmml's document for ref.
func pmmlText(t *testing.T, db *sql.DB, ref string) string {
	t.Helper()
	got := trRows(t, db, "SELECT text FROM copse_pmml('"+ref+"')")
	if len(got) != 1 || len(got[0]) != 1 {
		t.Fatalf("copse_pmml('%s'): %d rows", ref, len(got))
	}
	return got[0][0]
}

// sqlLiteral quotes s as a SQL string literal.
func sqlLiteral(s string) string { return "'" + strings.ReplaceAll(s, "'", "''") + "'" }

func TestPMMLSQLRoundTrip(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	genTable(t, db, "train_base", 300, 1, false)
	genTable(t, db, "new_base", 200, 2, true) // 'mauve' is a colour no training row had
	mustExec(t, db, "CREATE TABLE train_rows AS SELECT *, 1 + (id % 4) / 2.0 AS years FROM train_base")
	mustExec(t, db, "CREATE TABLE new_rows AS SELECT *, CASE WHEN id % 9 = 0 THEN NULL ELSE 1 + (id % 3) END AS years FROM new_base")
	cases := []struct {
		name, opts, score string
	}{
		{"fo", "target := 'y_class', trees := 5", "copse_score('%s', r, class := 'mid')"},
		{"tr", "target := 'y_value', method := 'tree', max_depth := 4", "copse_score('%s', r)"},
		{"bl", "target := 'y_binary', method := 'boosting', trees := 8", "copse_score('%s', r)"},
		{"bm", "target := 'y_class', method := 'boosting', trees := 5", "copse_score('%s', r, class := 'high')"},
		{"bp", "target := 'small_int', method := 'boosting', loss := 'poisson', trees := 8", "copse_score('%s', r)"},
		{"ad", "target := 'y_class', method := 'adaboost', trees := 5", "copse_score('%s', r, class := 'low')"},
		{"lm", "target := 'y_value', method := 'linear'", "copse_score('%s', r)"},
		{"lg", "target := 'y_binary', method := 'linear'", "copse_score('%s', r)"},
		{"be", "target := 'small_int', method := 'boosting', loss := 'poisson', exposure := 'years', trees := 8", "copse_score('%s', r)"},
	}
	for _, c := range cases {
		exclude := ", exclude := ['id', 'years']"
		if strings.Contains(c.opts, "exposure") {
			exclude = ", exclude := ['id']"
		}
		bsTrain(t, db, c.name, "train_rows", c.opts+exclude)
	}
	trRows(t, db, "SELECT * FROM copse_blend('bn', members := ['fo', 'bm', 'ad'], weights := '1, 2, 3')")
	cases = append(cases, struct{ name, opts, score string }{"bn", "", "copse_score('%s', r, class := 'mid')"})
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			doc := pmmlText(t, db, c.name)
			got := trRows(t, db, "SELECT model, version, method, rows_skipped FROM copse_import('"+c.name+"_copy', "+sqlLiteral(doc)+", format := 'pmml')")
			orig, _ := trModel(t, h, c.name)
			if len(got) != 1 || got[0][0] != c.name+"_copy" || got[0][1] != "1" || got[0][2] != string(orig.Method) {
				t.Fatalf("copse_import: %v", got)
			}
			for _, table := range []string{"train_rows", "new_rows"} {
				q := "SELECT " + strings.ReplaceAll(c.score, "%s", "%s") + " FROM " + table + " r ORDER BY id"
				want := queryFloats(t, db, strings.Replace(q, "%s", c.name, 1))
				have := queryFloats(t, db, strings.Replace(q, "%s", c.name+"_copy", 1))
				sameBits(t, c.name+" on "+table, have, want)
			}
			// The copy writes the same document back.
			if again := pmmlText(t, db, c.name+"_copy"); again != doc {
				t.Errorf("copse_pmml of the imported copy differs (%d vs %d bytes)", len(again), len(doc))
			}
		})
	}
	// A second import under a name of the same task is its next version.
	doc := pmmlText(t, db, "fo")
	if got := trRows(t, db, "SELECT version FROM copse_import('fo', "+sqlLiteral(doc)+")"); len(got) != 1 || got[0][0] != "2" {
		t.Fatalf("re-import: %v", got)
	}
	sameBits(t, "fo@2", queryFloats(t, db, "SELECT copse_score('fo@2', r, class := 'mid') FROM new_rows r ORDER BY id"),
		queryFloats(t, db, "SELECT copse_score('fo@1', r, class := 'mid') FROM new_rows r ORDER BY id"))
}

func TestPMMLSQLErrors(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	genTable(t, db, "train_rows", 200, 1, false)
	bsTrain(t, db, "fo", "train_rows", "target := 'y_class', trees := 3, exclude := ['id']")
	bsTrain(t, db, "reg", "train_rows", "target := 'y_value', trees := 3, exclude := ['id']")
	doc := pmmlText(t, db, "fo")
	tests := []struct {
		name, q string
		want    []string
	}{
		{"malformed", "SELECT * FROM copse_import('x', " + sqlLiteral(doc[:len(doc)/3]) + ")", []string{"copse_import", `"x"`, "malformed XML"}},
		{"not a document", "SELECT * FROM copse_import('x', 'model please')", []string{"malformed XML"}},
		{"unsupported element", "SELECT * FROM copse_import('x', " + sqlLiteral(strings.Replace(doc, "<DataDictionary", "<TransformationDictionary/><DataDictionary", 1)) + ")", []string{"unsupported element <TransformationDictionary>"}},
		{"other producer", "SELECT * FROM copse_import('x', " + sqlLiteral(strings.Replace(doc, `name="copse"/>`, `name="elsewhere"/>`, 1)) + ")", []string{`written by "elsewhere"`}},
		{"name of another task", "SELECT * FROM copse_import('reg', " + sqlLiteral(doc) + ")", []string{`"reg"`, "regression", "classification", "another name"}},
		{"format", "SELECT * FROM copse_import('x', " + sqlLiteral(doc) + ", format := 'onnx')", []string{"format := 'onnx'", "'pmml'"}},
		{"null document", "SELECT * FROM copse_import('x', NULL)", []string{"document is NULL"}},
		{"bad name", "SELECT * FROM copse_import('x@2', " + sqlLiteral(doc) + ")", []string{"'@'"}},
		{"no model", "SELECT * FROM copse_pmml('nothing')", []string{"copse_pmml", "model not found", "nothing"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) { trWantErr(t, db, tc.q, tc.want...) })
	}
	if !bytes.Contains([]byte(doc), []byte(`<PMML xmlns="http://www.dmg.org/PMML-4_4" version="4.4">`)) {
		t.Error("copse_pmml's text is not a PMML 4.4 document")
	}
}
