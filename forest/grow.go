package forest

import (
	"cmp"
	"errors"
	"math"
	"math/rand/v2"
	"slices"
	"sync"
	"sync/atomic"
)

// errStopped is returned by a grower whose training was cancelled.
var errStopped = errors.New("forest: training stopped")

// trainSet is the binned, read-only view of a data set that growers share.
type trainSet struct {
	rows int
	// The bins of every cell, row-major (a row's bins share a cache line, so one node
	// pass reads each row once for all drawn features); one byte per cell when every
	// feature has at most 256 bins, else two (mat16).
	mat8  []uint8
	mat16 []uint16
	// The same bins column by column (col8 or col16, by feature), for the partition.
	col8     [][]uint8
	col16    [][]uint16
	features int
	bins     []Binning
	task     Task
	classes  int
	ycls     []int32   // classification target
	yreg     []float64 // regression target
	// stat is the histogram width per bin: class weights, or (W, Σwy).
	stat int
	// width of a node's totals: class weights, or (W, Σwy, Σwy²).
	totalWidth int
	score      func([]float64) float64
	impurity   Impurity
	// newton marks boosting's statistics: per bin (H, S, N) = (Σwh, −Σwg, Σw) and node
	// totals (H, S, N, Σwh·(g/h)²), so that leaf sizes (MinLeaf) count row weight N while
	// gains and values use the hessian H. rowWeight holds w per row (nil: all ones).
	newton    bool
	rowWeight []float64
	// minHessian is the least H of a boosted leaf (0: none); see the constant.
	minHessian float64
	// penalty is the L2 penalty λ on leaf values (boosting): a node scores S²/(H+λ)
	// (score and scanNewton) and its value is S/(H+λ) (setValue). Zero elsewhere, which
	// leaves the plain squared-error mean unchanged.
	penalty float64
}

// weightOf is the weight held by histogram statistics s.
func (ts *trainSet) weightOf(s []float64) float64 {
	if ts.newton {
		return s[2]
	}
	if ts.task == Regression {
		return s[0]
	}
	w := 0.0
	for _, v := range s {
		w += v
	}
	return w
}

// growConfig holds the stopping rules of one training run.
type growConfig struct {
	maxDepth int // 0: unlimited
	minLeaf  float64
	minGain  float64 // share of the root weight
	drawn    int     // features drawn per split
	// leafLimit, when above 0, grows trees best first up to this many leaves.
	leafLimit int
	// threads splits the drawn features of large nodes between goroutines (boosting,
	// whose rounds run one at a time). Each bin's sum still runs over the rows in order,
	// so the histograms are the same on any number of threads.
	threads int
}

// pending is a node waiting on the grower's stack; its rows are rows[start:end].
type pending struct {
	node       int32
	start, end int32
	depth      int32
	hist       int32 // index of its ready histograms in grower.pool, or -1
}

// catEntry is one value bin of a categorical feature at a node, with its sort key.
type catEntry struct {
	bin int
	key float64
}

// grower grows trees one at a time; each worker owns one, so nothing in it is shared.
type grower struct {
	set    *trainSet
	cfg    growConfig
	rng    *rand.Rand
	cancel *atomic.Bool

	rows    []int32   // the tree's rows; each node owns a contiguous range
	wts     []float64 // their weights, kept in step with rows
	lab     []int32   // their classes (classification), in step with rows
	yv      []float64 // their values (regression), in step with rows
	tmpRows []int32
	tmpW    []float64
	tmpLab  []int32
	tmpY    []float64

	hist         []float64 // one histogram per drawn feature, stride apart; zero between uses
	stride       int
	lo, hi       []int     // per drawn feature: lowest and highest bin seen at the node
	cum, l, r    []float64 // stat-wide scratch
	zeros        []float64 // stat-wide, always zero: the missing bin of nodes without missing values
	cur          []float64 // totals of the node being split
	order        []int     // feature draw order
	cat          []catEntry
	inLeft, here []bool  // per-bin scratch for categorical splits
	dir          []uint8 // per-bin side of the split being applied (1: left)
	blockTot     []float64
	blockHist    []float64 // row blocks' histograms past the first (boosting)
	blockLeft    []int
	blockRight   []int // where each block's right rows go in a partition
	best         splitInfo
	parentScore  float64 // score of the node being split
	stack        []pending
	totals       []float64 // totals of stack entry k at k*totalWidth

	// subtract: boosting with every feature drawn keeps each node's histograms and gets
	// the larger child's as parent minus smaller child, building only the smaller one
	// from its rows. pool holds full histograms of every feature; free lists unused ones.
	subtract bool
	pool     [][]float64
	free     []int32
	// leafRows lists, after grow, each leaf with the range of rows it holds; boosting
	// updates the scores of the tree's rows from it without walking the tree.
	leafRows []leafRange
}

// leafRange is a leaf and its rows, rows[start:end] of the grown tree.
type leafRange struct {
	node       int32
	start, end int32
}

func newGrower(set *trainSet, cfg growConfig, cancel *atomic.Bool) *grower {
	maxBins := 0
	for i := range set.bins {
		maxBins = max(maxBins, set.bins[i].NumBins())
	}
	S, T := set.stat, set.totalWidth
	g := &grower{
		set: set, cfg: cfg, cancel: cancel,
		tmpRows: make([]int32, set.rows),
		tmpW:    make([]float64, set.rows),
		stride:  maxBins * S,
		hist:    make([]float64, cfg.drawn*maxBins*S),
		lo:      make([]int, cfg.drawn),
		hi:      make([]int, cfg.drawn),
		cum:     make([]float64, S),
		zeros:   make([]float64, S),
		l:       make([]float64, T),
		r:       make([]float64, T),
		cur:     make([]float64, T),
		order:   make([]int, set.features),
		inLeft:  make([]bool, maxBins),
		dir:     make([]uint8, maxBins),
		here:    make([]bool, maxBins),
	}
	g.subtract = set.newton && cfg.drawn == set.features
	if set.task == Regression {
		g.yv, g.tmpY = make([]float64, set.rows), make([]float64, set.rows)
	} else {
		g.lab, g.tmpLab = make([]int32, set.rows), make([]int32, set.rows)
	}
	return g
}

// grow fits one tree to rows with weights wts (both are reordered in place).
func (g *grower) grow(rows []int32, wts []float64, rng *rand.Rand) (*Tree, error) {
	set := g.set
	T := set.totalWidth
	g.rows, g.wts, g.rng = rows, wts, rng
	if set.task == Regression {
		n := len(rows)
		parallelFor((n+partitionBlock-1)/partitionBlock, g.cfg.threads, func(k int) {
			for i := k * partitionBlock; i < min(n, (k+1)*partitionBlock); i++ {
				g.yv[i] = set.yreg[rows[i]]
			}
		})
	} else {
		for i, r := range rows {
			g.lab[i] = set.ycls[r]
		}
	}
	for i := range g.order {
		g.order[i] = i
	}
	width := 1
	if set.task == Classification {
		width = set.classes
	}
	t := &Tree{Width: width}
	g.free = g.free[:0]
	for i := range g.pool {
		g.free = append(g.free, int32(i))
	}
	g.stack = append(g.stack[:0], pending{node: t.addNode(width), start: 0, end: int32(len(rows)), hist: -1})
	g.leafRows = g.leafRows[:0]
	g.totals = slices.Grow(g.totals[:0], T)[:T]
	g.rootTotals(g.totals[:T])
	rootW := g.weight(g.totals[:T])
	minGain := g.cfg.minGain * rootW
	// Gains are differences of sums over the node; allow for their rounding.
	tol := 1e-12 * math.Max(1, math.Abs(set.score(g.totals[:set.stat])))

	if g.cfg.leafLimit > 0 {
		return g.growBestFirst(t, minGain-tol)
	}
	for len(g.stack) > 0 {
		if g.cancel != nil && g.cancel.Load() {
			return nil, errStopped
		}
		k := len(g.stack) - 1
		e := g.stack[k]
		g.stack = g.stack[:k]
		copy(g.cur, g.totals[k*T:(k+1)*T])
		if !g.evaluateNode(t, &e, minGain-tol) {
			continue
		}
		left, right := g.split(t, e)
		g.push(right, g.r)
		g.push(left, g.l)
	}
	t.trim()
	return t, nil
}

// evaluateNode sets node e's cover and value from its totals in g.cur and looks for its
// best split (into g.best, building e's histograms when it keeps them). It reports
// whether the node is to be split; if not, it is a leaf and is recorded as one.
func (g *grower) evaluateNode(t *Tree, e *pending, least float64) bool {
	set := g.set
	w := g.weight(g.cur)
	t.Cover[e.node] = w
	g.setValue(t, int(e.node), w)
	if g.splittable(*e, w) {
		g.parentScore = set.score(g.cur[:set.stat])
		if g.subtract && e.hist < 0 {
			e.hist = g.acquire()
			g.buildAll(g.pool[e.hist], int(e.start), int(e.end))
		}
		g.findSplit(*e)
		if g.best.valid() && g.best.gain >= least {
			return true
		}
	}
	g.release(e.hist)
	g.leafRows = append(g.leafRows, leafRange{e.node, e.start, e.end})
	return false
}

// split applies g.best to node e: it partitions the rows (children's totals into g.l
// and g.r), adds the two children and fills in the node, and returns the children,
// with their histograms when the grower keeps them and they may split again.
func (g *grower) split(t *Tree, e pending) (left, right pending) {
	set := g.set
	nl := g.partition(e, &g.best)
	mid := e.start + int32(nl)
	if !g.best.hasMissing {
		// No missing values here: send future ones to the heavier side.
		g.best.missingLeft = g.weight(g.l) >= g.weight(g.r)
	}
	l := t.addNode(t.Width)
	t.addNode(t.Width)
	n := &t.Nodes[e.node]
	n.Left, n.Feature = l, int32(g.best.feature)
	n.DefaultLeft = g.best.missingLeft
	t.Gain[e.node] = math.Max(g.best.gain, 0)
	if g.best.categorical {
		n.LevelSet = int32(len(t.LevelSets))
		t.LevelSets = append(t.LevelSets, g.levelSet(&g.best))
	} else {
		n.Threshold = set.bins[g.best.feature].Upper[g.best.bin-1]
	}
	d := e.depth + 1
	lh, rh := int32(-1), int32(-1)
	if g.cfg.maxDepth == 0 || int(d) < g.cfg.maxDepth {
		lh, rh = g.childHistograms(e.hist, int(e.start), int(mid), int(e.end))
	} else {
		g.release(e.hist) // the children are leaves
	}
	return pending{node: l, start: e.start, end: mid, depth: d, hist: lh},
		pending{node: l + 1, start: mid, end: e.end, depth: d, hist: rh}
}

// candidate is a node of best-first growth whose best split is known: the split, a
// copy of g.best, waits until the node's turn comes or the leaf limit ends growth.
type candidate struct {
	e      pending
	totals []float64
	best   splitInfo
}

// growBestFirst grows t by always splitting the leaf whose best split gains most, until
// the tree has cfg.leafLimit leaves or no leaf can split (best-first growth, as in
// Friedman 2001's boosting with J terminal nodes). Ties go to the lower node ID, so the
// tree does not depend on anything but the data. The root is on g.stack with its
// totals in g.totals.
func (g *grower) growBestFirst(t *Tree, least float64) (*Tree, error) {
	T := g.set.totalWidth
	var queue []candidate
	// offer evaluates node e with totals tot and queues it if it can split.
	offer := func(e pending, tot []float64) {
		copy(g.cur, tot)
		if !g.evaluateNode(t, &e, least) {
			return
		}
		b := g.best
		b.leftBins = slices.Clone(b.leftBins)
		b.present = slices.Clone(b.present)
		queue = append(queue, candidate{e: e, totals: slices.Clone(tot[:T]), best: b})
	}
	offer(g.stack[0], g.totals[:T])
	g.stack = g.stack[:0]
	leaves := 1
	lt, rt := make([]float64, T), make([]float64, T)
	for len(queue) > 0 {
		if g.cancel != nil && g.cancel.Load() {
			return nil, errStopped
		}
		k := 0
		for i, c := range queue {
			if c.best.gain > queue[k].best.gain || (c.best.gain == queue[k].best.gain && c.e.node < queue[k].e.node) {
				k = i
			}
		}
		c := queue[k]
		queue = slices.Delete(queue, k, k+1)
		if leaves >= g.cfg.leafLimit {
			// The limit is reached: this node and every other waiting one stay leaves.
			for _, r := range append(queue, c) {
				g.release(r.e.hist)
				g.leafRows = append(g.leafRows, leafRange{r.e.node, r.e.start, r.e.end})
			}
			break
		}
		copy(g.cur, c.totals)
		g.best = c.best
		left, right := g.split(t, c.e)
		leaves++
		copy(lt, g.l)
		copy(rt, g.r)
		offer(left, lt)
		offer(right, rt)
	}
	t.trim()
	return t, nil
}

func (g *grower) push(p pending, totals []float64) {
	g.stack = append(g.stack, p)
	g.totals = append(g.totals[:(len(g.stack)-1)*g.set.totalWidth], totals...)
}

func (g *grower) weight(totals []float64) float64 {
	if g.set.newton {
		return totals[2]
	}
	if g.set.task == Regression {
		return totals[0]
	}
	return g.set.weightOf(totals)
}

// splittable holds the stopping rules: depth, leaf weight, rows, purity.
func (g *grower) splittable(e pending, w float64) bool {
	if g.cfg.maxDepth > 0 && int(e.depth) >= g.cfg.maxDepth {
		return false
	}
	if e.end-e.start < 2 || w < 2*g.cfg.minLeaf {
		return false
	}
	if g.set.newton {
		h := g.cur[0]
		mean := g.cur[1] / h
		mse := g.cur[3]/h - mean*mean
		return mse > 1e-14*math.Max(g.cur[3]/h, math.SmallestNonzeroFloat64)
	}
	if g.set.task == Regression {
		mean := g.cur[1] / w
		mse := g.cur[2]/w - mean*mean
		return mse > 1e-14*math.Max(g.cur[2]/w, math.SmallestNonzeroFloat64)
	}
	classes := 0
	for _, c := range g.cur {
		if c > 0 {
			classes++
		}
	}
	return classes > 1
}

// rootTotals sums the statistics of all the tree's rows into dst. Boosting's large
// roots are summed in fixed blocks (on cfg.threads goroutines) added in block order,
// so the sums do not depend on the thread count.
func (g *grower) rootTotals(dst []float64) {
	n := len(g.rows)
	blocks := (n + partitionBlock - 1) / partitionBlock
	if !g.set.newton || blocks <= 1 {
		g.nodeTotals(0, n, dst)
		return
	}
	T := g.set.totalWidth
	g.blockTot = slices.Grow(g.blockTot[:0], T*blocks)[:T*blocks]
	parallelFor(blocks, g.cfg.threads, func(k int) {
		g.nodeTotals(k*partitionBlock, min(n, (k+1)*partitionBlock), g.blockTot[k*T:(k+1)*T])
	})
	clear(dst)
	for k := range blocks {
		for j := range T {
			dst[j] += g.blockTot[k*T+j]
		}
	}
}

// nodeTotals sums the statistics of rows[start:end] into dst.
func (g *grower) nodeTotals(start, end int, dst []float64) {
	clear(dst)
	wts := g.wts[start:end]
	// Sums in locals: through dst, each add would wait on the previous one's store.
	if g.set.newton {
		rw := g.set.rowWeight
		var s0, s1, s2, s3 float64
		for i, v := range g.yv[start:end] {
			w := wts[i]
			n := 1.0
			if rw != nil {
				n = rw[g.rows[start+i]]
			}
			s0 += w
			s1 += w * v
			s2 += n
			s3 += w * v * v
		}
		dst[0], dst[1], dst[2], dst[3] = s0, s1, s2, s3
		return
	}
	if g.set.task == Regression {
		var s0, s1, s2 float64
		for i, v := range g.yv[start:end] {
			w := wts[i]
			s0 += w
			s1 += w * v
			s2 += w * v * v
		}
		dst[0], dst[1], dst[2] = s0, s1, s2
		return
	}
	for i, c := range g.lab[start:end] {
		dst[c] += wts[i]
	}
}

func (g *grower) setValue(t *Tree, node int, w float64) {
	v := t.NodeValue(node)
	if g.set.task == Regression {
		v[0] = g.cur[1] / (g.cur[0] + g.set.penalty) // cur[0] is w, or H for boosting
		return
	}
	for k := range v {
		v[k] = g.cur[k] / w
	}
}

// findSplit leaves the best split of node e in g.best. A forest draws cfg.drawn features and
// builds their histograms in one pass over the node's rows; if none of them can split
// the node (all constant there), it keeps drawing one feature at a time, as Breiman's
// reference code does.
func (g *grower) findSplit(e pending) {
	g.best.feature, g.best.gain = -1, math.Inf(-1)
	if e.hist >= 0 {
		g.scanAll(g.pool[e.hist])
		return
	}
	p := len(g.order)
	for k := 0; k < p && !g.best.valid(); {
		n := 1
		if k == 0 {
			n = g.cfg.drawn
		}
		if g.cfg.drawn < p {
			for j := k; j < k+n; j++ {
				r := j + g.rng.IntN(p-j)
				g.order[j], g.order[r] = g.order[r], g.order[j]
			}
		}
		g.evaluate(g.order[k:k+n], e)
		k += n
	}
}

// trackRows: below this many rows a node's histograms are scanned only over the bins its
// rows fall in; above it, tracking costs more than scanning every bin.
const trackRows = 1024

// evaluate builds the histograms of feats over node e and scans each.
func (g *grower) evaluate(feats []int, e pending) {
	set := g.set
	S := set.stat
	start, end := int(e.start), int(e.end)
	track := end-start < trackRows
	for j, f := range feats {
		if track {
			g.lo[j], g.hi[j] = math.MaxInt, 0
		} else {
			g.lo[j], g.hi[j] = 0, set.bins[f].NumBins()-1
		}
	}
	lo, hi := g.lo[:len(feats)], g.hi[:len(feats)]
	rows, wts := g.rows[start:end], g.wts[start:end]
	switch {
	case set.newton:
		g.newtonHistograms(g.hist, feats, rows, wts, g.yv[start:end], lo, hi, track)
	case set.task == Regression && set.mat8 != nil:
		histRegression(g.hist, g.stride, set.mat8, set.features, feats, rows, wts, g.yv[start:end], lo, hi, track)
	case set.task == Regression:
		histRegression(g.hist, g.stride, set.mat16, set.features, feats, rows, wts, g.yv[start:end], lo, hi, track)
	case set.mat8 != nil:
		histClasses(g.hist, g.stride, set.mat8, set.features, feats, rows, wts, g.lab[start:end], S, lo, hi, track)
	default:
		histClasses(g.hist, g.stride, set.mat16, set.features, feats, rows, wts, g.lab[start:end], S, lo, hi, track)
	}
	for j, f := range feats {
		base := j * g.stride
		h := g.hist[base : base+(hi[j]+1)*S]
		if set.bins[f].Kind == Categorical {
			g.scanCategorical(f, h, lo[j], hi[j])
		} else {
			g.scanNumeric(f, h, lo[j], hi[j])
		}
		clear(g.hist[base+lo[j]*S : base+(hi[j]+1)*S])
	}
}

// parallelRows: nodes with fewer rows build their histograms on one goroutine, where
// starting others would cost more than it saves.
const parallelRows = 8192

// Large nodes build boosting's histograms in row blocks: at most histBlocks of them, of
// at least histBlockRows rows each. The blocks depend on the node's row count only, and
// their histograms are added in block order, so the sums are the same on any number of
// threads; each thread reads only its blocks' rows, once for every feature.
const (
	histBlocks    = 8
	histBlockRows = 16384
)

// newtonHistograms builds boosting's histograms into hist (zero on entry). Large nodes
// are cut into row blocks built on up to cfg.threads goroutines; nodes with one block
// split their features between goroutines instead.
func (g *grower) newtonHistograms(hist []float64, feats []int, rows []int32, wts, y []float64, lo, hi []int, track bool) {
	set := g.set
	build := func(h []float64, j0, j1 int, rows []int32, wts, y []float64) {
		if set.mat8 != nil {
			histNewton(h, g.stride, set.mat8, set.col8, set.features, feats[j0:j1], rows, wts, y, set.rowWeight, lo[j0:j1], hi[j0:j1], track)
		} else {
			histNewton(h, g.stride, set.mat16, set.col16, set.features, feats[j0:j1], rows, wts, y, set.rowWeight, lo[j0:j1], hi[j0:j1], track)
		}
	}
	n := len(rows)
	if blocks := min(histBlocks, n/histBlockRows); blocks > 1 {
		size := len(feats) * g.stride
		if len(g.blockHist) < (blocks-1)*size {
			g.blockHist = make([]float64, (blocks-1)*size)
		}
		bufs := g.blockHist[:(blocks-1)*size]
		clear(bufs)
		work := func(k int) {
			h := hist[:size]
			if k > 0 {
				h = bufs[(k-1)*size : k*size]
			}
			r0, r1 := k*n/blocks, (k+1)*n/blocks
			build(h, 0, len(feats), rows[r0:r1], wts[r0:r1], y[r0:r1])
		}
		if g.cfg.threads <= 1 {
			for k := range blocks {
				work(k)
			}
		} else {
			parallelFor(blocks, g.cfg.threads, work)
		}
		dst := hist[:size]
		for k := range blocks - 1 {
			for i, v := range bufs[k*size : (k+1)*size] {
				dst[i] += v
			}
		}
		return
	}
	parts := min(g.cfg.threads, len(feats))
	if parts <= 1 || n < parallelRows {
		build(hist, 0, len(feats), rows, wts, y)
		return
	}
	var wg sync.WaitGroup
	for k := range parts {
		j0, j1 := k*len(feats)/parts, (k+1)*len(feats)/parts
		wg.Add(1)
		go func() {
			defer wg.Done()
			build(hist[j0*g.stride:], j0, j1, rows, wts, y)
		}()
	}
	wg.Wait()
}

// acquire returns the index of a zeroed pool histogram.
func (g *grower) acquire() int32 {
	if n := len(g.free); n > 0 {
		i := g.free[n-1]
		g.free = g.free[:n-1]
		clear(g.pool[i])
		return i
	}
	g.pool = append(g.pool, make([]float64, g.set.features*g.stride))
	return int32(len(g.pool) - 1)
}

// release returns pool histogram i (none when negative) to the free list.
func (g *grower) release(i int32) {
	if i >= 0 {
		g.free = append(g.free, i)
	}
}

// buildAll fills h with the histograms of every feature over rows[start:end].
func (g *grower) buildAll(h []float64, start, end int) {
	F := g.set.features
	for j := range F {
		g.lo[j], g.hi[j] = 0, g.set.bins[j].NumBins()-1
	}
	g.newtonHistograms(h, g.order[:F], g.rows[start:end], g.wts[start:end], g.yv[start:end], g.lo[:F], g.hi[:F], false)
}

// childHistograms turns parent histogram ph into the histograms of the children
// rows[start:mid] and rows[mid:end]: it builds the smaller child's from its rows and
// subtracts it from the parent's in place for the larger. It returns their pool indices
// (left, right); with no parent histogram, both are -1.
func (g *grower) childHistograms(ph int32, start, mid, end int) (int32, int32) {
	if ph < 0 {
		return -1, -1
	}
	sh := g.acquire()
	small, large := g.pool[sh], g.pool[ph]
	if mid-start <= end-mid {
		g.buildAll(small, start, mid)
	} else {
		g.buildAll(small, mid, end)
	}
	for k := 0; k < len(large); k += newtonStat {
		n := large[k+2] - small[k+2]
		if n <= 1e-12*large[k+2] {
			// The larger child has no rows here; drop the rounding residue of H and S
			// so the bin reads as empty.
			large[k], large[k+1], large[k+2] = 0, 0, 0
			continue
		}
		large[k] -= small[k]
		large[k+1] -= small[k+1]
		large[k+2] = n
	}
	if mid-start <= end-mid {
		return sh, ph
	}
	return ph, sh
}

// scanAll scans the ready histograms h of every feature for the best split.
func (g *grower) scanAll(h []float64) {
	S := g.set.stat
	for f := range g.set.features {
		nb := g.set.bins[f].NumBins()
		hf := h[f*g.stride : f*g.stride+nb*S]
		if g.set.bins[f].Kind == Categorical {
			g.scanCategorical(f, hf, 0, nb-1)
		} else {
			g.scanNumeric(f, hf, 0, nb-1)
		}
	}
}

// consider scores the candidate left = cum (+ missing when missingLeft) against the rest.
func (g *grower) consider(f int, miss []float64, missingLeft bool) (float64, bool) {
	set := g.set
	S := set.stat
	l, r := g.l[:S], g.r[:S]
	for k := range S {
		l[k] = g.cum[k]
		r[k] = g.cur[k] - miss[k] - g.cum[k]
		if missingLeft {
			l[k] += miss[k]
		} else {
			r[k] += miss[k]
		}
	}
	wl, wr := set.weightOf(l), set.weightOf(r)
	if wl < g.cfg.minLeaf || wr < g.cfg.minLeaf {
		return 0, false
	}
	if set.newton && (l[0] < set.minHessian || r[0] < set.minHessian) {
		return 0, false
	}
	gain := set.score(l) + set.score(r) - g.parentScore
	return gain, g.best.better(gain, f)
}

func (g *grower) scanNumeric(f int, h []float64, lo, hi int) {
	set := g.set
	S := set.stat
	miss, wm := g.zeros, 0.0
	if lo == 0 {
		miss = h[:S]
		wm = set.weightOf(miss)
	}
	switch {
	case set.newton:
		g.scanNewton(f, h, max(lo, 1), hi, miss)
		return
	case set.task == Regression:
		g.scanRegression(f, h, max(lo, 1), hi, miss)
		return
	case S == 2 && set.impurity == Gini:
		g.scanBinaryGini(f, h, max(lo, 1), hi, miss)
		return
	}
	clear(g.cum)
	for b := max(lo, 1); b <= hi; b++ {
		hb := h[b*S : (b+1)*S]
		if set.weightOf(hb) == 0 {
			continue
		}
		for k := range S {
			g.cum[k] += hb[k]
		}
		for _, missingLeft := range [2]bool{false, true} {
			if missingLeft && wm == 0 {
				break
			}
			if gain, ok := g.consider(f, miss, missingLeft); ok {
				g.setNumeric(f, gain, b, missingLeft, wm > 0)
			}
		}
	}
}

func (g *grower) setNumeric(f int, gain float64, bin int, missingLeft, hasMissing bool) {
	g.best = splitInfo{feature: f, gain: gain, bin: bin, missingLeft: missingLeft,
		hasMissing: hasMissing, leftBins: g.best.leftBins[:0], present: g.best.present[:0]}
}

// scanBinaryGini is scanNumeric for two classes and Gini, the common case, with the
// score Σc²/W written out.
func (g *grower) scanBinaryGini(f int, h []float64, lo, hi int, miss []float64) {
	m0, m1 := miss[0], miss[1]
	t0, t1 := g.cur[0]-m0, g.cur[1]-m1
	hasMissing := m0+m1 > 0
	minLeaf, parent := g.cfg.minLeaf, g.parentScore
	var a0, a1 float64
	for b := lo; b <= hi; b++ {
		h0, h1 := h[2*b], h[2*b+1]
		if h0+h1 == 0 {
			continue
		}
		a0 += h0
		a1 += h1
		r0, r1 := t0-a0, t1-a1
		wl, wr := a0+a1, r0+r1
		// Missing values right.
		if wl >= minLeaf && wr+m0+m1 >= minLeaf {
			x0, x1 := r0+m0, r1+m1
			gain := (a0*a0+a1*a1)/wl + (x0*x0+x1*x1)/(wr+m0+m1) - parent
			if g.best.better(gain, f) {
				g.setNumeric(f, gain, b, false, hasMissing)
			}
		}
		// Missing values left.
		if hasMissing && wl+m0+m1 >= minLeaf && wr >= minLeaf {
			x0, x1 := a0+m0, a1+m1
			gain := (x0*x0+x1*x1)/(wl+m0+m1) + (r0*r0+r1*r1)/wr - parent
			if g.best.better(gain, f) {
				g.setNumeric(f, gain, b, true, hasMissing)
			}
		}
	}
}

// scanRegression is scanNumeric for squared error: statistics (W, Σwy), score (Σwy)²/W.
func (g *grower) scanRegression(f int, h []float64, lo, hi int, miss []float64) {
	mw, ms := miss[0], miss[1]
	tw, ts := g.cur[0]-mw, g.cur[1]-ms
	hasMissing := mw > 0
	minLeaf, parent := g.cfg.minLeaf, g.parentScore
	var aw, as float64
	for b := lo; b <= hi; b++ {
		hw := h[2*b]
		if hw == 0 {
			continue
		}
		aw += hw
		as += h[2*b+1]
		rw, rs := tw-aw, ts-as
		if aw >= minLeaf && rw+mw >= minLeaf {
			gain := as*as/aw + (rs+ms)*(rs+ms)/(rw+mw) - parent
			if g.best.better(gain, f) {
				g.setNumeric(f, gain, b, false, hasMissing)
			}
		}
		if hasMissing && aw+mw >= minLeaf && rw >= minLeaf {
			gain := (as+ms)*(as+ms)/(aw+mw) + rs*rs/rw - parent
			if g.best.better(gain, f) {
				g.setNumeric(f, gain, b, true, hasMissing)
			}
		}
	}
}

// minHessian is the least hessian weight H a boosted leaf may hold under the losses
// whose hessian varies (logistic, multinomial, Poisson). Where the model already fits a
// node's rows with near certainty (p(1−p) → 0), splitting it further would set leaf
// values S/H on almost no curvature: large, confident steps fitted to noise. A floor
// of 1e-3 on the leaf's hessian sum is common practice. Under the other losses H is the
// row weight, which MinLeaf bounds.
const minHessian = 1e-3

// scanNewton is scanNumeric for boosting's statistics (H, S, N): leaves must hold row
// weight N ≥ MinLeaf and hessian weight H ≥ set.minHessian, and the score is S²/(H+λ).
func (g *grower) scanNewton(f int, h []float64, lo, hi int, miss []float64) {
	mh, ms, mn := miss[0], miss[1], miss[2]
	th, ts, tn := g.cur[0]-mh, g.cur[1]-ms, g.cur[2]-mn
	hasMissing := mn > 0
	minLeaf, parent, lam, minH := g.cfg.minLeaf, g.parentScore, g.set.penalty, g.set.minHessian
	var ah, as, an float64
	for b := lo; b <= hi; b++ {
		hb := h[newtonStat*b : newtonStat*b+3]
		hn := hb[2]
		if hn == 0 {
			continue
		}
		ah += hb[0]
		as += hb[1]
		an += hn
		rh, rs, rn := th-ah, ts-as, tn-an
		if an >= minLeaf && rn+mn >= minLeaf && ah >= minH && rh+mh >= minH {
			gain := as*as/(ah+lam) + (rs+ms)*(rs+ms)/(rh+mh+lam) - parent
			if g.best.better(gain, f) {
				g.setNumeric(f, gain, b, false, hasMissing)
			}
		}
		if hasMissing && an+mn >= minLeaf && rn >= minLeaf && ah+mh >= minH && rh >= minH {
			gain := (as+ms)*(as+ms)/(ah+mh+lam) + rs*rs/(rh+lam) - parent
			if g.best.better(gain, f) {
				g.setNumeric(f, gain, b, true, hasMissing)
			}
		}
	}
}

// scanCategorical orders the node's levels by their target statistic and scans that
// order as if it were numeric. For a binary target or regression the best subset split
// is a prefix of this order (Fisher 1958; Breiman et al. 1984, §9.4). With more classes
// it tries, for each class, the order by that class's share, and keeps the best cut.
func (g *grower) scanCategorical(f int, h []float64, lo, hi int) {
	set := g.set
	S := set.stat
	miss, wm := g.zeros, 0.0
	if lo == 0 {
		miss = h[:S]
		wm = set.weightOf(miss)
	}
	g.cat = g.cat[:0]
	for b := max(lo, 1); b <= hi; b++ {
		if set.weightOf(h[b*S:(b+1)*S]) > 0 {
			g.cat = append(g.cat, catEntry{bin: b})
		}
	}
	if len(g.cat) < 2 && wm == 0 {
		return
	}
	orders := 1
	if set.task == Classification && set.classes > 2 {
		orders = set.classes
	}
	for o := range orders {
		for i := range g.cat {
			hb := h[g.cat[i].bin*S : (g.cat[i].bin+1)*S]
			w := set.weightOf(hb)
			switch {
			case set.task == Regression:
				g.cat[i].key = hb[1] / hb[0] // the mean, or boosting's Newton step S/H
			case set.classes == 2:
				g.cat[i].key = hb[1] / w
			default:
				g.cat[i].key = hb[o] / w
			}
		}
		slices.SortFunc(g.cat, func(a, b catEntry) int {
			if c := cmp.Compare(a.key, b.key); c != 0 {
				return c
			}
			return cmp.Compare(a.bin, b.bin)
		})
		clear(g.cum)
		for i := range g.cat {
			hb := h[g.cat[i].bin*S : (g.cat[i].bin+1)*S]
			for k := range S {
				g.cum[k] += hb[k]
			}
			for _, missingLeft := range [2]bool{false, true} {
				if missingLeft && wm == 0 {
					break
				}
				if gain, ok := g.consider(f, miss, missingLeft); ok {
					b := &g.best
					b.feature, b.gain, b.bin, b.missingLeft = f, gain, 0, missingLeft
					b.categorical, b.hasMissing = true, wm > 0
					b.leftBins, b.present = b.leftBins[:0], b.present[:0]
					for _, c := range g.cat[:i+1] {
						b.leftBins = append(b.leftBins, c.bin)
					}
					for _, c := range g.cat {
						b.present = append(b.present, c.bin)
					}
				}
			}
		}
	}
}

// partition moves the rows of node e that go left to the front of its range, keeping
// row order on each side (so later passes read the matrix in increasing address order),
// sums the children's totals into g.l and g.r, and returns how many went left.
func (g *grower) partition(e pending, s *splitInfo) int {
	nb := g.set.bins[s.feature].NumBins()
	dir := g.dir[:nb]
	clear(dir)
	if s.missingLeft {
		dir[0] = 1
	}
	if s.categorical {
		for _, b := range s.leftBins {
			dir[b] = 1
		}
	} else {
		for b := 1; b <= s.bin; b++ {
			dir[b] = 1
		}
	}
	if g.set.col8 != nil {
		return partitionRows(g, g.set.col8[s.feature], e, dir, g.l, g.r)
	}
	return partitionRows(g, g.set.col16[s.feature], e, dir, g.l, g.r)
}

// levelSet turns a categorical split over bins into a bit set over level codes: levels in
// a left bin go left; levels of other bins present at the node go right; levels absent
// from the node or never seen follow the default direction, as do the padding bits.
func (g *grower) levelSet(s *splitInfo) []uint64 {
	lb := g.set.bins[s.feature].LevelBin
	for _, b := range s.present {
		g.here[b] = true
	}
	for _, b := range s.leftBins {
		g.inLeft[b] = true
	}
	words := max(1, (len(lb)+63)/64)
	bits := make([]uint64, words)
	for code := 0; code < words*64; code++ {
		left := s.missingLeft
		if code < len(lb) {
			if b := lb[code]; b != 0 && g.here[b] {
				left = g.inLeft[b]
			}
		}
		if left {
			bits[code>>6] |= 1 << (code & 63)
		}
	}
	clear(g.here)
	clear(g.inLeft)
	return bits
}

// trim copies the tree's arrays to their exact size: growing by append leaves up to
// half of each array unused, and a forest keeps its trees for as long as it lives.
func (t *Tree) trim() {
	t.Nodes = slices.Clone(t.Nodes)
	t.Gain = slices.Clone(t.Gain)
	t.Cover = slices.Clone(t.Cover)
	t.Value = slices.Clone(t.Value)
}

// addNode appends a leaf with room for its value and returns its index.
func (t *Tree) addNode(width int) int32 {
	t.Nodes = append(t.Nodes, Node{Left: -1, LevelSet: -1})
	t.Gain = append(t.Gain, 0)
	t.Cover = append(t.Cover, 0)
	for range width {
		t.Value = append(t.Value, 0)
	}
	return int32(len(t.Nodes) - 1)
}
