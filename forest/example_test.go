package forest_test

import (
	"context"
	"fmt"
	"math"

	"github.com/copse-dev/copse/forest"
)

// A forest on a tiny data set: an item is "large" when its size is 15 or more; its
// colour mostly agrees. The host fills a Dataset column by column, trains, and scores one
// row at a time (categorical values as level codes, NaN for a missing value).
func Example() {
	const n = 60
	size := make([]float64, n)
	colour := make([]int32, n) // codes into colours
	class := make([]int32, n)  // codes into classes
	colours := []string{"green", "red"}
	classes := []string{"small", "large"}
	for i := range n {
		size[i] = float64(i%30) + 0.5
		cut := 20.0 // first half: green below 20
		if i >= 30 {
			cut = 10 // second half: green below 10
		}
		if size[i] >= cut {
			colour[i] = 1
		}
		if size[i] >= 15 {
			class[i] = 1
		}
	}

	d := forest.NewDataset(n)
	if err := d.AddNumeric("size", size); err != nil {
		panic(err)
	}
	if err := d.AddCategorical("colour", colour, colours); err != nil {
		panic(err)
	}
	if err := d.SetClassTarget("kind", class, classes); err != nil {
		panic(err)
	}
	p := forest.DefaultParams(forest.MethodForest)
	p.Trees = 50
	m, err := forest.Train(context.Background(), d, p)
	if err != nil {
		panic(err)
	}

	for _, f := range m.Features {
		fmt.Printf("feature %s (%s)\n", f.Name, f.Kind)
	}
	pred := make([]float64, m.Width())
	for _, q := range []struct {
		label string
		row   []float64
	}{
		{"size 3, green", []float64{3, 0}},
		{"size 26, red", []float64{26, 1}},
		{"size 24, colour missing", []float64{24, math.NaN()}},
	} {
		m.PredictRow(q.row, pred)
		fmt.Printf("%s: %s (P(large) = %.1f)\n", q.label, m.Classes[forest.Class(pred)], pred[1])
	}
	// Output:
	// feature size (numeric)
	// feature colour (categorical)
	// size 3, green: small (P(large) = 0.0)
	// size 26, red: large (P(large) = 1.0)
	// size 24, colour missing: large (P(large) = 1.0)
}
