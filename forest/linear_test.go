package forest

import (
	"context"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"testing"
)

// linearRefTerm is one coefficient row of R's summary().
type linearRefTerm struct {
	Term                          string
	Estimate, StdError, Z, PValue string
}

// linearReference reads testdata/reference/linear_reference.json (made by
// linear_reference.R there with R's lm() and glm()).
func linearReference(t *testing.T) (lm []linearRefTerm, glm []linearRefTerm) {
	t.Helper()
	b, err := os.ReadFile(filepath.Join("..", "testdata", "reference", "linear_reference.json"))
	if err != nil {
		t.Fatal(err)
	}
	// The JSON names are snake_case; map them by hand.
	var raw map[string]json.RawMessage
	if err := json.Unmarshal(b, &raw); err != nil {
		t.Fatal(err)
	}
	conv := func(msg json.RawMessage) []linearRefTerm {
		var rows []map[string]string
		if err := json.Unmarshal(msg, &rows); err != nil {
			t.Fatal(err)
		}
		var out []linearRefTerm
		for _, r := range rows {
			out = append(out, linearRefTerm{r["term"], r["estimate"], r["std_error"], r["z"], r["p_value"]})
		}
		return out
	}
	var g struct {
		Terms json.RawMessage `json:"terms"`
	}
	if err := json.Unmarshal(raw["mtcars_glm"], &g); err != nil {
		t.Fatal(err)
	}
	return conv(raw["longley_lm"]), conv(g.Terms)
}

func num(t *testing.T, s string) float64 {
	t.Helper()
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

func trainLinear(t *testing.T, d *Dataset, ridge float64) *Model {
	t.Helper()
	p := DefaultParams(MethodLinear)
	p.Ridge = ridge
	m, err := Train(context.Background(), d, p)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// Least squares on the Longley data must match NIST's certified values (Statistical
// Reference Datasets, "Longley", higher difficulty) to 7 significant digits. NIST states
// the problem in other units (employment in persons, GNP and population in thousands,
// unemployed and armed forces in units of 100 more); R's datasets::longley, which
// testdata/longley.csv copies, scales them, and the certified values scale with them.
// The numbers below are R 4.2.2's lm() coefficients printed with 15 significant digits;
// they agree with the certified values (NIST: b0 −3482258.63459582, b1 15.0618722713733,
// b2 −0.358191792925910e−1, b3 −2.02022980381683, b4 −1.03322686717359,
// b5 −0.511041056535807e−1, b6 1829.15146461355 — value from memory) to at least 13
// significant digits after the change of units.
func TestLinearLongley(t *testing.T) {
	certified := map[string]float64{
		"(intercept)":  -3.48225863459581e+03,
		"gnp_deflator": 1.50618722713730e-02,
		"gnp":          -3.58191792925910e-02,
		"unemployed":   -2.02022980381682e-02,
		"armed_forces": -1.03322686717359e-02,
		"population":   -5.11041056535790e-02,
		"year":         1.82915146461355e+00,
	}
	m := trainLinear(t, readTable(t, "longley.csv").dataset(t, "employed"), 0)
	if len(m.Linear.Terms) != len(certified) {
		t.Fatalf("%d terms, want %d", len(m.Linear.Terms), len(certified))
	}
	lm, _ := linearReference(t)
	worst := 0.0
	for j, term := range m.Linear.Terms {
		want, ok := certified[term.Name]
		if !ok {
			t.Fatalf("term %q", term.Name)
		}
		rel := math.Abs(term.Estimate-want) / math.Abs(want)
		worst = max(worst, rel)
		if rel > 5e-8 {
			t.Errorf("%s: %.15g, certified %.15g (relative error %.2g; want 7 digits)", term.Name, term.Estimate, want, rel)
		}
		// Standard errors, t and p against R's summary.lm.
		r := lm[j]
		if r.Term != term.Name {
			t.Fatalf("reference term %d is %q, ours %q", j, r.Term, term.Name)
		}
		for _, c := range []struct {
			what      string
			got, want float64
		}{{"std error", term.StdError, num(t, r.StdError)}, {"t", term.Z, num(t, r.Z)}, {"p", term.PValue, num(t, r.PValue)}} {
			if math.Abs(c.got-c.want) > 1e-6*math.Abs(c.want) {
				t.Errorf("%s %s: %.12g, R %.12g", term.Name, c.what, c.got, c.want)
			}
		}
	}
	t.Logf("Longley: worst relative error against the certified values %.2g", worst)
}

// Logistic regression by IRLS must match R's glm(family = binomial) to 1e-6 on mtcars
// (transmission on weight and horsepower), shipped as testdata/mtcars_am.csv.
func TestLinearLogisticMatchesGLM(t *testing.T) {
	d := readTable(t, "mtcars_am.csv").dataset(t, "am")
	m := trainLinear(t, d, 0)
	if m.Task != Classification || m.Classes[1] != "manual" {
		t.Fatalf("task %s, classes %v", m.Task, m.Classes)
	}
	_, glm := linearReference(t)
	if len(glm) != len(m.Linear.Terms) {
		t.Fatalf("%d terms, R has %d", len(m.Linear.Terms), len(glm))
	}
	for j, term := range m.Linear.Terms {
		r := glm[j]
		if r.Term != term.Name {
			t.Fatalf("term %d: %q, R %q", j, term.Name, r.Term)
		}
		if e := num(t, r.Estimate); math.Abs(term.Estimate-e) > 1e-6 {
			t.Errorf("%s: %.12g, R %.12g", term.Name, term.Estimate, e)
		}
		for _, c := range []struct {
			what      string
			got, want float64
		}{{"std error", term.StdError, num(t, r.StdError)}, {"z", term.Z, num(t, r.Z)}, {"p", term.PValue, num(t, r.PValue)}} {
			if math.Abs(c.got-c.want) > 1e-6*math.Abs(c.want) {
				t.Errorf("%s %s: %.12g, R %.12g", term.Name, c.what, c.got, c.want)
			}
		}
	}
	t.Logf("IRLS iterations: %d", m.Linear.Iterations)
}

// A growing ridge penalty shrinks the coefficients (not the intercept) towards 0, and
// leaves the standard errors NaN.
func TestLinearRidgeShrinks(t *testing.T) {
	for _, c := range []struct{ file, target string }{{"longley.csv", "employed"}, {"mtcars_am.csv", "am"}} {
		d := readTable(t, c.file).dataset(t, c.target)
		prev := math.Inf(1)
		for _, lambda := range []float64{0, 0.01, 1, 100, 1e4, 1e6} {
			m := trainLinear(t, d, lambda)
			norm := 0.0
			for _, term := range m.Linear.Terms[1:] {
				norm += term.Estimate * term.Estimate
				if lambda > 0 && !math.IsNaN(term.StdError+term.Z+term.PValue) {
					t.Errorf("%s λ %g: %s has std error %v, z %v, p %v; want NaN", c.file, lambda, term.Name, term.StdError, term.Z, term.PValue)
				}
			}
			if !(norm < prev) {
				t.Errorf("%s: λ %g gives Σβ² %g, not below %g", c.file, lambda, norm, prev)
			}
			prev = norm
		}
	}
}

// linearMixed is a small regression set with a categorical feature (one level never
// seen in training) and a numeric feature with missing values.
func linearMixed(t *testing.T) *Dataset {
	t.Helper()
	n := 40
	x := make([]float64, n)
	z := make([]float64, n)
	region := make([]int32, n)
	y := make([]float64, n)
	for i := range n {
		x[i] = float64(i%7) - 3
		z[i] = float64((i*5)%11) / 3
		region[i] = int32(i % 3) // level 3 ("west") never occurs
		if i%6 == 0 {
			region[i] = Missing
		}
		y[i] = 1 - z[i] + float64(region[i]) + 0.1*float64((i*7)%5)
		if i%5 == 0 {
			x[i] = math.NaN() // y does not depend on x here: the indicator absorbs it
		} else {
			y[i] += 2 * x[i]
		}
	}
	d := NewDataset(n)
	if err := d.AddNumeric("x", x); err != nil {
		t.Fatal(err)
	}
	if err := d.AddCategorical("region", region, []string{"east", "north", "south", "west"}); err != nil {
		t.Fatal(err)
	}
	if err := d.AddNumeric("z", z); err != nil {
		t.Fatal(err)
	}
	if err := d.SetRegressionTarget("y", y); err != nil {
		t.Fatal(err)
	}
	return d
}

// Categorical features expand to indicators without the first level (the reference),
// missing values to the training mean plus an indicator, with the documented names; an
// unseen level scores as the reference and a missing value as the mean plus the
// indicator's coefficient.
func TestLinearTerms(t *testing.T) {
	m := trainLinear(t, linearMixed(t), 0)
	var names []string
	for _, term := range m.Linear.Terms {
		names = append(names, term.Name)
	}
	want := []string{"(intercept)", "x", "x:missing", "region=north", "region=south", "region:missing", "z"}
	if !slices.Equal(names, want) {
		t.Fatalf("terms %q, want %q", names, want)
	}
	if m.Importance.Impurity != nil || m.Importance.Permutation != nil || len(m.Trees) != 0 {
		t.Errorf("linear model has importance %+v and %d trees", m.Importance, len(m.Trees))
	}
	l := m.Linear.Terms
	dst := make([]float64, 1)
	at := func(x, region, z float64) float64 { return m.PredictRow([]float64{x, region, z}, dst)[0] }
	ref := at(1, 0, 2)
	if got, want := at(1, 3, 2), ref; got != want {
		t.Errorf("unseen level west: %v, want the reference's %v", got, want)
	}
	if got, want := at(1, 1, 2), ref+l[3].Estimate; math.Abs(got-want) > 1e-9 {
		t.Errorf("north: %v, want %v", got, want)
	}
	fill := l[1].Fill
	if got, want := at(math.NaN(), 0, 2), at(fill, 0, 2)+l[2].Estimate; math.Abs(got-want) > 1e-9 {
		t.Errorf("missing x: %v, want the mean's %v plus the indicator", got, want)
	}
	// Close to the generating coefficients: y = 1 + 2x − z + code, plus small noise.
	if math.Abs(l[1].Estimate-2) > 0.2 || math.Abs(l[3].Estimate-1) > 0.2 || math.Abs(l[4].Estimate-2) > 0.2 || math.Abs(l[6].Estimate+1) > 0.2 {
		t.Errorf("coefficients %+v", l)
	}
}

// PredictRow, Predict and PredictBlock agree bit for bit; PredictRow does not allocate;
// the model survives encoding.
func TestLinearPredictPaths(t *testing.T) {
	for _, m := range []*Model{
		trainLinear(t, linearMixed(t), 0),
		trainLinear(t, linearMixed(t), 3),
		trainLinear(t, readTable(t, "mtcars_am.csv").dataset(t, "am"), 0),
	} {
		F, W := len(m.Features), m.Width()
		n := 50
		cols := make([][]float64, F)
		for f := range cols {
			cols[f] = make([]float64, n)
			for i := range n {
				v := float64((i*(f+3))%9) - 2
				if m.Features[f].Kind == Categorical {
					v = float64(i % (len(m.Features[f].Levels) + 1))
				}
				if i%7 == f {
					v = math.NaN()
				}
				cols[f][i] = v
			}
		}
		out := make([]float64, n*W)
		if err := m.Predict(cols, out, 2); err != nil {
			t.Fatal(err)
		}
		rows := make([]float64, n*F)
		for i := range n {
			for f := range F {
				rows[i*F+f] = cols[f][i]
			}
		}
		blk := make([]float64, n*W)
		m.PredictBlock(rows, F, blk, make([]int32, n))
		dst := make([]float64, W)
		for i := range n {
			r := m.PredictRow(rows[i*F:(i+1)*F], dst)
			for k := range W {
				if math.Float64bits(r[k]) != math.Float64bits(out[i*W+k]) || math.Float64bits(r[k]) != math.Float64bits(blk[i*W+k]) {
					t.Fatalf("row %d: PredictRow %v, Predict %v, PredictBlock %v", i, r, out[i*W:(i+1)*W], blk[i*W:(i+1)*W])
				}
			}
		}
		if a := testing.AllocsPerRun(100, func() { m.PredictRow(rows[:F], dst) }); a != 0 {
			t.Errorf("PredictRow allocates %v times", a)
		}
		b := encMust(t, m)
		m2, err := Decode(b)
		if err != nil {
			t.Fatal(err)
		}
		encSameModel(t, m, m2)
	}
}

// Tree controls that mean nothing to a linear model are harmless, but ridge is refused
// elsewhere, and a negative or infinite ridge is refused.
func TestLinearRidgeValidate(t *testing.T) {
	p := DefaultParams(MethodForest)
	p.Ridge = 1
	if err := p.Validate(); err == nil {
		t.Error("ridge on a forest accepted")
	}
	for _, r := range []float64{-1, math.Inf(1), math.NaN()} {
		p := DefaultParams(MethodLinear)
		p.Ridge = r
		if err := p.Validate(); err == nil {
			t.Errorf("ridge %v accepted", r)
		}
	}
}
