package forest

import (
	"context"
	"fmt"
	"sync"
	"testing"
)

// BenchmarkExplain explains rows with a 100-tree forest of depth ≤ 12 (Tree SHAP costs
// O(trees · leaves · depth²) per row); it reports rows per second over all threads and
// the forest's mean leaves per tree.
func BenchmarkExplain(b *testing.B) {
	const rows, batch = 20_000, 64
	d, cols := benchData(rows, 18, 3)
	p := DefaultParams(MethodForest)
	p.MaxDepth, p.PermutationRows = 12, -1
	m, err := Train(context.Background(), d, p)
	if err != nil {
		b.Fatal(err)
	}
	leaves := 0
	for _, t := range m.Trees {
		leaves += t.Leaves()
	}
	x := make([][]float64, batch)
	for i := range x {
		x[i] = make([]float64, len(cols))
		for f := range cols {
			x[i][f] = cols[f][i]
		}
	}
	for _, threads := range []int{1, 2} {
		b.Run(fmt.Sprintf("trees=%d/threads=%d", len(m.Trees), threads), func(b *testing.B) {
			scratch := make([]Explanation, threads)
			for w := range scratch {
				if err := m.Explain(x[0], &scratch[w]); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportAllocs()
			for b.Loop() {
				var wg sync.WaitGroup
				for w := range threads {
					wg.Add(1)
					go func() {
						defer wg.Done()
						for i := w; i < batch; i += threads {
							if err := m.Explain(x[i], &scratch[w]); err != nil {
								panic(err)
							}
						}
					}()
				}
				wg.Wait()
			}
			s := b.Elapsed().Seconds() / float64(b.N)
			b.ReportMetric(batch/s, "rows/s")
			b.ReportMetric(float64(leaves)/float64(len(m.Trees)), "leaves/tree")
		})
	}
}
