package forest

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distuv"
)

// The linear baseline (MethodLinear): least squares for a numeric target, logistic
// regression by iteratively reweighted least squares (IRLS) for a two-class target, each
// with an optional ridge penalty λ = Params.Ridge on every coefficient but the intercept
// (the fit minimises the deviance — the residual sum of squares for least squares — plus
// λ·Σβ², on the raw, unstandardised terms). Row weights weight the deviance.
//
// The terms, in order: "(intercept)"; then per feature in model order:
//   - numeric "x": its value; "x:missing" (1 when missing, else 0) when the feature had a
//     missing value in training, and a missing value then takes the training mean
//     (Term.Fill) in "x";
//   - categorical: "x=level" indicators for every level seen in training except the
//     first seen (in level-code order), which is the reference; "x:missing" when it had
//     missing values in training. A level unseen in training scores as the reference
//     (all its indicators 0).
//
// Standard errors come from (XᵀWX)⁻¹ of the unpenalised fit (times the residual
// variance for least squares); with a ridge penalty (or, for least squares, as many terms
// as rows) they, z and the p-values are NaN.
// p-values are two-sided: Student's t with n − p degrees of freedom for least squares,
// the normal for logistic regression. A linear model has no trees and no importance
// (Model.Importance stays empty): its coefficients are its explanation.

// Linear is what a linear model holds: its terms and coefficients.
type Linear struct {
	Terms []Term
	// Iterations is the number of IRLS steps (logistic), 1 for least squares.
	Iterations int
}

// TermKind says what a term reads from a row.
type TermKind uint8

// The term kinds.
const (
	TermIntercept TermKind = iota // always 1
	TermValue                     // the numeric feature's value, Fill when missing
	TermLevel                     // 1 when the categorical feature's code is Level
	TermMissing                   // 1 when the numeric feature is missing (NaN)
	TermNoLevel                   // 1 when the categorical feature is missing (NaN or a negative code)
)

// Term is one column of the design matrix and its coefficient.
type Term struct {
	Name    string
	Kind    TermKind
	Feature int     // the feature read (0 for the intercept)
	Level   int     // TermLevel: the level code
	Fill    float64 // TermValue: the training mean, used for missing values
	// Estimate is the coefficient; StdError, Z (t for least squares) and PValue its
	// standard error, Estimate/StdError and two-sided p-value (NaN with a ridge penalty).
	Estimate, StdError, Z, PValue float64
}

// value is the term's column entry for one row (coded as for PredictRow).
func (t *Term) value(row []float64) float64 {
	switch t.Kind {
	case TermIntercept:
		return 1
	case TermValue:
		if v := row[t.Feature]; !math.IsNaN(v) {
			return v
		}
		return t.Fill
	case TermLevel:
		if row[t.Feature] == float64(t.Level) {
			return 1
		}
		return 0
	}
	v := row[t.Feature]
	if math.IsNaN(v) || t.Kind == TermNoLevel && v < 0 {
		return 1
	}
	return 0
}

// raw is the linear predictor of one row, summed in term order.
func (l *Linear) raw(row []float64) float64 {
	s := 0.0
	for i := range l.Terms {
		t := &l.Terms[i]
		s += t.Estimate * t.value(row)
	}
	return s
}

// linearRow writes a linear model's prediction for one row into dst.
func (m *Model) linearRow(row, dst []float64) {
	raw := m.Linear.raw(row)
	if m.Task == Classification {
		p := logisticLink(raw)
		dst[0], dst[1] = 1-p, p
		return
	}
	dst[0] = raw
}

// linearTerms lays out the terms from the training rows.
func linearTerms(d *Dataset, rows []int, w []float64) []Term {
	terms := []Term{{Name: "(intercept)", Kind: TermIntercept}}
	for f := range d.features {
		c := &d.features[f]
		if c.kind == Numeric {
			sum, sw, miss := 0.0, 0.0, false
			for _, i := range rows {
				if v := c.num[i]; math.IsNaN(v) {
					miss = true
				} else {
					sum += w[i] * v
					sw += w[i]
				}
			}
			fill := 0.0
			if sw > 0 {
				fill = sum / sw
			}
			terms = append(terms, Term{Name: c.name, Kind: TermValue, Feature: f, Fill: fill})
			if miss {
				terms = append(terms, Term{Name: c.name + ":missing", Kind: TermMissing, Feature: f})
			}
			continue
		}
		seen := make([]bool, len(c.levels))
		miss := false
		for _, i := range rows {
			if code := c.codes[i]; code >= 0 {
				seen[code] = true
			} else {
				miss = true
			}
		}
		first := true
		for l, s := range seen {
			if !s {
				continue
			}
			if first {
				first = false // the reference level
				continue
			}
			terms = append(terms, Term{Name: c.name + "=" + c.levels[l], Kind: TermLevel, Feature: f, Level: l})
		}
		if miss {
			terms = append(terms, Term{Name: c.name + ":missing", Kind: TermNoLevel, Feature: f})
		}
	}
	return terms
}

// linearMaxIter and linearTol bound IRLS: it stops when the deviance changes by less
// than linearTol relative to it (R's glm uses 1e-8; tighter here, so that the
// coefficients settle to more digits).
const (
	linearMaxIter = 100
	linearTol     = 1e-14
)

// fitLinear fits the linear baseline.
func fitLinear(d *Dataset, task Task, ridge float64) (*Linear, error) {
	n := d.rows
	w := make([]float64, n)
	var rows []int
	for i := range n {
		if wi := d.weight(i); wi > 0 {
			rows = append(rows, i)
			w[i] = wi
		}
	}
	if len(rows) == 0 {
		return nil, fmt.Errorf("forest: method %q: no rows with positive weight", MethodLinear)
	}
	if task == Classification && len(d.target.levels) != 2 {
		return nil, fmt.Errorf("forest: method %q classifies two classes; target %q has %d", MethodLinear, d.target.name, len(d.target.levels))
	}
	terms := linearTerms(d, rows, w)
	q := len(terms)
	N := len(rows)
	F := len(d.features)
	x := mat.NewDense(N, q, nil)
	row := make([]float64, F)
	for k, i := range rows {
		rowOf(d, i, row)
		for j := range terms {
			x.Set(k, j, terms[j].value(row))
		}
	}
	y := make([]float64, N)
	for k, i := range rows {
		if task == Classification {
			y[k] = float64(d.target.codes[i])
		} else {
			y[k] = d.target.num[i]
		}
	}
	pen := 0
	if ridge > 0 {
		pen = q - 1
	}
	// wls solves min Σ s_k (z_k − x_kβ)² + λΣ_{j≥1}β_j² by QR of the scaled, augmented
	// design, and returns β and R.
	wls := func(s, z []float64) ([]float64, *mat.TriDense, error) {
		a := mat.NewDense(N+pen, q, nil)
		b := mat.NewVecDense(N+pen, nil)
		for k := range N {
			r := math.Sqrt(s[k])
			dst := a.RawRowView(k)
			for j, v := range x.RawRowView(k) {
				dst[j] = r * v
			}
			b.SetVec(k, r*z[k])
		}
		for j := 1; j <= pen; j++ {
			a.Set(N+j-1, j, math.Sqrt(ridge))
		}
		var qr mat.QR
		qr.Factorize(a)
		var beta mat.VecDense
		if err := qr.SolveVecTo(&beta, false, b); err != nil {
			return nil, nil, err
		}
		var rd mat.Dense
		qr.RTo(&rd)
		r := mat.NewTriDense(q, mat.Upper, nil)
		for i := range q {
			for j := i; j < q; j++ {
				r.SetTri(i, j, rd.At(i, j))
			}
		}
		return beta.RawVector().Data, r, nil
	}
	lin := &Linear{Terms: terms}
	var beta []float64
	var r *mat.TriDense
	var err error
	s := make([]float64, N)
	scale := 1.0
	if N < q && pen == 0 {
		return nil, fmt.Errorf("forest: method %q: %d rows for %d terms; give more rows or a ridge penalty", MethodLinear, N, q)
	}
	if task == Regression {
		for k, i := range rows {
			s[k] = w[i]
		}
		if beta, r, err = wls(s, y); err != nil {
			return nil, fmt.Errorf("forest: method %q: the terms are collinear: %v", MethodLinear, err)
		}
		lin.Iterations = 1
		if ridge == 0 {
			rss := 0.0
			for k := range N {
				e := y[k] - dot(x.RawRowView(k), beta)
				rss += s[k] * e * e
			}
			scale = rss / float64(N-q)
		}
	} else {
		z := make([]float64, N)
		beta = make([]float64, q)
		dev := math.Inf(1)
		for it := 1; ; it++ {
			for k, i := range rows {
				eta := dot(x.RawRowView(k), beta)
				mu := logisticLink(eta)
				v := max(mu*(1-mu), 1e-300)
				s[k] = w[i] * v
				z[k] = eta + (y[k]-mu)/v
			}
			var nb []float64
			if nb, r, err = wls(s, z); err != nil {
				return nil, fmt.Errorf("forest: method %q: the terms are collinear: %v", MethodLinear, err)
			}
			beta = nb
			nd := 0.0
			for k, i := range rows {
				eta := dot(x.RawRowView(k), beta)
				// −2 log-likelihood, computed stably from the log-odds.
				if y[k] == 1 {
					nd += 2 * w[i] * softplus(-eta)
				} else {
					nd += 2 * w[i] * softplus(eta)
				}
			}
			lin.Iterations = it
			if math.Abs(nd-dev) <= linearTol*(math.Abs(nd)+0.1) || it >= linearMaxIter {
				break
			}
			dev = nd
		}
		// Recompute R at the final coefficients, for the standard errors.
		for k, i := range rows {
			mu := logisticLink(dot(x.RawRowView(k), beta))
			s[k] = w[i] * max(mu*(1-mu), 1e-300)
			z[k] = 0
		}
		if _, r, err = wls(s, z); err != nil {
			return nil, fmt.Errorf("forest: method %q: the terms are collinear: %v", MethodLinear, err)
		}
	}
	for j := range terms {
		if math.IsNaN(beta[j]) || math.IsInf(beta[j], 0) {
			return nil, errors.New("forest: method \"linear\": the fit diverged")
		}
		terms[j].Estimate = beta[j]
		terms[j].StdError, terms[j].Z, terms[j].PValue = math.NaN(), math.NaN(), math.NaN()
	}
	if ridge > 0 || task == Regression && N == q {
		return lin, nil // no residual degrees of freedom: the standard errors stay NaN
	}
	var rinv mat.TriDense
	if err := rinv.InverseTri(r); err != nil {
		return lin, nil // standard errors stay NaN
	}
	var dist interface{ CDF(float64) float64 } = distuv.UnitNormal
	if task == Regression {
		dist = distuv.StudentsT{Mu: 0, Sigma: 1, Nu: float64(N - q)}
	}
	for j := range terms {
		// diag((RᵀR)⁻¹) = row norms² of R⁻¹.
		v := 0.0
		for k := j; k < q; k++ {
			e := rinv.At(j, k)
			v += e * e
		}
		se := math.Sqrt(v * scale)
		t := &terms[j]
		t.StdError = se
		t.Z = t.Estimate / se
		t.PValue = 2 * dist.CDF(-math.Abs(t.Z))
	}
	return lin, nil
}

// dot is Σ a_j·b_j in index order.
func dot(a, b []float64) float64 {
	s := 0.0
	for j, v := range a {
		s += v * b[j]
	}
	return s
}

// softplus is log(1 + e^x) without overflow.
func softplus(x float64) float64 {
	if x > 0 {
		return x + math.Log1p(math.Exp(-x))
	}
	return math.Log1p(math.Exp(x))
}

// checkLinear checks that a model has a linear record exactly when its method says so,
// with terms that index its features.
func (m *Model) checkLinear() error {
	l := m.Linear
	if (m.Method == MethodLinear) != (l != nil) {
		return fmt.Errorf("method %q with linear record %v", m.Method, l != nil)
	}
	if l == nil {
		return nil
	}
	if m.OOB != nil || m.Boost != nil || m.AdaBoost != nil || len(m.Trees) != 0 {
		return fmt.Errorf("linear model with out-of-bag results, boosting or AdaBoost record, or %d trees", len(m.Trees))
	}
	if m.Task == Classification && len(m.Classes) != 2 {
		return fmt.Errorf("linear model with %d classes; want 2", len(m.Classes))
	}
	if len(l.Terms) == 0 || l.Terms[0].Kind != TermIntercept {
		return errors.New("linear model without its intercept first")
	}
	for j, t := range l.Terms {
		switch t.Kind {
		case TermIntercept:
			if j != 0 || t.Feature != 0 || t.Level != 0 {
				return fmt.Errorf("term %d: a second or indexed intercept", j)
			}
		case TermValue, TermMissing, TermLevel, TermNoLevel:
			if t.Feature < 0 || t.Feature >= len(m.Features) {
				return fmt.Errorf("term %d: feature %d of %d", j, t.Feature, len(m.Features))
			}
			f := &m.Features[t.Feature]
			if (t.Kind == TermValue || t.Kind == TermMissing) != (f.Kind == Numeric) {
				return fmt.Errorf("term %d: kind %d on %s feature %q", j, t.Kind, f.Kind, f.Name)
			}
			if t.Kind == TermLevel && (f.Kind != Categorical || t.Level < 0 || t.Level >= len(f.Levels)) {
				return fmt.Errorf("term %d: level %d of feature %q", j, t.Level, f.Name)
			}
			if t.Kind != TermLevel && t.Level != 0 {
				return fmt.Errorf("term %d: level %d on a term without one", j, t.Level)
			}
			if t.Kind != TermValue && t.Fill != 0 {
				return fmt.Errorf("term %d: fill %v on a term without one", j, t.Fill)
			}
		default:
			return fmt.Errorf("term %d: kind %d", j, t.Kind)
		}
	}
	return nil
}
