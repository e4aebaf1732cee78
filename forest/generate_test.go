package forest

import (
	"math"
	"math/rand/v2"
	"testing"
)

// Synthetic data for the tests. Every generator takes its own seed, so each test's data
// is fixed and the tests do not depend on one another.

func newRand(seed uint64) *rand.Rand { return rand.New(rand.NewPCG(seed, 0x7465737473)) }

func sigmoid(z float64) float64 { return 1 / (1 + math.Exp(-z)) }

// mixed is a generated data set with numeric and categorical features, missing values in
// some of them, and a class or a numeric target.
type mixed struct {
	rows   int
	names  []string
	num    map[string][]float64
	cat    map[string][]int32
	levels map[string][]string
	ycls   []int32
	yreg   []float64
	w      []float64
}

// genMixed makes rows rows with features
//
//	x0  numeric U(0,1), informative
//	x1  numeric U(0,1), informative, 10 % missing
//	c2  categorical, 5 levels (the last, "e", never occurs), informative, 5 % missing
//	x3  numeric U(0,1), noise
//	c4  categorical, 3 levels, noise
//
// and, from the same draws, a class target with classes classes (2 or 3) and a numeric
// target. With weighted, rows get weights in {0, 0.5, 1, 2}.
func genMixed(seed uint64, rows, classes int, weighted bool) *mixed {
	r := newRand(seed)
	g := &mixed{
		rows:   rows,
		names:  []string{"x0", "x1", "c2", "x3", "c4"},
		num:    map[string][]float64{},
		cat:    map[string][]int32{},
		levels: map[string][]string{"c2": {"a", "b", "c", "d", "e"}, "c4": {"p", "q", "r"}},
		ycls:   make([]int32, rows),
		yreg:   make([]float64, rows),
	}
	x0, x1, x3 := make([]float64, rows), make([]float64, rows), make([]float64, rows)
	c2, c4 := make([]int32, rows), make([]int32, rows)
	effect := []float64{-1.5, 1.0, -0.5, 1.5}
	for i := range rows {
		x0[i], x1[i], x3[i] = r.Float64(), r.Float64(), r.Float64()
		c2[i] = int32(r.IntN(4))
		c4[i] = int32(r.IntN(3))
		z := 4*(x0[i]-0.5) + effect[c2[i]]
		if r.Float64() < 0.1 {
			x1[i] = math.NaN()
			z += 1
		} else {
			z += 3 * (x1[i] - 0.5)
		}
		if r.Float64() < 0.05 {
			c2[i] = Missing
		}
		g.yreg[i] = z + 0.3*r.NormFloat64()
		u := r.Float64()
		switch {
		case classes == 2:
			if u < sigmoid(2*z) {
				g.ycls[i] = 1
			}
		default:
			// Three ordered classes: low, middle, high.
			switch p := sigmoid(2 * z); {
			case u < p*p:
				g.ycls[i] = 2
			case u < p:
				g.ycls[i] = 1
			}
		}
	}
	g.num["x0"], g.num["x1"], g.num["x3"] = x0, x1, x3
	g.cat["c2"], g.cat["c4"] = c2, c4
	if weighted {
		g.w = make([]float64, rows)
		for i := range g.w {
			g.w[i] = []float64{0, 0.5, 1, 2}[r.IntN(4)]
		}
	}
	return g
}

func (g *mixed) classNames(classes int) []string {
	return []string{"low", "mid", "high"}[:classes]
}

// dataset builds a Dataset with the class target (classes > 0) or the numeric one.
func (g *mixed) dataset(t testing.TB, classes int) *Dataset {
	t.Helper()
	d := NewDataset(g.rows)
	for _, n := range g.names {
		var err error
		if g.num[n] != nil {
			err = d.AddNumeric(n, g.num[n])
		} else {
			err = d.AddCategorical(n, g.cat[n], g.levels[n])
		}
		if err != nil {
			t.Fatal(err)
		}
	}
	var err error
	if classes > 0 {
		err = d.SetClassTarget("y", g.ycls, g.classNames(classes))
	} else {
		err = d.SetRegressionTarget("y", g.yreg)
	}
	if err != nil {
		t.Fatal(err)
	}
	if g.w != nil {
		if err := d.SetWeights(g.w); err != nil {
			t.Fatal(err)
		}
	}
	return d
}

// row returns row i in model coding (categorical codes as numbers, NaN for missing).
func (g *mixed) row(i int) []float64 {
	out := make([]float64, len(g.names))
	for f, n := range g.names {
		if g.num[n] != nil {
			out[f] = g.num[n][i]
		} else if c := g.cat[n][i]; c >= 0 {
			out[f] = float64(c)
		} else {
			out[f] = math.NaN()
		}
	}
	return out
}

// columns returns the features column by column, for Predict.
func (g *mixed) columns() [][]float64 {
	cols := make([][]float64, len(g.names))
	for f := range g.names {
		cols[f] = make([]float64, g.rows)
	}
	for i := range g.rows {
		for f, v := range g.row(i) {
			cols[f][i] = v
		}
	}
	return cols
}

// subset keeps the rows where keep is true.
func (g *mixed) subset(keep func(i int) bool) *mixed {
	s := &mixed{names: g.names, num: map[string][]float64{}, cat: map[string][]int32{}, levels: g.levels}
	for i := range g.rows {
		if !keep(i) {
			continue
		}
		s.rows++
		for _, n := range g.names {
			if g.num[n] != nil {
				s.num[n] = append(s.num[n], g.num[n][i])
			} else {
				s.cat[n] = append(s.cat[n], g.cat[n][i])
			}
		}
		s.ycls = append(s.ycls, g.ycls[i])
		s.yreg = append(s.yreg, g.yreg[i])
		if g.w != nil {
			s.w = append(s.w, g.w[i])
		}
	}
	return s
}

// bitsEqual reports whether two float slices hold the same bit patterns (so NaN equals NaN
// and 0 differs from -0).
func bitsEqual(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
			return false
		}
	}
	return true
}
