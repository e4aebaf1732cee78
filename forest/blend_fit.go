package forest

import (
	"errors"
	"fmt"
	"math"
)

// Learned blend weights: stacked generalisation (Wolpert 1992) with the non-negative
// weights of Breiman (1996, "Stacked regressions"), here also constrained to sum to 1 so
// that a blend of probabilities stays a probability. The weights minimise the blend's
// weighted mean loss on labelled rows the members did not train on:
//
//	regression:     Σ_r w_r (y_r − Σ_j a_j v_rj)² / Σ_r w_r
//	classification: −Σ_r w_r ln(Σ_j a_j p_rj) / Σ_r w_r, p_rj member j's probability
//	                of row r's class (each floored at blendProbFloor)
//
// over the simplex a ≥ 0, Σ a = 1. Both are convex, so every member alone (a vertex) is
// a feasible point and the optimum's loss is never above the best member's. The rule
// 'vote' has no smooth loss: its weights are fitted on the averaged probabilities too.

// blendProbFloor keeps ln finite when a member gives a row's class probability 0; the
// same clipping as common practice for log loss (1e-15).
const blendProbFloor = 1e-15

// Solver controls: the fit stops when the simplex's optimality condition holds to
// blendFitTol (the largest gradient of a weighted member minus the smallest gradient,
// relative to 1 + the largest gradient, so that the units of the target do not matter),
// or after blendFitRounds Newton steps.
const (
	blendFitTol    = 1e-10
	blendFitRounds = 200
	blendQPRounds  = 100000
)

// BlendFit is what FitBlendWeights found: the weights (≥ 0, summing to 1, one per
// member), the record of the rows they were fitted on, and the Newton steps taken.
type BlendFit struct {
	Weights []float64
	FittedOn
	Steps int
}

// FittedOn records the rows a blend's weights were learned on, kept with the blend
// (Blend.Fitted) so the weights can be judged later: the loss's name, the number of rows
// with positive weight, the blend's weighted mean loss on them and each member's alone.
type FittedOn struct {
	Metric     string // "mse" or "log_loss"
	Rows       int
	Loss       float64
	MemberLoss []float64
}

// The fit's losses.
const (
	FitMSE     = "mse"
	FitLogLoss = "log_loss"
)

// blendProblem is the fit's data in the form the solver needs: per row, each member's
// value (regression) or probability of the row's class (classification).
type blendProblem struct {
	cls bool
	M   int
	z   [][]float64 // z[r][j]
	y   []float64   // regression targets
	w   []float64   // row weights divided by their sum
}

// FitBlendWeights learns blend weights from the members' predictions on labelled rows.
// preds[j] holds member j's predictions row-major, width numbers per row: class
// probabilities for classification (width = classes), values for regression (width 1).
// target holds the class index (classification) or the value of each row; rowWeights
// (nil: all 1) must be finite and ≥ 0. Rows of weight 0 take no part. The result is
// deterministic: it depends on the numbers only.
func FitBlendWeights(task Task, width int, preds [][]float64, target, rowWeights []float64) (*BlendFit, error) {
	p, err := newBlendProblem(task, width, preds, target, rowWeights)
	if err != nil {
		return nil, fmt.Errorf("forest: fit blend weights: %w", err)
	}
	fit := &BlendFit{FittedOn: FittedOn{Metric: FitMSE, Rows: len(p.z)}}
	if p.cls {
		fit.Metric = FitLogLoss
	}
	fit.MemberLoss = make([]float64, p.M)
	vertex := make([]float64, p.M)
	for j := range p.M {
		clear(vertex)
		vertex[j] = 1
		fit.MemberLoss[j] = p.loss(vertex)
	}
	fit.Weights, fit.Steps = p.solve()
	fit.Loss = p.loss(fit.Weights)
	return fit, nil
}

// NewFittedBlend is NewBlend with learned weights: the blend keeps fit's record of the
// rows they were fitted on.
func NewFittedBlend(target string, members []*Model, names []string, fit *BlendFit, rule BlendRule) (*Model, error) {
	m, err := NewBlend(target, members, names, fit.Weights, rule)
	if err != nil {
		return nil, err
	}
	rec := fit.FittedOn
	rec.MemberLoss = append([]float64(nil), rec.MemberLoss...)
	m.Blend.Fitted = &rec
	if err := m.Blend.checkFitted(m.Task); err != nil {
		return nil, fmt.Errorf("forest: blend: %w", err)
	}
	return m, nil
}

func newBlendProblem(task Task, width int, preds [][]float64, target, rowWeights []float64) (*blendProblem, error) {
	M := len(preds)
	if M == 0 {
		return nil, errors.New("no members")
	}
	cls := task == Classification
	switch {
	case cls && width < 2:
		return nil, fmt.Errorf("classification with %d classes", width)
	case !cls && width != 1:
		return nil, fmt.Errorf("%s predictions of width %d, want 1", task, width)
	}
	n := len(target)
	if rowWeights != nil && len(rowWeights) != n {
		return nil, fmt.Errorf("%d row weights for %d rows", len(rowWeights), n)
	}
	for j, pr := range preds {
		if len(pr) != n*width {
			return nil, fmt.Errorf("member %d: %d predictions for %d rows of width %d", j+1, len(pr), n, width)
		}
	}
	p := &blendProblem{cls: cls, M: M}
	flat := make([]float64, 0, n*M) // the rows' z, one allocation
	total := 0.0
	for r := range n {
		wr := 1.0
		if rowWeights != nil {
			wr = rowWeights[r]
		}
		if !(wr >= 0) || math.IsInf(wr, 0) {
			return nil, fmt.Errorf("row %d: weight %v; want a finite number ≥ 0", r+1, wr)
		}
		y := target[r]
		if math.IsNaN(y) || math.IsInf(y, 0) {
			return nil, fmt.Errorf("row %d: target %v; want a finite number", r+1, y)
		}
		col := 0
		if cls {
			if y != math.Trunc(y) || y < 0 || y >= float64(width) {
				return nil, fmt.Errorf("row %d: class index %v; want 0 to %d", r+1, y, width-1)
			}
			col = int(y)
		}
		if wr == 0 {
			continue
		}
		flat = flat[:len(flat)+M]
		z := flat[len(flat)-M:]
		for j, pr := range preds {
			v := pr[r*width+col]
			if math.IsNaN(v) || math.IsInf(v, 0) || cls && (v < 0 || v > 1) {
				return nil, fmt.Errorf("member %d, row %d: prediction %v", j+1, r+1, v)
			}
			if cls {
				v = max(v, blendProbFloor)
			}
			z[j] = v
		}
		p.z = append(p.z, z)
		p.y = append(p.y, y)
		p.w = append(p.w, wr)
		total += wr
	}
	if len(p.z) == 0 {
		return nil, errors.New("no rows with positive weight")
	}
	for r := range p.w {
		p.w[r] /= total
	}
	return p, nil
}

// loss is the blend's weighted mean loss with weights a.
func (p *blendProblem) loss(a []float64) float64 {
	s := 0.0
	for r, z := range p.z {
		b := dotBlend(a, z)
		if p.cls {
			s -= p.w[r] * math.Log(b)
		} else {
			e := p.y[r] - b
			s += p.w[r] * e * e
		}
	}
	return s
}

// derivatives returns the loss's gradient and Hessian at a, summed in row order.
func (p *blendProblem) derivatives(a []float64) (g []float64, H [][]float64) {
	M := p.M
	g = make([]float64, M)
	H = make([][]float64, M)
	for j := range H {
		H[j] = make([]float64, M)
	}
	for r, z := range p.z {
		b := dotBlend(a, z)
		var d1, d2 float64 // the row's loss as a function of b: first and second derivative
		if p.cls {
			d1, d2 = -p.w[r]/b, p.w[r]/(b*b)
		} else {
			d1, d2 = -2*p.w[r]*(p.y[r]-b), 2*p.w[r]
		}
		for j, zj := range z {
			g[j] += d1 * zj
			hj := H[j]
			for k := j; k < M; k++ {
				hj[k] += d2 * zj * z[k]
			}
		}
	}
	for j := range M {
		for k := range j {
			H[j][k] = H[k][j]
		}
	}
	return g, H
}

func dotBlend(a, z []float64) float64 {
	s := 0.0
	for j, v := range z {
		s += a[j] * v
	}
	return s
}

// violation is how far a is from optimal on the simplex: the largest gradient among
// members with weight minus the smallest gradient (0 at the optimum, by the KKT
// conditions).
func violation(a, g []float64) float64 {
	hi, lo := math.Inf(-1), math.Inf(1)
	for j, gj := range g {
		lo = min(lo, gj)
		if a[j] > 0 {
			hi = max(hi, gj)
		}
	}
	return hi - lo
}

// solve runs projected Newton from equal weights: each step minimises the loss's
// quadratic model on the simplex (solveQP), then backtracks along the step until the
// loss falls by a sufficient share of the model's prediction (Armijo). The squared error
// is its own quadratic model, so regression ends after one step.
func (p *blendProblem) solve() ([]float64, int) {
	M := p.M
	a := make([]float64, M)
	for j := range a {
		a[j] = 1 / float64(M)
	}
	f := p.loss(a)
	steps := 0
	for steps < blendFitRounds {
		g, H := p.derivatives(a)
		scale := 0.0
		for _, v := range g {
			scale = max(scale, math.Abs(v))
		}
		if violation(a, g) <= blendFitTol*(1+scale) {
			break
		}
		x := solveQP(a, g, H)
		d := make([]float64, M)
		slope := 0.0
		for j := range d {
			d[j] = x[j] - a[j]
			slope += g[j] * d[j]
		}
		if !(slope < 0) {
			break // the model sees no descent left: a is optimal to rounding
		}
		steps++
		next := make([]float64, M)
		t, moved := 1.0, false
		for range 60 {
			for j := range next {
				next[j] = a[j] + t*d[j]
				if t == 1 {
					next[j] = x[j] // exact zeros stay exact
				}
			}
			if fn := p.loss(next); fn <= f+1e-4*t*slope {
				a, f, moved = normalise(next), fn, true
				break
			}
			t /= 2
		}
		if !moved {
			break
		}
	}
	return a, steps
}

// normalise clears rounding below 0 and rescales a to sum 1.
func normalise(a []float64) []float64 {
	s := 0.0
	for j, v := range a {
		if v < 0 {
			a[j] = 0
		}
		s += a[j]
	}
	for j := range a {
		a[j] /= s
	}
	return a
}

// solveQP minimises gᵀ(x−a) + ½(x−a)ᵀH(x−a) over the simplex by pairwise steps (as in
// sequential minimal optimisation): each step moves weight from the member whose gradient
// is largest among those with weight to the member whose gradient is smallest, as far as
// the quadratic's minimum along that line or the bound allows. Ties go to the lower
// index, so the result is deterministic.
func solveQP(a, g []float64, H [][]float64) []float64 {
	M := len(a)
	x := append([]float64(nil), a...)
	G := append([]float64(nil), g...) // the model's gradient at x
	scale := 0.0
	for _, v := range g {
		scale = max(scale, math.Abs(v))
	}
	tol := 1e-14 * max(1, scale)
	for range blendQPRounds {
		lo, hi := 0, -1
		for j := range M {
			if G[j] < G[lo] {
				lo = j
			}
			if x[j] > 0 && (hi < 0 || G[j] > G[hi]) {
				hi = j
			}
		}
		gap := G[hi] - G[lo]
		if hi == lo || gap <= tol {
			break
		}
		// Move t from hi to lo: the model changes by −gap·t + ½κt².
		kappa := H[lo][lo] + H[hi][hi] - 2*H[lo][hi]
		t := x[hi]
		if kappa > 0 {
			t = min(t, gap/kappa)
		}
		if t <= 0 {
			break
		}
		x[lo] += t
		if t == x[hi] {
			x[hi] = 0
		} else {
			x[hi] -= t
		}
		for j := range M {
			G[j] += t * (H[j][lo] - H[j][hi])
		}
	}
	return x
}
