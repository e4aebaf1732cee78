package forest

import "slices"

// The two loops that dominate training: building per-bin statistics over a node's rows,
// and moving the rows to their children. Both are generic over the bin width so each
// compiles to a tight loop for one-byte and two-byte bins.

// histClasses adds each row's weight to the bin and class of every drawn feature; the
// histogram of feats[j] starts at h[j*stride]. When track is set it also narrows lo[j],
// hi[j] to the bins seen, so that small nodes scan only those.
func histClasses[B uint8 | uint16](h []float64, stride int, mat []B, p int, feats []int, rows []int32, wts []float64, lab []int32, classes int, lo, hi []int, track bool) {
	for i, r := range rows {
		rec := mat[int(r)*p : int(r)*p+p]
		w, c := wts[i], int(lab[i])
		base := c
		for _, f := range feats {
			h[base+int(rec[f])*classes] += w
			base += stride
		}
	}
	if track {
		trackBins(mat, p, feats, rows, lo, hi)
	}
}

// histRegression adds each row's (w, wy) to the bin of every drawn feature.
func histRegression[B uint8 | uint16](h []float64, stride int, mat []B, p int, feats []int, rows []int32, wts []float64, y []float64, lo, hi []int, track bool) {
	for i, r := range rows {
		rec := mat[int(r)*p : int(r)*p+p]
		w := wts[i]
		wy := w * y[i]
		base := 0
		for _, f := range feats {
			k := base + 2*int(rec[f])
			hb := h[k : k+2 : k+2]
			hb[0] += w
			hb[1] += wy
			base += stride
		}
	}
	if track {
		trackBins(mat, p, feats, rows, lo, hi)
	}
}

// histNewton adds each row's (wh, wh·y, w, 0) to the four-wide cell of its bin in every
// drawn feature's histogram, where the grower's weight is wh and its target y = −g/h;
// rowWeight (nil: ones) gives w by row. The fourth sum stays 0: it pads a cell to 32
// bytes, so that on amd64 one vector add updates it (histNewtonAVX2). Elsewhere, rows
// spread thinly over the data (deep nodes) are read column by column: each feature's
// bytes then come from one column, which stays in cache, where a record costs a cache
// line for every row. Every order adds each cell's rows in the same order, so the sums
// are the same.
func histNewton[B uint8 | uint16](h []float64, stride int, mat []B, cols [][]B, p int, feats []int, rows []int32, wts []float64, y []float64, rowWeight []float64, lo, hi []int, track bool) {
	n := len(rows)
	if n == 0 {
		return
	}
	y = y[:n]
	wts = wts[:n]
	if m8, ok := any(mat).([]uint8); ok && useAVX2 && consecutive(feats) {
		var rw *float64
		if rowWeight != nil {
			rw = &rowWeight[0]
		}
		_ = h[(len(feats)-1)*stride+stride-1] // the kernel writes within h
		histNewtonAVX2(&h[0], 8*stride, &m8[feats[0]], p, len(feats), &rows[0], n, &wts[0], &y[0], rw)
	} else if int(rows[n-1]-rows[0]) > sparseSpan*n {
		for j, f := range feats {
			col := cols[f]
			hf := h[j*stride : (j+1)*stride]
			for i, r := range rows {
				w := wts[i]
				nw := 1.0
				if rowWeight != nil {
					nw = rowWeight[r]
				}
				k := newtonStat * int(col[r])
				hb := hf[k : k+3 : k+3]
				hb[0] += w
				hb[1] += w * y[i]
				hb[2] += nw
			}
		}
	} else {
		for i, r := range rows {
			rec := mat[int(r)*p : int(r)*p+p]
			w := wts[i]
			wy := w * y[i]
			nw := 1.0
			if rowWeight != nil {
				nw = rowWeight[r]
			}
			base := 0
			for _, f := range feats {
				k := base + newtonStat*int(rec[f])
				hb := h[k : k+3 : k+3] // one bounds check for the cell's three sums
				hb[0] += w
				hb[1] += wy
				hb[2] += nw
				base += stride
			}
		}
	}
	if track {
		trackBins(mat, p, feats, rows, lo, hi)
	}
}

// newtonStat is the width of boosting's histogram cell: (H, S, N) and a zero pad.
const newtonStat = 4

// consecutive reports whether feats is a run f, f+1, … (boosting draws every feature).
func consecutive(feats []int) bool {
	for j, f := range feats {
		if f != feats[0]+j {
			return false
		}
	}
	return true
}

// sparseSpan: a node whose rows span more than this many times their count reads its
// histograms column by column (histNewton's Go loop).
const sparseSpan = 4

// partitionBlock is how many rows one step of a node's partition takes. Blocks are
// partitioned on their own and joined in order, and their totals are added in block
// order, so rows and totals do not depend on how many threads took the blocks.
const partitionBlock = 1 << 16

// partitionRows is a stable partition of node e's rows, weights and targets by dir, the
// side (1: left, 0: right) of each bin of the split feature, whose column is col. It also sums the children's totals into
// lt and rt, so no second pass over the rows is needed. It returns the left count.
// Large nodes (boosting's, whose rounds run one at a time) take their blocks on
// cfg.threads goroutines.
func partitionRows[B uint8 | uint16](g *grower, col []B, e pending, dir []uint8, lt, rt []float64) int {
	start, end := int(e.start), int(e.end)
	T := g.set.totalWidth
	blocks := (end - start + partitionBlock - 1) / partitionBlock
	g.blockTot = slices.Grow(g.blockTot[:0], 2*T*blocks)[:2*T*blocks]
	g.blockLeft = slices.Grow(g.blockLeft[:0], blocks)[:blocks]
	clear(g.blockTot)
	part := func(k int) {
		a := start + k*partitionBlock
		b := min(end, a+partitionBlock)
		tot := g.blockTot[2*T*k : 2*T*(k+1)]
		g.blockLeft[k] = partitionBlockRows(g, col, dir, a, b, tot[:T], tot[T:])
	}
	if blocks == 1 || g.cfg.threads <= 1 {
		for k := range blocks {
			part(k)
		}
	} else {
		parallelFor(blocks, g.cfg.threads, part)
	}
	// Join: each block's left rows move down to follow the previous blocks' (never past
	// their own start, so copy's overlap rule keeps them intact), then the right rows
	// come back from the scratch, where each block left them at its own offset.
	clear(lt)
	clear(rt)
	nl := 0
	for k := range blocks {
		a := start + k*partitionBlock
		m := g.blockLeft[k]
		g.moveRows(start+nl, a, m)
		nl += m
		tot := g.blockTot[2*T*k : 2*T*(k+1)]
		for j := range T {
			lt[j] += tot[j]
			rt[j] += tot[T+j]
		}
	}
	// The right rows' places follow from the left counts, and they come from the
	// scratch into a range no left row occupies any more: the blocks copy at once.
	g.blockRight = slices.Grow(g.blockRight[:0], blocks)[:blocks]
	pos := start + nl
	for k := range blocks {
		g.blockRight[k] = pos
		pos += min(end, start+(k+1)*partitionBlock) - start - k*partitionBlock - g.blockLeft[k]
	}
	back := func(k int) {
		a := start + k*partitionBlock
		m := min(end, a+partitionBlock) - a - g.blockLeft[k]
		dst := g.blockRight[k]
		copy(g.rows[dst:dst+m], g.tmpRows[a:a+m])
		copy(g.wts[dst:dst+m], g.tmpW[a:a+m])
		if g.lab != nil {
			copy(g.lab[dst:dst+m], g.tmpLab[a:a+m])
		} else {
			copy(g.yv[dst:dst+m], g.tmpY[a:a+m])
		}
	}
	if g.cfg.threads <= 1 {
		for k := range blocks {
			back(k)
		}
	} else {
		parallelFor(blocks, g.cfg.threads, back)
	}
	return nl
}

// moveRows moves m rows (with weights and targets) from position src down to dst ≤ src.
func (g *grower) moveRows(dst, src, m int) {
	if dst == src || m == 0 {
		return
	}
	copy(g.rows[dst:dst+m], g.rows[src:src+m])
	copy(g.wts[dst:dst+m], g.wts[src:src+m])
	if g.lab != nil {
		copy(g.lab[dst:dst+m], g.lab[src:src+m])
	} else {
		copy(g.yv[dst:dst+m], g.yv[src:src+m])
	}
}

// partitionBlockRows partitions rows[a:b] stably: left rows stay in place from a, right
// rows go to the scratch from offset a. lt and rt (zeroed by the caller) receive the
// totals of each side: class weights, (W, Σwy, Σwy²), or Newton's (H, S, N, Σwh·y²).
// The loops carry no branch on the side (which is a coin flip per row at most nodes):
// each row is written to both places and only its side's count moves on, and the sums
// add the row's values times 1 or 0 — which adds exactly 0 to the other side.
func partitionBlockRows[B uint8 | uint16](g *grower, col []B, dir []uint8, a, b int, lt, rt []float64) int {
	rows, wts := g.rows[a:b], g.wts[a:b]
	tr, tw := g.tmpRows[a:b:b], g.tmpW[a:b:b]
	nl, nr := 0, 0
	switch {
	case g.lab != nil:
		lab, tl := g.lab[a:b], g.tmpLab[a:b:b]
		for i, r := range rows {
			w, c := wts[i], lab[i]
			k := int(dir[col[r]])
			rows[nl], wts[nl], lab[nl] = r, w, c
			tr[nr], tw[nr], tl[nr] = r, w, c
			nl += k
			nr += 1 - k
			lf := float64(k)
			lt[c] += lf * w
			rt[c] += (1 - lf) * w
		}
	case g.set.newton:
		yv, ty := g.yv[a:b], g.tmpY[a:b:b]
		rw := g.set.rowWeight
		var l0, l1, l2, l3, r0, r1, r2, r3 float64
		for i, r := range rows {
			w, v := wts[i], yv[i]
			n := 1.0
			if rw != nil {
				n = rw[r]
			}
			k := int(dir[col[r]])
			rows[nl], wts[nl], yv[nl] = r, w, v
			tr[nr], tw[nr], ty[nr] = r, w, v
			nl += k
			nr += 1 - k
			lf := float64(k)
			wl, wr := lf*w, (1-lf)*w
			l0, l1, l2, l3 = l0+wl, l1+wl*v, l2+lf*n, l3+wl*v*v
			r0, r1, r2, r3 = r0+wr, r1+wr*v, r2+(1-lf)*n, r3+wr*v*v
		}
		lt[0], lt[1], lt[2], lt[3] = l0, l1, l2, l3
		rt[0], rt[1], rt[2], rt[3] = r0, r1, r2, r3
	default:
		yv, ty := g.yv[a:b], g.tmpY[a:b:b]
		var l0, l1, l2, r0, r1, r2 float64
		for i, r := range rows {
			w, v := wts[i], yv[i]
			k := int(dir[col[r]])
			rows[nl], wts[nl], yv[nl] = r, w, v
			tr[nr], tw[nr], ty[nr] = r, w, v
			nl += k
			nr += 1 - k
			lf := float64(k)
			wl, wr := lf*w, (1-lf)*w
			l0, l1, l2 = l0+wl, l1+wl*v, l2+wl*v*v
			r0, r1, r2 = r0+wr, r1+wr*v, r2+wr*v*v
		}
		lt[0], lt[1], lt[2] = l0, l1, l2
		rt[0], rt[1], rt[2] = r0, r1, r2
	}
	return nl
}

// trackBins narrows lo[j], hi[j] to the bins that feats[j] takes on rows; a separate pass,
// so that the histogram loops carry no per-row branch (it runs on small nodes only).
func trackBins[B uint8 | uint16](mat []B, p int, feats []int, rows []int32, lo, hi []int) {
	for _, r := range rows {
		rec := mat[int(r)*p : int(r)*p+p]
		for j, f := range feats {
			b := int(rec[f])
			lo[j], hi[j] = min(lo[j], b), max(hi[j], b)
		}
	}
}
