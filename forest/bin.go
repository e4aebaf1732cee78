package forest

import (
	"cmp"
	"math"
	"math/rand/v2"
	"slices"
	"sort"
)

// binSampleRows is how many rows numeric bin edges are computed from. Quantiles of a
// 200,000-row sample are within about 0.2 % of the full data's (DKW bound at 95 %), far
// finer than 255 bins need, and sorting it costs milliseconds.
const binSampleRows = 200_000

// Binning maps one feature's values to bins. Bin 0 holds missing values (and, for
// categorical features, levels never seen in training); bins 1…Bins-1 hold values.
type Binning struct {
	Kind Kind
	// Upper holds the inclusive upper edge of each value bin: bin b (b ≥ 1) holds the values
	// x with Upper[b-2] < x ≤ Upper[b-1]. The last edge is +Inf. Numeric features only.
	Upper []float64
	// LevelBin maps each level code to its bin; 0 for levels absent from the training rows.
	// Past the bin cap, the rarest levels share the last bin. Categorical features only.
	LevelBin []uint16
	// Counts is the training weight in each bin, missing bin first.
	Counts []float64
}

// NumBins is the number of bins, the missing bin included.
func (b *Binning) NumBins() int { return len(b.Counts) }

// binOf returns the bin of a numeric value: NaN goes to bin 0.
func (b *Binning) binOf(x float64) int {
	if x != x {
		return 0
	}
	return 1 + sort.SearchFloat64s(b.Upper, x)
}

// binnedColumn holds one feature's bin codes: one byte per row when the bins fit.
type binnedColumn struct {
	u8  []uint8
	u16 []uint16
}

func (c *binnedColumn) at(row int32) int {
	if c.u8 != nil {
		return int(c.u8[row])
	}
	return int(c.u16[row])
}

// sampleRows picks the rows that numeric bin edges are computed from: every row with
// positive weight when there are few, else a seeded uniform sample of them, in order.
func sampleRows(d *Dataset, seed uint64) []int32 {
	rows := make([]int32, 0, min(d.rows, binSampleRows))
	for i := 0; i < d.rows; i++ {
		if d.weight(i) > 0 {
			rows = append(rows, int32(i))
		}
	}
	if len(rows) <= binSampleRows {
		return rows
	}
	rng := rand.New(rand.NewPCG(seed, 0x62696e73)) // stream tag: "bins"
	for i := 0; i < binSampleRows; i++ {           // partial Fisher–Yates
		j := i + rng.IntN(len(rows)-i)
		rows[i], rows[j] = rows[j], rows[i]
	}
	rows = rows[:binSampleRows]
	slices.Sort(rows)
	return rows
}

// midpoint returns a threshold between a < b that keeps a on the left and b on the right.
func midpoint(a, b float64) float64 {
	m := a + (b-a)/2
	if !(m < b) || !(m >= a) {
		return a
	}
	return m
}

// numericEdges computes upper bin edges from sample values: one bin per distinct value
// when they fit (edges at midpoints, so thresholds fall halfway between observed
// values), otherwise roughly equal-frequency bins in which a heavy value keeps a bin of
// its own.
func numericEdges(sample []float64, maxBins int) []float64 {
	vals := make([]float64, 0, len(sample))
	for _, v := range sample {
		if v == v {
			vals = append(vals, v)
		}
	}
	if len(vals) == 0 {
		return []float64{math.Inf(1)}
	}
	slices.Sort(vals)
	total := len(vals)
	// The distinct values overwrite vals from the front (never past the value being
	// read), so the sample is copied once.
	counts := make([]int32, 0, min(total, 1024))
	nd := 0
	for i, v := range vals {
		if i == 0 || v != vals[nd-1] {
			vals[nd] = v
			nd++
			counts = append(counts, 0)
		}
		counts[nd-1]++
	}
	distinct := vals[:nd]
	var upper []float64
	if len(distinct) <= maxBins {
		upper = make([]float64, 0, len(distinct))
		for i := 0; i+1 < len(distinct); i++ {
			upper = append(upper, midpoint(distinct[i], distinct[i+1]))
		}
		return append(upper, math.Inf(1))
	}
	rest, binsLeft, cum := total, maxBins, 0
	for i := 0; i+1 < len(distinct) && binsLeft > 1; i++ {
		cum += int(counts[i])
		target := float64(rest) / float64(binsLeft)
		if float64(cum) >= target || float64(counts[i+1]) >= target {
			upper = append(upper, midpoint(distinct[i], distinct[i+1]))
			rest -= cum
			cum = 0
			binsLeft--
		}
	}
	return append(upper, math.Inf(1))
}

// binNumeric bins a numeric column.
func binNumeric(d *Dataset, values []float64, sample []int32, maxBins int) (Binning, binnedColumn) {
	sv := make([]float64, len(sample))
	for i, r := range sample {
		sv[i] = values[r]
	}
	b := Binning{Kind: Numeric, Upper: numericEdges(sv, maxBins)}
	b.Counts = make([]float64, len(b.Upper)+1)
	col := newBinnedColumn(d.rows, b.NumBins())
	for i, x := range values {
		bin := b.binOf(x)
		col.set(i, bin)
		b.Counts[bin] += d.weight(i)
	}
	return b, col
}

// binCategorical bins a categorical column: a bin per level seen in training; past the
// cap, the rarest levels share the last bin.
func binCategorical(d *Dataset, codes []int32, levels int, maxBins int) (Binning, binnedColumn) {
	weight := make([]float64, levels)
	seen := make([]bool, levels)
	for i, c := range codes {
		if c >= 0 && d.weight(i) > 0 {
			weight[c] += d.weight(i)
			seen[c] = true
		}
	}
	var kept []int32
	for l := range levels {
		if seen[l] {
			kept = append(kept, int32(l))
		}
	}
	b := Binning{Kind: Categorical, LevelBin: make([]uint16, levels)}
	if len(kept) > maxBins {
		// Keep the maxBins-1 heaviest levels (ties to the lower code); the rest share a bin.
		slices.SortStableFunc(kept, func(x, y int32) int { return cmp.Compare(weight[y], weight[x]) })
		other := uint16(maxBins)
		for _, l := range kept[maxBins-1:] {
			b.LevelBin[l] = other
		}
		kept = kept[:maxBins-1]
		slices.Sort(kept)
	}
	for i, l := range kept {
		b.LevelBin[l] = uint16(i + 1)
	}
	nb := len(kept) + 1
	if len(kept) < len(weight) && countSeen(seen) > len(kept) {
		nb++ // the shared bin
	}
	b.Counts = make([]float64, nb)
	col := newBinnedColumn(d.rows, nb)
	for i, c := range codes {
		bin := 0
		if c >= 0 {
			bin = int(b.LevelBin[c])
		}
		col.set(i, bin)
		b.Counts[bin] += d.weight(i)
	}
	return b, col
}

func countSeen(seen []bool) int {
	n := 0
	for _, s := range seen {
		if s {
			n++
		}
	}
	return n
}

func newBinnedColumn(rows, bins int) binnedColumn {
	if bins <= 256 {
		return binnedColumn{u8: make([]uint8, rows)}
	}
	return binnedColumn{u16: make([]uint16, rows)}
}

func (c *binnedColumn) set(row, bin int) {
	if c.u8 != nil {
		c.u8[row] = uint8(bin)
	} else {
		c.u16[row] = uint16(bin)
	}
}
