package udf

import (
	"database/sql"
	"fmt"
	"math"
	"slices"
	"testing"
)

// tsNode is one row of copse_trees.
type tsNode struct {
	tree, node, depth int64
	feature           sql.NullString
	threshold         sql.NullFloat64
	levels            []string // nil for NULL
	missing           sql.NullString
	left, right       sql.NullInt64
	rows              float64
	class             sql.NullString
	value             float64
	gain              sql.NullFloat64
}

func tsNodes(t testing.TB, db *sql.DB, q string) []tsNode {
	t.Helper()
	rows, err := db.Query(q)
	if err != nil {
		t.Fatalf("%s: %v", q, err)
	}
	defer rows.Close()
	var out []tsNode
	for rows.Next() {
		var n tsNode
		var levels any
		if err := rows.Scan(&n.tree, &n.node, &n.depth, &n.feature, &n.threshold, &levels, &n.missing, &n.left, &n.right,
			&n.rows, &n.class, &n.value, &n.gain); err != nil {
			t.Fatal(err)
		}
		if l, ok := levels.([]any); ok {
			n.levels = []string{}
			for _, s := range l {
				n.levels = append(n.levels, s.(string))
			}
		}
		out = append(out, n)
	}
	if err := rows.Err(); err != nil {
		t.Fatalf("%s: %v", q, err)
	}
	return out
}

// A stump on Fisher's iris data (1936; testdata/iris.csv, the copy in Debian's
// python3-sklearn) can be checked by hand: setosa's petals are at most 1.9 long and the
// other species' at least 3.0, so the best split sends petal_length ≤ 2.45 (the
// midpoint) left: 50 setosa rows (share 1), and 100 rows, half versicolor, half
// virginica, right. Its weighted Gini decrease is 150·(1 − 3·(1/3)²) − 50·0 −
// 100·(1 − 2·(1/2)²) = 50. (Petal width ≤ 0.8 separates the same rows; the tie goes to
// the feature that comes first.)
func TestTreesIrisStump(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	mustExec(t, db, "CREATE TABLE iris AS SELECT * FROM read_csv('../testdata/iris.csv')")
	edges := queryFloats(t, db, `SELECT max(petal_length) FILTER (species = 'setosa') FROM iris
		UNION ALL SELECT min(petal_length) FILTER (species <> 'setosa') FROM iris`)
	if edges[0] != 1.9 || edges[1] != 3.0 {
		t.Fatalf("iris petal lengths: setosa up to %v, others from %v", edges[0], edges[1])
	}
	bsTrain(t, db, "stump", "iris", "target := 'species', method := 'tree', max_depth := 1")
	got := tsNodes(t, db, "SELECT * FROM copse_trees('stump')")
	if len(got) != 3 {
		t.Fatalf("%d nodes, want 3: %+v", len(got), got)
	}
	root, l, r := got[0], got[1], got[2]
	if root.tree != 1 || root.node != 0 || root.depth != 0 || root.feature.String != "petal_length" ||
		math.Abs(root.threshold.Float64-2.45) > 1e-12 || root.levels != nil || !root.left.Valid || root.left.Int64 != 1 || root.right.Int64 != 2 ||
		root.rows != 150 || math.Abs(root.gain.Float64-50) > 1e-9 || (root.missing.String != "left" && root.missing.String != "right") {
		t.Errorf("root %+v", root)
	}
	if l.node != 1 || l.depth != 1 || l.feature.Valid || l.threshold.Valid || l.left.Valid || l.right.Valid || l.gain.Valid || l.missing.Valid ||
		l.rows != 50 || l.class.String != "setosa" || l.value != 1 {
		t.Errorf("left leaf %+v", l)
	}
	// Right: versicolor and virginica tie at ½; the tie goes to the first class.
	if r.node != 2 || r.depth != 1 || r.rows != 100 || r.class.String != "versicolor" || r.value != 0.5 {
		t.Errorf("right leaf %+v", r)
	}
	if root.class.String != "setosa" || math.Abs(root.value-1.0/3) > 1e-15 {
		t.Errorf("root class %v value %v, want setosa 1/3", root.class, root.value)
	}
}

// copse_trees lists every node of the engine's trees, and tree := n one tree: node
// counts, depths, covers and gains are the stored ones.
func TestTreesMatchEngine(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	genTable(t, db, "gen", 300, 1, false)
	for _, c := range []struct{ name, target, opts string }{
		{"forest", "y_class", "trees := 5, max_depth := 6"},
		{"boost", "y_class", "method := 'boosting', loss := 'multinomial', trees := 3, max_depth := 3"},
		{"logit", "y_binary", "method := 'boosting', trees := 3, max_depth := 3"},
		{"reg", "y_value", "method := 'bagging', trees := 3"},
	} {
		bsTrain(t, db, c.name, "SELECT x1, x2, colour, flag, day, "+c.target+" FROM gen", "target := '"+c.target+"', "+c.opts)
		m, _ := trModel(t, h, c.name)
		nodes := tsNodes(t, db, "SELECT * FROM copse_trees('"+c.name+"')")
		total := 0
		for _, tr := range m.Trees {
			total += len(tr.Nodes)
		}
		if len(nodes) != total {
			t.Fatalf("%s: %d rows, the engine's trees have %d nodes", c.name, len(nodes), total)
		}
		boostK := 0
		if m.Boost != nil {
			boostK = len(m.Boost.InitScore)
		}
		at := 0
		for ti, tr := range m.Trees {
			one := tsNodes(t, db, fmt.Sprintf("SELECT * FROM copse_trees('%s', tree := %d)", c.name, ti+1))
			if len(one) != len(tr.Nodes) || !slices.EqualFunc(one, nodes[at:at+len(one)], func(a, b tsNode) bool { return fmt.Sprint(a) == fmt.Sprint(b) }) {
				t.Fatalf("%s: tree := %d gives %d rows, not the tree's %d nodes as listed in full", c.name, ti+1, len(one), len(tr.Nodes))
			}
			deepest := int64(0)
			for i, n := range one {
				if n.tree != int64(ti+1) || n.node != int64(i) || n.rows != tr.Cover[i] || n.left.Valid == tr.Nodes[i].IsLeaf() {
					t.Fatalf("%s tree %d node %d: %+v", c.name, ti+1, i, n)
				}
				if !tr.Nodes[i].IsLeaf() && n.gain.Float64 != tr.Gain[i] {
					t.Fatalf("%s tree %d node %d: gain %v, stored %v", c.name, ti+1, i, n.gain, tr.Gain[i])
				}
				if m.Boost != nil && n.value != tr.Value[i] {
					t.Fatalf("%s tree %d node %d: value %v, stored %v", c.name, ti+1, i, n.value, tr.Value[i])
				}
				if boostK > 1 && n.class.String != m.Classes[ti%boostK] {
					t.Fatalf("%s tree %d: class %v", c.name, ti+1, n.class)
				}
				deepest = max(deepest, n.depth)
			}
			if deepest != int64(tr.Depth()) {
				t.Fatalf("%s tree %d: depth %d, the engine's %d", c.name, ti+1, deepest, tr.Depth())
			}
			at += len(one)
		}
	}
}

// Walking copse_trees' rows by their own rules — x ≤ threshold goes left, a level in
// levels goes left, a missing value or a level the tree never saw goes where
// missing_goes says — reaches the leaf whose value copse_score returns, for every row
// of a single tree with NULLs and an unseen level.
func TestTreesWalk(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	genTable(t, db, "gen", 400, 1, false)
	genTable(t, db, "fresh", 200, 9, true) // colour 'mauve' is new
	bsTrain(t, db, "one", "SELECT x1, x2, colour, y_value FROM gen", "target := 'y_value', method := 'tree', max_depth := 6")
	nodes := tsNodes(t, db, "SELECT * FROM copse_trees('one')")
	rows := trRows(t, db, "SELECT x1, x2, colour, copse_score('one', f) FROM fresh f ORDER BY id")
	categorical := 0
	for i, r := range rows {
		n := nodes[0]
		for n.left.Valid {
			x := r[map[string]int{"x1": 0, "x2": 1, "colour": 2}[n.feature.String]]
			left := n.missing.String == "left"
			switch {
			case x == "NULL":
			case n.levels != nil:
				categorical++
				if x != "mauve" {
					left = slices.Contains(n.levels, x)
				}
			default:
				var v float64
				fmt.Sscan(x, &v)
				left = v <= n.threshold.Float64
			}
			next := n.right.Int64
			if left {
				next = n.left.Int64
			}
			n = nodes[next]
		}
		if fmt.Sprint(n.value) != r[3] {
			t.Fatalf("row %d %v: the walk reaches node %d, value %v; copse_score %s", i, r[:3], n.node, n.value, r[3])
		}
	}
	if categorical == 0 {
		t.Fatal("no categorical split was walked")
	}
}

// Bad input names the model or option at fault and leaves the catalog as it was.
func TestTreesBadInput(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	genTable(t, db, "gen", 100, 1, false)
	bsTrain(t, db, "f", "SELECT x1, x2, y_value FROM gen", "target := 'y_value', trees := 3")
	bsTrain(t, db, "lin", "SELECT x1, x2, y_value FROM gen", "target := 'y_value', method := 'linear'")
	for _, c := range []struct {
		q    string
		want []string
	}{
		{"FROM copse_trees('nope')", []string{"copse_trees", "model not found", `"nope"`}},
		{"FROM copse_trees('f', tree := 0)", []string{"copse_trees", "tree := 0", "trees 1 to 3"}},
		{"FROM copse_trees('f', tree := 4)", []string{"copse_trees", "tree := 4", "trees 1 to 3"}},
		{"FROM copse_trees('f', tree := 1.5)", []string{"copse_trees", "tree := 1.5"}},
		{"FROM copse_trees('lin')", []string{"copse_trees", `"lin"`, "no trees", "copse_coefficients"}},
	} {
		trWantErr(t, db, c.q, c.want...)
	}
}
