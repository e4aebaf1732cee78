package forest

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
)

// benchData makes a seeded mixed data set: numeric features (some with missing values),
// two categorical ones, and a binary target that depends on most of them.
func benchData(rows, numeric int, seed uint64) (*Dataset, [][]float64) {
	rng := rand.New(rand.NewPCG(seed, 7))
	d := NewDataset(rows)
	cols := make([][]float64, 0, numeric+2)
	logit := make([]float64, rows)
	for f := range numeric {
		x := make([]float64, rows)
		for i := range x {
			x[i] = rng.NormFloat64()
			if f < numeric/2 {
				logit[i] += x[i] * float64(f%3+1) / 3
			}
			if f%5 == 1 && rng.Float64() < 0.05 {
				x[i] = math.NaN()
			}
		}
		d.AddNumeric(fmt.Sprintf("x%02d", f), x)
		cols = append(cols, x)
	}
	for _, levels := range []int{5, 50} {
		names := make([]string, levels)
		effect := make([]float64, levels)
		for l := range names {
			names[l] = fmt.Sprintf("l%d", l)
			effect[l] = rng.NormFloat64()
		}
		codes := make([]int32, rows)
		x := make([]float64, rows)
		for i := range codes {
			codes[i] = int32(rng.IntN(levels))
			x[i] = float64(codes[i])
			logit[i] += effect[codes[i]]
		}
		d.AddCategorical(fmt.Sprintf("c%d", levels), codes, names)
		cols = append(cols, x)
	}
	y := make([]int32, rows)
	for i := range y {
		if rng.Float64() < 1/(1+math.Exp(-logit[i]+1.5)) {
			y[i] = 1
		}
	}
	d.SetClassTarget("y", y, []string{"0", "1"})
	return d, cols
}

func BenchmarkTrain(b *testing.B) {
	for _, rows := range []int{10_000, 100_000} {
		for _, method := range []Method{MethodTree, MethodForest, MethodBoosting} {
			b.Run(fmt.Sprintf("rows=%d/method=%s", rows, method), func(b *testing.B) {
				d, _ := benchData(rows, 18, 1)
				p := DefaultParams(method)
				switch method {
				case MethodForest:
					p.Trees = 10
				case MethodBoosting:
					p.Trees = 20
				}
				p.PermutationRows = -1
				b.ReportAllocs()
				for b.Loop() {
					if _, err := Train(context.Background(), d, p); err != nil {
						b.Fatal(err)
					}
				}
			})
		}
	}
}

// BenchmarkPredict scores rows with a 100-tree forest; it reports rows and node visits
// per second.
func BenchmarkPredict(b *testing.B) {
	for _, rows := range []int{20_000} {
		d, cols := benchData(rows, 18, 2)
		p := DefaultParams(MethodForest)
		p.PermutationRows = -1
		m, err := Train(context.Background(), d, p)
		if err != nil {
			b.Fatal(err)
		}
		visits := 0
		row := make([]float64, len(cols))
		for _, t := range m.Trees {
			depth := t.nodeDepths()
			for i := range rows {
				for f := range cols {
					row[f] = cols[f][i]
				}
				visits += depth[t.Leaf(row)] + 1
			}
		}
		for _, threads := range []int{1, 2} {
			b.Run(fmt.Sprintf("rows=%d/threads=%d", rows, threads), func(b *testing.B) {
				out := make([]float64, rows*m.Width())
				for b.Loop() {
					if err := m.Predict(cols, out, threads); err != nil {
						b.Fatal(err)
					}
				}
				s := b.Elapsed().Seconds() / float64(b.N)
				b.ReportMetric(float64(rows)/s, "rows/s")
				b.ReportMetric(float64(visits)/s, "visits/s")
			})
		}
	}
}

// nodeDepths returns each node's depth (root 0).
func (t *Tree) nodeDepths() []int {
	depth := make([]int, len(t.Nodes))
	for i, nd := range t.Nodes {
		if nd.Left >= 0 {
			depth[nd.Left], depth[nd.Left+1] = depth[i]+1, depth[i]+1
		}
	}
	return depth
}

// BenchmarkBoost trains 40 boosting rounds (depth 6) on one thread, the shape whose
// histogram and partition loops dominate the benchmark runs at a million rows.
func BenchmarkBoost(b *testing.B) {
	d, _ := benchData(300_000, 18, 1)
	p := DefaultParams(MethodBoosting)
	p.Trees, p.Threads = 40, 1
	b.ReportAllocs()
	for b.Loop() {
		if _, err := Train(context.Background(), d, p); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(p.Trees)*float64(b.N)/b.Elapsed().Seconds(), "rounds/s")
}
