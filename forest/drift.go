package forest

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
)

// Population stability index (PSI): how far a distribution over bins has moved from a
// reference one,
//
//	PSI = Σ_b (a_b − e_b) · ln(a_b / e_b)
//
// with e_b the reference share and a_b the new share of bin b. It is the symmetric
// Kullback–Leibler divergence (Jeffreys' J) of the two binned distributions. The
// thresholds below 0.10 "stable", up to 0.25 "watch" and from 0.25 "shifted" are common
// practice in credit scoring.
const (
	PSIWatch   = 0.10
	PSIShifted = 0.25
)

// Drift statuses, from [DriftStatus].
const (
	DriftStable  = "stable"
	DriftWatch   = "watch"
	DriftShifted = "shifted"
)

// psiEpsilon replaces an empty bin's share (in either distribution) so its term stays
// finite: a bin that is empty on one side still adds a large term, as it should, but not
// an infinite one. Flooring shares at a small constant such as 1e-4 is common practice.
const psiEpsilon = 1e-4

// driftGroups is how many groups of about equal training weight a numeric feature's
// bins are merged into (the missing bin stays apart). PSI over many thin bins grows with
// sampling noise alone: for a sample of n rows from the reference distribution over B
// bins, n·PSI is roughly χ² with B − 1 degrees of freedom, so PSI ≈ (B − 1)/n on
// average; with the model's up to 255 bins and 1,000 rows that is 0.25, "shifted" for no
// shift. Ten groups (deciles) are common practice for PSI.
const driftGroups = 10

// DriftStatus names a PSI value: stable below [PSIWatch], watch below [PSIShifted],
// shifted from there on. NaN gives "".
func DriftStatus(psi float64) string {
	switch {
	case psi < PSIWatch:
		return DriftStable
	case psi < PSIShifted:
		return DriftWatch
	case psi >= PSIShifted:
		return DriftShifted
	}
	return ""
}

// PSI is the population stability index of actual against expected, both weights per
// bin (any scale: each is turned into shares), with empty shares floored at 1e-4. It
// returns NaN when either side has no weight.
func PSI(expected, actual []float64) float64 {
	var se, sa float64
	for b := range expected {
		se += expected[b]
		sa += actual[b]
	}
	if !(se > 0) || !(sa > 0) {
		return math.NaN()
	}
	var psi float64
	for b := range expected {
		e := max(expected[b]/se, psiEpsilon)
		a := max(actual[b]/sa, psiEpsilon)
		psi += (a - e) * math.Log(a/e)
	}
	return psi
}

// FeatureDrift is one input's population stability index against the training rows.
type FeatureDrift struct {
	Feature string
	PSI     float64
	Status  string // see [DriftStatus]
	// Groups is how many bins the index was computed over, the missing bin included.
	Groups int
}

// Drift compares new rows with the training distribution the model keeps for each
// feature ([Binning].Counts, the training weight per bin): cols holds one column per
// model feature in model coding (numbers, level codes, NaN or a negative code for
// missing; levels unseen in training count as missing, as in prediction), w the rows'
// weights (nil: ones). Numeric features' bins are merged into at most 10 groups of about
// equal training weight, the missing bin kept apart; categorical features keep one bin
// per level. A nil column skips its feature.
func (m *Model) Drift(cols [][]float64, w []float64) ([]FeatureDrift, error) {
	if len(cols) != len(m.Features) {
		return nil, fmt.Errorf("forest: drift: %d columns for %d features", len(cols), len(m.Features))
	}
	n := -1
	for f, c := range cols {
		if c == nil {
			continue
		}
		if n >= 0 && len(c) != n {
			return nil, fmt.Errorf("forest: drift: feature %q has %d rows, another %d", m.Features[f].Name, len(c), n)
		}
		n = len(c)
	}
	if n <= 0 {
		return nil, fmt.Errorf("forest: drift: no rows")
	}
	if w != nil && len(w) != n {
		return nil, fmt.Errorf("forest: drift: %d weights for %d rows", len(w), n)
	}
	var out []FeatureDrift
	for f, c := range cols {
		if c == nil {
			continue
		}
		fi := &m.Features[f]
		b := &fi.Binning
		if len(b.Counts) == 0 {
			return nil, fmt.Errorf("forest: drift: feature %q keeps no training distribution", fi.Name)
		}
		group := driftGrouping(b)
		G := int(slices.Max(group)) + 1
		expected := make([]float64, G)
		for bin, cnt := range b.Counts {
			expected[group[bin]] += cnt
		}
		actual := make([]float64, G)
		for i, x := range c {
			actual[group[b.binOfCoded(x)]] += weightAt(w, i)
		}
		psi := PSI(expected, actual)
		out = append(out, FeatureDrift{Feature: fi.Name, PSI: psi, Status: DriftStatus(psi), Groups: G})
	}
	return out, nil
}

// binOfCoded is the bin of a value in model coding: numbers by edge, level codes by
// LevelBin; missing values and levels unseen in training go to bin 0.
func (b *Binning) binOfCoded(x float64) int {
	if b.Kind == Numeric {
		return b.binOf(x)
	}
	if !(x >= 0) || x >= float64(len(b.LevelBin)) {
		return 0
	}
	return int(b.LevelBin[int(x)])
}

// driftGrouping maps each bin to its PSI group: bin 0 (missing) to group 0; a numeric
// feature's value bins, in order, to groups 1…≤10 cut where the running training weight
// passes k/10 of the total; a categorical feature's bins to themselves.
func driftGrouping(b *Binning) []int32 {
	group := make([]int32, len(b.Counts))
	if b.Kind != Numeric {
		for i := range group {
			group[i] = int32(i)
		}
		return group
	}
	var total float64
	for _, c := range b.Counts[1:] {
		total += c
	}
	g, cum := int32(1), 0.0
	for bin := 1; bin < len(b.Counts); bin++ {
		group[bin] = g
		cum += b.Counts[bin]
		if total > 0 && cum >= float64(g)*total/driftGroups && g < driftGroups && bin+1 < len(b.Counts) {
			g++
		}
	}
	return group
}

// ScoreDrift is the population stability index of the model's scores of new rows (cols
// in model coding, one column per feature) against its out-of-bag scores of its
// training rows, over bins cut at the deciles of the latter (fewer where scores tie).
// The score is the positive class's probability (two classes) or the value
// (regression).
//
// An out-of-bag score averages only the trees that left the row out (about 37 % of
// them), so it is rougher than the full model's score, and comparing the two would show
// drift where there is none (measured in drift_test.go: PSI 0.34 for a 20-tree forest
// and fresh rows from the training distribution). So each new row is scored the same
// way: by a random set of trees as large as the vote count of a randomly drawn training
// row. A new row is out of every tree's bag, so under no drift its score has the
// out-of-bag scores' distribution. The draws are seeded by the model's seed and the row
// index, so the result is the same on every run.
//
// Models without out-of-bag results (single trees, boosting, AdaBoost, linear models,
// blends) keep no scores of their training rows, and a model of more than two classes
// has no single score: the error says which.
func (m *Model) ScoreDrift(cols [][]float64) (FeatureDrift, error) {
	o := m.OOB
	switch {
	case o == nil:
		return FeatureDrift{}, fmt.Errorf("forest: score drift: method %s keeps no out-of-bag scores of its training rows", m.Method)
	case m.Task == Classification && len(m.Classes) != 2:
		return FeatureDrift{}, fmt.Errorf("forest: score drift: a model of %d classes has no single score", len(m.Classes))
	case len(cols) != len(m.Features):
		return FeatureDrift{}, fmt.Errorf("forest: score drift: %d columns for %d features", len(cols), len(m.Features))
	}
	W, k := m.Width(), 0
	if W == 2 {
		k = 1
	}
	var ref []float64
	var votes []int32
	for i, v := range o.Votes {
		if v > 0 {
			ref = append(ref, o.Value[i*W+k])
			votes = append(votes, v)
		}
	}
	if len(ref) == 0 {
		return FeatureDrift{}, fmt.Errorf("forest: score drift: no training row has an out-of-bag score")
	}
	n := 0
	if len(cols) > 0 {
		n = len(cols[0])
	}
	if n == 0 {
		return FeatureDrift{}, fmt.Errorf("forest: score drift: no rows")
	}
	T := len(m.Trees)
	row := make([]float64, len(cols))
	trees := make([]int, T)
	scores := make([]float64, n)
	for i := range n {
		for f, c := range cols {
			row[f] = c[i]
		}
		rng := rand.New(rand.NewPCG(m.Params.Seed, 0x64726966<<32|uint64(i))) // stream tag: "drif"
		v := int(votes[rng.IntN(len(votes))])
		for t := range trees {
			trees[t] = t
		}
		var sum float64
		for j := range v { // partial Fisher–Yates: v distinct trees
			r := j + rng.IntN(T-j)
			trees[j], trees[r] = trees[r], trees[j]
			t := m.Trees[trees[j]]
			sum += t.NodeValue(t.Leaf(row))[k]
		}
		scores[i] = sum / float64(v)
	}
	return scoreDrift(ref, scores), nil
}

// scoreDrift is the PSI of scores against ref over ref's decile bins.
func scoreDrift(ref, scores []float64) FeatureDrift {
	sorted := slices.Clone(ref)
	slices.Sort(sorted)
	var edges []float64 // upper edges, as in Binning: bin b holds edges[b-1] < s ≤ edges[b]
	for k := 1; k < driftGroups; k++ {
		q := sorted[max(k*len(sorted)/driftGroups-1, 0)] // the lower k/10 quantile
		if len(edges) == 0 || q > edges[len(edges)-1] {
			edges = append(edges, q)
		}
	}
	edges = append(edges, math.Inf(1))
	count := func(s []float64) []float64 {
		c := make([]float64, len(edges))
		for _, x := range s {
			b, _ := slices.BinarySearch(edges, x)
			c[b]++
		}
		return c
	}
	psi := PSI(count(ref), count(scores))
	return FeatureDrift{PSI: psi, Status: DriftStatus(psi), Groups: len(edges)}
}
