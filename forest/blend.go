package forest

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"sync"
)

// MethodBlend combines stored models with the same target, task and classes: a
// heterogeneous ensemble (see Blend). It grows no trees of its own.
const MethodBlend Method = "blend"

// BlendRule is how a blend combines its members' predictions.
type BlendRule string

// The rules.
const (
	// BlendAverage is the weighted mean of the members' predictions: class
	// probabilities (soft voting) or values.
	BlendAverage BlendRule = "average"
	// BlendVote is hard voting (classification only): each member casts its weight for
	// its most probable class; the prediction holds the weighted vote shares. Learned
	// weights (FitBlendWeights) are fitted on the averaged probabilities, as for
	// BlendAverage: hard votes have no smooth loss to fit.
	BlendVote BlendRule = "vote"
)

// Blend is what a blend adds to a Model: its members, embedded whole so the blend keeps
// scoring after a member is dropped or retrained elsewhere, their display names
// (name@version), their weights (≥ 0, summing to 1) and the rule. Fitted records the
// rows learned weights were fitted on (FitBlendWeights); nil when the weights were given.
type Blend struct {
	Rule    BlendRule
	Members []*Model
	Names   []string
	Weights []float64
	Fitted  *FittedOn

	// index[j][f] is the position in the blend's row of member j's feature f; derived
	// from the members and the blend's features, never stored.
	index [][]int
	// scratch is how many numbers PredictRow borrows: every member's row and one
	// member prediction.
	scratch int
}

// blendScratch lends PredictRow the buffers it maps rows into, so that scoring a blend
// row by row does not allocate once warm and any number of goroutines may score at once.
var blendScratch = sync.Pool{New: func() any { return new([]float64) }}

// NewBlend builds a blend of members under rule with the given weights (nil: equal).
// Members must agree on task, target-width and class names, in order; weights must be
// finite, ≥ 0, one per member, with a positive sum, and are normalised to sum 1. The
// blend's features are the union of the members' features by name, in order of first
// appearance; a feature that two members see with different kinds or levels is an
// error naming it. names label the members for display (nil: "member 1", …).
func NewBlend(target string, members []*Model, names []string, weights []float64, rule BlendRule) (*Model, error) {
	if len(members) == 0 {
		return nil, errors.New("forest: blend: no members")
	}
	if names == nil {
		for j := range members {
			names = append(names, fmt.Sprintf("member %d", j+1))
		}
	}
	if len(names) != len(members) {
		return nil, fmt.Errorf("forest: blend: %d names for %d members", len(names), len(members))
	}
	if weights == nil {
		weights = make([]float64, len(members))
		for j := range weights {
			weights[j] = 1
		}
	}
	if len(weights) != len(members) {
		return nil, fmt.Errorf("forest: blend: weights: %d weights for %d members", len(weights), len(members))
	}
	sum := 0.0
	for j, w := range weights {
		if !(w >= 0) || math.IsInf(w, 0) {
			return nil, fmt.Errorf("forest: blend: weights: member %q has weight %v; want a finite number ≥ 0", names[j], w)
		}
		sum += w
	}
	if !(sum > 0) || math.IsInf(sum, 0) {
		return nil, fmt.Errorf("forest: blend: weights: they sum to %v; want a finite sum above 0", sum)
	}
	norm := make([]float64, len(weights))
	for j, w := range weights {
		norm[j] = w / sum
	}
	first := members[0]
	if first == nil {
		return nil, fmt.Errorf("forest: blend: member %q is nil", names[0])
	}
	p := Params{Method: MethodBlend, Task: first.Task}
	m := &Model{
		Method: MethodBlend, Task: first.Task, Target: target, Classes: slices.Clone(first.Classes), Params: p,
		Blend: &Blend{Rule: rule, Members: slices.Clone(members), Names: slices.Clone(names), Weights: norm},
	}
	rows := 0
	for _, mem := range members {
		if mem != nil {
			rows = max(rows, mem.Rows)
		}
	}
	m.Rows = rows
	feats, err := m.Blend.union()
	if err != nil {
		return nil, fmt.Errorf("forest: blend: %w", err)
	}
	m.Features = feats
	if err := m.checkStructure(); err != nil {
		return nil, fmt.Errorf("forest: blend: %w", err)
	}
	m.Blend.prepare(m)
	return m, nil
}

// union returns the members' features by name in order of first appearance, or an error
// naming a feature the members see differently.
func (b *Blend) union() ([]FeatureInfo, error) {
	var out []FeatureInfo
	at := map[string]int{}
	for j, mem := range b.Members {
		if mem == nil {
			return nil, fmt.Errorf("member %q is nil", b.Names[j])
		}
		for _, f := range mem.Features {
			i, ok := at[f.Name]
			if !ok {
				at[f.Name] = len(out)
				out = append(out, f)
				continue
			}
			g := &out[i]
			if g.Kind != f.Kind || !slices.Equal(g.Levels, f.Levels) {
				return nil, fmt.Errorf("feature %q: member %q sees it as %s with %d levels, an earlier member as %s with %d levels",
					f.Name, b.Names[j], f.Kind, len(f.Levels), g.Kind, len(g.Levels))
			}
		}
	}
	return out, nil
}

// checkBlend checks a blend record against its model: as NewBlend requires, and the model's
// features must be the members' union.
func (m *Model) checkBlend() error {
	b := m.Blend
	if (m.Method == MethodBlend) != (b != nil) {
		return fmt.Errorf("method %q with blend record %v", m.Method, b != nil)
	}
	if b == nil {
		return nil
	}
	if m.OOB != nil || m.Boost != nil || m.AdaBoost != nil || m.Linear != nil || len(m.Trees) != 0 {
		return fmt.Errorf("blend with out-of-bag results, boosting, AdaBoost or linear record, or %d trees", len(m.Trees))
	}
	switch b.Rule {
	case BlendAverage:
	case BlendVote:
		if m.Task != Classification {
			return fmt.Errorf("blend rule %q needs classification, the blend is %s", b.Rule, m.Task)
		}
	default:
		return fmt.Errorf("blend rule %q: want %q or %q", b.Rule, BlendAverage, BlendVote)
	}
	if len(b.Members) == 0 || len(b.Names) != len(b.Members) || len(b.Weights) != len(b.Members) {
		return fmt.Errorf("blend of %d members with %d names and %d weights", len(b.Members), len(b.Names), len(b.Weights))
	}
	sum := 0.0
	for j, mem := range b.Members {
		name := b.Names[j]
		if mem == nil {
			return fmt.Errorf("blend member %q is nil", name)
		}
		if mem.Method == MethodBlend {
			return fmt.Errorf("blend member %q is itself a blend", name)
		}
		if err := mem.checkStructure(); err != nil {
			return fmt.Errorf("blend member %q: %w", name, err)
		}
		if mem.Task != m.Task {
			return fmt.Errorf("blend member %q is %s, the blend %s", name, mem.Task, m.Task)
		}
		if !slices.Equal(mem.Classes, m.Classes) {
			return fmt.Errorf("blend member %q has classes %q, the blend %q", name, mem.Classes, m.Classes)
		}
		w := b.Weights[j]
		if !(w >= 0) || math.IsInf(w, 0) {
			return fmt.Errorf("blend member %q has weight %v", name, w)
		}
		sum += w
	}
	if !(sum > 0) || math.IsInf(sum, 0) {
		return fmt.Errorf("blend weights sum to %v", sum)
	}
	if err := b.checkFitted(m.Task); err != nil {
		return err
	}
	feats, err := b.union()
	if err != nil {
		return err
	}
	if len(feats) != len(m.Features) {
		return fmt.Errorf("blend of %d features, its members have %d", len(m.Features), len(feats))
	}
	for i := range feats {
		f, g := &feats[i], &m.Features[i]
		if f.Name != g.Name || f.Kind != g.Kind || !slices.Equal(f.Levels, g.Levels) {
			return fmt.Errorf("blend feature %d is %q, its members' is %q", i, g.Name, f.Name)
		}
	}
	return nil
}

// prepare derives the index maps and the scratch size of a checked blend.
func (b *Blend) prepare(m *Model) {
	at := make(map[string]int, len(m.Features))
	for i, f := range m.Features {
		at[f.Name] = i
	}
	b.index = make([][]int, len(b.Members))
	b.scratch = m.Width()
	for j, mem := range b.Members {
		b.index[j] = make([]int, len(mem.Features))
		for f, fi := range mem.Features {
			b.index[j][f] = at[fi.Name]
		}
		b.scratch += len(mem.Features)
	}
}

// blendRow is PredictRow for a blend: each member scores the row mapped to its feature
// order, in member order, and the rule combines the predictions.
func (m *Model) blendRow(row, dst []float64) {
	b := m.Blend
	buf := blendScratch.Get().(*[]float64)
	if cap(*buf) < b.scratch {
		*buf = make([]float64, b.scratch)
	}
	s := (*buf)[:b.scratch]
	W := len(dst)
	pred, s := s[:W], s[W:]
	clear(dst)
	for j, mem := range b.Members {
		idx := b.index[j]
		r := s[:len(idx)]
		for f, i := range idx {
			r[f] = row[i]
		}
		mem.PredictRow(r, pred)
		w := b.Weights[j]
		if b.Rule == BlendVote {
			dst[Class(pred)] += w
			continue
		}
		for k, v := range pred {
			dst[k] += w * v
		}
	}
	blendScratch.Put(buf)
}

// checkFitted checks a blend's fit record: the task's loss, at least one row, finite
// losses ≥ 0, one per member.
func (b *Blend) checkFitted(task Task) error {
	f := b.Fitted
	if f == nil {
		return nil
	}
	want := FitMSE
	if task == Classification {
		want = FitLogLoss
	}
	if f.Metric != want {
		return fmt.Errorf("blend fitted on %q, want %q for %s", f.Metric, want, task)
	}
	if f.Rows < 1 {
		return fmt.Errorf("blend fitted on %d rows", f.Rows)
	}
	if len(f.MemberLoss) != len(b.Members) {
		return fmt.Errorf("blend fit record with %d member losses for %d members", len(f.MemberLoss), len(b.Members))
	}
	for _, v := range append([]float64{f.Loss}, f.MemberLoss...) {
		if !(v >= 0) || math.IsInf(v, 0) {
			return fmt.Errorf("blend fit record with loss %v", v)
		}
	}
	return nil
}
