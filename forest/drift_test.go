package forest

import (
	"context"
	"fmt"
	"math"
	"testing"
)

// PSI by hand: shares (0.5, 0.5) → (0.25, 0.75) give 0.25·ln 2 + 0.25·ln 1.5 = 0.25·ln 3;
// an empty bin's share is floored at 1e-4.
func TestPSIByHand(t *testing.T) {
	cases := []struct {
		name             string
		expected, actual []float64
		want             float64
	}{
		{"same", []float64{3, 1, 6}, []float64{30, 10, 60}, 0},
		{"quarter moves", []float64{50, 50}, []float64{25, 75}, 0.25 * math.Log(3)},
		{"both empty", []float64{1, 0}, []float64{2, 0}, 0},
		{"one side empty", []float64{1, 1}, []float64{1, 0}, 0.5*math.Log(2) + (1e-4-0.5)*math.Log(1e-4/0.5)},
		{"no weight", []float64{0, 0}, []float64{1, 0}, math.NaN()},
	}
	for _, c := range cases {
		got := PSI(c.expected, c.actual)
		if math.IsNaN(c.want) != math.IsNaN(got) || (!math.IsNaN(c.want) && math.Abs(got-c.want) > 1e-12) {
			t.Errorf("%s: PSI %v, want %v", c.name, got, c.want)
		}
	}
}

// The status thresholds 0.10 and 0.25 are common practice in credit scoring.
func TestDriftStatus(t *testing.T) {
	for _, c := range []struct {
		psi  float64
		want string
	}{{0, "stable"}, {0.0999, "stable"}, {0.1, "watch"}, {0.2499, "watch"}, {0.25, "shifted"}, {3, "shifted"}, {math.NaN(), ""}} {
		if got := DriftStatus(c.psi); got != c.want {
			t.Errorf("DriftStatus(%v) = %q, want %q", c.psi, got, c.want)
		}
	}
}

// driftData draws rows with n0 ~ N(0, 1), n1 ~ N(5, 2) with 5 % missing, a categorical
// c with levels a, b, c (weights 0.5, 0.3, 0.2), and a class driven by n0 and c.
func driftData(seed uint64, rows int, shift float64) (cols [][]float64, y []int32) {
	r := newRand(seed)
	n0, n1, c := make([]float64, rows), make([]float64, rows), make([]float64, rows)
	y = make([]int32, rows)
	for i := range rows {
		n0[i] = r.NormFloat64() + shift
		n1[i] = 5 + 2*r.NormFloat64()
		if r.Float64() < 0.05 {
			n1[i] = math.NaN()
		}
		switch u := r.Float64(); {
		case u < 0.5:
			c[i] = 0
		case u < 0.8:
			c[i] = 1
		default:
			c[i] = 2
		}
		if r.Float64() < sigmoid(1.5*n0[i]+c[i]-1) {
			y[i] = 1
		}
	}
	return [][]float64{n0, n1, c}, y
}

func driftModel(t *testing.T, trees int) *Model {
	t.Helper()
	cols, y := driftData(1, 5000, 0)
	d := NewDataset(5000)
	if err := d.AddNumeric("n0", cols[0]); err != nil {
		t.Fatal(err)
	}
	if err := d.AddNumeric("n1", cols[1]); err != nil {
		t.Fatal(err)
	}
	codes := make([]int32, len(cols[2]))
	for i, v := range cols[2] {
		codes[i] = int32(v)
	}
	if err := d.AddCategorical("c", codes, []string{"a", "b", "c"}); err != nil {
		t.Fatal(err)
	}
	if err := d.SetClassTarget("y", y, []string{"no", "yes"}); err != nil {
		t.Fatal(err)
	}
	p := DefaultParams(MethodForest)
	p.Trees, p.Threads, p.PermutationRows = trees, 1, -1
	m, err := Train(context.Background(), d, p)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// The check (thresholds common practice): a fresh sample from the training
// distribution gives every input a PSI below 0.1; shifting n0's mean by one standard
// deviation gives n0 a PSI above 0.25 and leaves the others stable. The score's PSI is
// below 0.1 for the fresh sample and above 0.25 for the shifted one (n0 drives the
// score), also for a 20-tree forest, whose out-of-bag scores average about 7 trees.
func TestDriftShift(t *testing.T) {
	for _, trees := range []int{20, 100} {
		m := driftModel(t, trees)
		cases := []struct {
			name    string
			shift   float64
			shifted string // the feature expected above 0.25, "" for none
		}{
			{"same distribution", 0, ""},
			{"n0 shifted by one sd", 1, "n0"},
		}
		for _, c := range cases {
			t.Run(fmt.Sprintf("%d trees/%s", trees, c.name), func(t *testing.T) {
				cols, _ := driftData(2, 2000, c.shift)
				got, err := m.Drift(cols, nil)
				if err != nil {
					t.Fatal(err)
				}
				if len(got) != 3 {
					t.Fatalf("%d drift rows, want 3", len(got))
				}
				for _, fd := range got {
					t.Logf("%s: PSI %.4f over %d groups (%s)", fd.Feature, fd.PSI, fd.Groups, fd.Status)
					if fd.Feature == c.shifted {
						if !(fd.PSI > 0.25) || fd.Status != DriftShifted {
							t.Errorf("%s: PSI %v (%s), want above 0.25", fd.Feature, fd.PSI, fd.Status)
						}
					} else if !(fd.PSI < 0.1) || fd.Status != DriftStable {
						t.Errorf("%s: PSI %v (%s), want below 0.1", fd.Feature, fd.PSI, fd.Status)
					}
				}
				sd, err := m.ScoreDrift(cols)
				if err != nil {
					t.Fatal(err)
				}
				t.Logf("score: PSI %.4f over %d groups", sd.PSI, sd.Groups)
				if c.shifted == "" && !(sd.PSI < 0.1) {
					t.Errorf("score PSI %v, want below 0.1", sd.PSI)
				}
				if c.shifted != "" && !(sd.PSI > 0.25) {
					t.Errorf("score PSI %v, want above 0.25: the shifted input drives the score", sd.PSI)
				}
				again, _ := m.ScoreDrift(cols)
				if again != sd {
					t.Errorf("score drift %+v, then %+v: not repeatable", sd, again)
				}
			})
		}
	}
}

// Numeric bins merge into at most 10 groups; the missing bin stays apart; categorical
// bins stay one per level, and an unseen level code counts as missing.
func TestDriftGroupingAndCoding(t *testing.T) {
	m := driftModel(t, 100)
	if nb := m.Features[0].Binning.NumBins(); nb <= 11 {
		t.Fatalf("n0 has %d bins; the test needs more than 11", nb)
	}
	g := driftGrouping(&m.Features[0].Binning)
	if g[0] != 0 || g[1] != 1 || g[len(g)-1] != driftGroups {
		t.Errorf("n0 groups start %v … end %v; want 0, 1 … %d", g[:2], g[len(g)-1], driftGroups)
	}
	for i := 2; i < len(g); i++ {
		if g[i] < g[i-1] || g[i] > g[i-1]+1 {
			t.Fatalf("groups not consecutive at bin %d: %v", i, g)
		}
	}
	b := &m.Features[2].Binning
	for _, c := range []struct {
		x    float64
		want int
	}{{0, int(b.LevelBin[0])}, {2, int(b.LevelBin[2])}, {3, 0}, {-1, 0}, {math.NaN(), 0}} {
		if got := b.binOfCoded(c.x); got != c.want {
			t.Errorf("categorical code %v in bin %d, want %d", c.x, got, c.want)
		}
	}
	// Every row of level "c" moved to an unseen level: its share goes to the missing bin.
	cols, _ := driftData(2, 2000, 0)
	for i, v := range cols[2] {
		if v == 2 {
			cols[2][i] = 7
		}
	}
	got, err := m.Drift([][]float64{nil, nil, cols[2]}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != 1 || got[0].Feature != "c" || !(got[0].PSI > 0.25) {
		t.Errorf("drift %+v, want c alone and shifted", got)
	}
	// Weights: giving level "a" rows weight 0 moves half the mass away.
	cols, _ = driftData(2, 2000, 0)
	w := make([]float64, len(cols[2]))
	for i, v := range cols[2] {
		w[i] = 1
		if v == 0 {
			w[i] = 0
		}
	}
	got, err = m.Drift([][]float64{nil, nil, cols[2]}, w)
	if err != nil {
		t.Fatal(err)
	}
	if !(got[0].PSI > 0.25) {
		t.Errorf("weighted drift %+v, want shifted", got[0])
	}
}

func TestDriftErrors(t *testing.T) {
	m := driftModel(t, 100)
	cols, _ := driftData(2, 10, 0)
	cases := []struct {
		name string
		cols [][]float64
		w    []float64
	}{
		{"too few columns", cols[:2], nil},
		{"ragged", [][]float64{cols[0], cols[1][:5], cols[2]}, nil},
		{"no rows", [][]float64{nil, nil, nil}, nil},
		{"weights", cols, []float64{1}},
	}
	for _, c := range cases {
		if _, err := m.Drift(c.cols, c.w); err == nil {
			t.Errorf("%s: no error", c.name)
		}
	}
	if _, err := m.ScoreDrift(cols[:2]); err == nil {
		t.Error("score drift with too few columns: no error")
	}
}
