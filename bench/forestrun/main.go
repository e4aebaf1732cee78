// Command forestrun trains the engine on a benchmark CSV and scores a test CSV, printing
// the same RESULT line as the peer scripts in the shared bench folder, so that copse and
// its peers are timed the same way by run_one.sh.
//
//	go build -o /tmp/forestrun ./bench/forestrun
//	run_one.sh copse_rf 1 -- /tmp/forestrun -method forest -task cls TRAIN.csv TEST.csv
package main

import (
	"bufio"
	"context"
	"encoding/json"
	"flag"
	"fmt"
	"math"
	"os"
	"runtime"
	"runtime/pprof"
	"slices"
	"strconv"
	"strings"
	"time"
	"unsafe"

	"github.com/copse-dev/copse/forest"
)

func main() {
	method := flag.String("method", "forest", "tree, bagging, forest or boosting")
	task := flag.String("task", "cls", "cls or reg (target column y)")
	trees := flag.Int("trees", 100, "trees (boosting: rounds)")
	learningRate := flag.Float64("learning-rate", forest.DefaultLearningRate, "boosting: learning rate")
	depth := flag.Int("max-depth", -1, "max depth (-1: the method's default)")
	minLeaf := flag.Float64("min-leaf", 0, "least leaf weight (0: the method's default)")
	threads := flag.Int("threads", 2, "threads")
	bins := flag.Int("bins", forest.DefaultBins, "bins")
	permRows := flag.Int("permutation-rows", forest.DefaultPermutationRows, "out-of-bag rows per tree for permutation importance (-1: off)")
	cpuProfile := flag.String("cpuprofile", "", "write a CPU profile of training and scoring here")
	flag.Parse()
	if *cpuProfile != "" {
		f, err := os.Create(*cpuProfile)
		check(err)
		check(pprof.StartCPUProfile(f))
		defer pprof.StopCPUProfile()
	}
	if flag.NArg() < 2 {
		fmt.Fprintln(os.Stderr, "usage: forestrun [flags] TRAIN.csv TEST.csv [PRED_OUT]")
		os.Exit(2)
	}
	t0 := time.Now()
	train, err := readCSV(flag.Arg(0), nil)
	check(err)
	test, err := readCSV(flag.Arg(1), train)
	check(err)
	loadS := time.Since(t0).Seconds()

	d := forest.NewDataset(train.rows)
	for _, c := range train.cols {
		switch {
		case c.name == "y" && *task == "cls":
			codes := make([]int32, len(c.num))
			for i, v := range c.num {
				codes[i] = int32(v)
			}
			check(d.SetClassTarget("y", codes, []string{"0", "1"}))
		case c.name == "y":
			check(d.SetRegressionTarget("y", c.num))
		case c.levels != nil:
			check(d.AddCategorical(c.name, c.codes, c.levels))
		default:
			check(d.AddNumeric(c.name, c.num))
		}
	}
	p := forest.DefaultParams(forest.Method(*method))
	p.Trees, p.Threads, p.Bins, p.PermutationRows = *trees, *threads, *bins, *permRows
	if p.Method == forest.MethodTree {
		p.Trees = 1
	}
	if p.Method == forest.MethodBoosting {
		p.LearningRate = *learningRate
	}
	if *depth >= 0 {
		p.MaxDepth = *depth
	}
	if *minLeaf > 0 {
		p.MinLeaf = *minLeaf
	}
	t1 := time.Now()
	m, err := forest.Train(context.Background(), d, p)
	check(err)
	trainS := time.Since(t1).Seconds()
	var ms runtime.MemStats
	runtime.ReadMemStats(&ms)

	cols := make([][]float64, len(m.Features))
	for f, fi := range m.Features {
		c := test.col(fi.Name)
		if fi.Kind == forest.Numeric {
			cols[f] = c.num
		} else {
			cols[f] = make([]float64, test.rows)
			for i, code := range c.codes {
				cols[f][i] = math.NaN()
				if code >= 0 {
					cols[f][i] = float64(code)
				}
			}
		}
	}
	out := make([]float64, test.rows*m.Width())
	t2 := time.Now()
	check(m.Predict(cols, out, *threads))
	predS := time.Since(t2).Seconds()
	nodes, modelBytes := 0, 0
	for _, t := range m.Trees {
		nodes += len(t.Nodes)
		modelBytes += cap(t.Nodes)*int(unsafe.Sizeof(forest.Node{})) + 8*(cap(t.Gain)+cap(t.Cover)+cap(t.Value))
		for _, ls := range t.LevelSets {
			modelBytes += 8 * cap(ls)
		}
	}
	binnedBytes := train.rows * len(m.Features) // one byte per cell when every feature has ≤ 256 bins
	y := test.col("y").num
	rec := map[string]any{
		"library": "copse", "model": *method, "task": *task, "train_file": flag.Arg(0),
		"n_train": train.rows, "n_test": test.rows, "threads": *threads,
		"load_s": loadS, "train_s": trainS, "predict_s": predS,
		"extra": map[string]any{"nodes": nodes, "heap_sys_mb": ms.HeapSys >> 20, "oob": oobMetrics(m),
			"model_mb": modelBytes >> 20, "binned_mb": binnedBytes >> 20},
	}
	var pred []float64
	if *task == "cls" {
		pred = make([]float64, test.rows)
		pos := make([]bool, test.rows)
		for i := range pred {
			pred[i] = out[i*2+1]
			pos[i] = y[i] == 1
		}
		acts := make([]int32, test.rows)
		for i := range acts {
			acts[i] = int32(y[i])
		}
		for _, mt := range forest.ClassificationMetrics(acts, out, 2, nil) {
			rec[strings.ReplaceAll(mt.Name, "_", "")] = mt.Value
		}
	} else {
		pred = out
		for _, mt := range forest.RegressionMetrics(y, out, nil) {
			rec[mt.Name] = mt.Value
		}
	}
	b, _ := json.Marshal(rec)
	fmt.Printf("train_s: %.2f predict_s: %.2f nodes: %d\n", trainS, predS, nodes)
	fmt.Println("RESULT " + string(b))
	if flag.NArg() > 2 {
		f, err := os.Create(flag.Arg(2))
		check(err)
		w := bufio.NewWriter(f)
		for _, v := range pred {
			fmt.Fprintf(w, "%.9g\n", v)
		}
		check(w.Flush())
		check(f.Close())
	}
}

// check ends the program on an error; it stops a running CPU profile first.
func check(err error) {
	if err != nil {
		pprof.StopCPUProfile()
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
}

type column struct {
	name   string
	num    []float64
	codes  []int32
	levels []string
}

type table struct {
	rows int
	cols []*column
}

func (t *table) col(name string) *column {
	for _, c := range t.cols {
		if c.name == name {
			return c
		}
	}
	fmt.Fprintf(os.Stderr, "no column %q\n", name)
	os.Exit(1)
	return nil
}

// readCSV reads a benchmark file: numeric columns parse as floats (empty = NaN); a column
// whose first value does not parse is categorical, coded over the levels of like (the
// training table) when given, else over its sorted levels.
func readCSV(path string, like *table) (*table, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	sc.Buffer(make([]byte, 1<<20), 1<<20)
	if !sc.Scan() {
		return nil, fmt.Errorf("%s: empty", path)
	}
	names := strings.Split(sc.Text(), ",")
	t := &table{}
	raw := make([][]string, len(names))
	for _, n := range names {
		t.cols = append(t.cols, &column{name: n})
	}
	for sc.Scan() {
		fields := strings.Split(sc.Text(), ",")
		for j, c := range t.cols {
			v := fields[j]
			if raw[j] != nil || (v != "" && !isNum(v)) {
				if raw[j] == nil {
					raw[j] = make([]string, len(c.num))
				}
				raw[j] = append(raw[j], v)
				continue
			}
			x := math.NaN()
			if v != "" {
				x, _ = strconv.ParseFloat(v, 64)
			}
			c.num = append(c.num, x)
		}
		t.rows++
	}
	for j, c := range t.cols {
		if raw[j] == nil {
			continue
		}
		c.num = nil
		if like != nil {
			c.levels = like.col(c.name).levels
		} else {
			c.levels = slices.Compact(slices.Sorted(slices.Values(raw[j])))
			if len(c.levels) > 0 && c.levels[0] == "" {
				c.levels = c.levels[1:]
			}
		}
		c.codes = make([]int32, len(raw[j]))
		for i, v := range raw[j] {
			k, ok := slices.BinarySearch(c.levels, v)
			c.codes[i] = int32(k)
			if !ok || v == "" {
				c.codes[i] = forest.Missing
			}
		}
	}
	return t, sc.Err()
}

func isNum(s string) bool {
	_, err := strconv.ParseFloat(s, 64)
	return err == nil
}

func oobMetrics(m *forest.Model) []forest.Metric {
	if m.OOB == nil {
		return nil
	}
	return m.OOB.Metrics
}
