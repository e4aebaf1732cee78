package forest

import (
	"encoding/csv"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"testing"
)

// table is a CSV file read into columns: numeric where every cell parses (empty cells are
// missing), categorical otherwise.
type table struct {
	names []string
	num   map[string][]float64
	cat   map[string][]string
	rows  int
}

func readTable(t testing.TB, name string) *table {
	t.Helper()
	f, err := os.Open(filepath.Join("..", "testdata", name))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	recs, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	tb := &table{names: recs[0], num: map[string][]float64{}, cat: map[string][]string{}, rows: len(recs) - 1}
	for j, col := range tb.names {
		vals := make([]float64, tb.rows)
		numeric := true
		for i, r := range recs[1:] {
			if r[j] == "" {
				vals[i] = math.NaN()
				continue
			}
			v, err := strconv.ParseFloat(r[j], 64)
			if err != nil {
				numeric = false
				break
			}
			vals[i] = v
		}
		if numeric {
			tb.num[col] = vals
			continue
		}
		s := make([]string, tb.rows)
		for i, r := range recs[1:] {
			s[i] = r[j]
		}
		tb.cat[col] = s
	}
	return tb
}

// codes turns strings into level codes over their sorted distinct values ("" is missing).
func codes(vals []string) ([]int32, []string) {
	var levels []string
	for _, v := range vals {
		if v != "" {
			levels = append(levels, v)
		}
	}
	slices.Sort(levels)
	levels = slices.Compact(levels)
	out := make([]int32, len(vals))
	for i, v := range vals {
		out[i] = Missing
		if v != "" {
			k, _ := slices.BinarySearch(levels, v)
			out[i] = int32(k)
		}
	}
	return out, levels
}

// dataset builds a training set from a table: every column but target is a feature.
// A categorical target classifies; a numeric one regresses.
func (tb *table) dataset(t testing.TB, target string) *Dataset {
	t.Helper()
	d := NewDataset(tb.rows)
	for _, name := range tb.names {
		var err error
		switch {
		case name == target && tb.cat[name] != nil:
			c, l := codes(tb.cat[name])
			err = d.SetClassTarget(name, c, l)
		case name == target:
			err = d.SetRegressionTarget(name, tb.num[name])
		case tb.cat[name] != nil:
			c, l := codes(tb.cat[name])
			err = d.AddCategorical(name, c, l)
		default:
			err = d.AddNumeric(name, tb.num[name])
		}
		if err != nil {
			t.Fatal(err)
		}
	}
	return d
}

// columns returns the feature columns of a table in model coding, for Predict.
func (tb *table) columns(m *Model) [][]float64 {
	cols := make([][]float64, len(m.Features))
	for f, fi := range m.Features {
		if fi.Kind == Numeric {
			cols[f] = tb.num[fi.Name]
			continue
		}
		c := make([]float64, tb.rows)
		for i, v := range tb.cat[fi.Name] {
			c[i] = math.NaN()
			if k := slices.Index(fi.Levels, v); k >= 0 {
				c[i] = float64(k)
			}
		}
		cols[f] = c
	}
	return cols
}

// reference reads testdata/reference/reference.json (made by make_reference.py there,
// scikit-learn 1.2.1 from Debian's python3-sklearn).
func reference(t testing.TB) map[string]json.RawMessage {
	t.Helper()
	b, err := os.ReadFile(filepath.Join("..", "testdata", "reference", "reference.json"))
	if err != nil {
		t.Fatal(err)
	}
	var out map[string]json.RawMessage
	if err := json.Unmarshal(b, &out); err != nil {
		t.Fatal(err)
	}
	return out
}
