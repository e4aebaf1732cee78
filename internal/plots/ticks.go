package plots

import (
	"math"
	"strconv"

	"gonum.org/v1/plot"
)

// ticks marks an axis at four to eight round values (1, 2 or 5 times a power of ten),
// all labelled with as many decimals as the step needs, with an unlabelled tick
// between each pair. gonum's default marks about three, too few to read a value off.
type ticks struct{}

// Ticks implements plot.Ticker.
func (ticks) Ticks(lo, hi float64) []plot.Tick {
	if !(hi > lo) || !finite(lo) || !finite(hi) {
		return nil
	}
	step := niceStep((hi - lo) / 5)
	decimals := max(0, -int(math.Floor(math.Log10(step)+1e-9)))
	var out []plot.Tick
	first := math.Ceil(lo/step-1e-9) * step
	for i := 0; ; i++ {
		v := first + float64(i)*step
		if v > hi+step*1e-9 {
			break
		}
		if math.Abs(v) < step*1e-9 {
			v = 0 // not -0
		}
		out = append(out, plot.Tick{Value: v, Label: strconv.FormatFloat(v, 'f', decimals, 64)})
		if half := v + step/2; half <= hi {
			out = append(out, plot.Tick{Value: half})
		}
	}
	if half := first - step/2; half >= lo {
		out = append(out, plot.Tick{Value: half})
	}
	return out
}

// niceStep rounds x to the nearest of 1, 2 or 5 times a power of ten (in the sense
// of ratios: 1.5, 3 and 7 are the cut points).
func niceStep(x float64) float64 {
	p := math.Pow(10, math.Floor(math.Log10(x)))
	switch f := x / p; {
	case f < 1.5:
		return p
	case f < 3:
		return 2 * p
	case f < 7:
		return 5 * p
	default:
		return 10 * p
	}
}
