package udf

import (
	"testing"

	"github.com/copse-dev/copse/forest"
)

// TestPredictSourceColumnNames: copse_predict works whatever the source's columns are
// called, including the names of the row it builds internally (copse_row) and of its
// own output; a feature named copse_row scores like any other.
func TestPredictSourceColumnNames(t *testing.T) {
	h := openHost(t)
	genTable(t, h.db, "train_rows", 500, 1, false)
	mustExec(t, h.db, "CREATE TABLE named_rows AS SELECT id, x1, x2 AS copse_row, colour AS \"COPSE_ROW_1\", y_value, y_binary FROM train_rows")
	const feats = "SELECT x1, copse_row, \"COPSE_ROW_1\", "
	reg := trainOn(t, h, "reg", feats+"y_value FROM named_rows", "y_value", smallParams(forest.MethodForest, 5))
	bin := trainOn(t, h, "bin", feats+"y_binary FROM named_rows", "y_binary", smallParams(forest.MethodForest, 5))
	const rows = "SELECT * FROM named_rows ORDER BY id"
	wantReg := enginePredict(t, h.db, reg, rows)
	wantBin := column(enginePredict(t, h.db, bin, rows), 2, 1)
	for _, c := range []struct {
		name, source string
	}{
		{"table", "named_rows"},
		{"query", "SELECT * FROM named_rows"},
		{"query with the same alias", "SELECT copse_row.* FROM named_rows AS copse_row"},
		{"struct column", "SELECT *, {'copse_row': 1.5} AS prediction_input FROM named_rows"},
	} {
		t.Run(c.name, func(t *testing.T) {
			src := "'" + sqlEscape(c.source) + "'"
			sameBits(t, "regression", queryFloats(t, h.db, "SELECT prediction FROM copse_predict('reg', "+src+") ORDER BY id"), wantReg)
			sameBits(t, "binary", queryFloats(t, h.db, "SELECT probability FROM copse_predict('bin', "+src+") ORDER BY id"), wantBin)
			// The source's columns pass through under their own names.
			got := queryFloats(t, h.db, "SELECT copse_row FROM copse_predict('reg', "+src+") ORDER BY id")
			sameBits(t, "pass-through", got, queryFloats(t, h.db, "SELECT copse_row FROM named_rows ORDER BY id"))
		})
	}
}
