package forest

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

// histNewton adds each row's (wh, wh·y, w) to the bin of every drawn feature, where the
// grower's weight is wh and its target y = −g/h; rowWeight (nil: ones) gives w by row.
func histNewton[B uint8 | uint16](h []float64, stride int, mat []B, p int, feats []int, rows []int32, wts []float64, y []float64, rowWeight []float64, lo, hi []int, track bool) {
	y = y[:len(rows)]
	wts = wts[:len(rows)]
	for i, r := range rows {
		rec := mat[int(r)*p : int(r)*p+p]
		w := wts[i]
		wy := w * y[i]
		n := 1.0
		if rowWeight != nil {
			n = rowWeight[r]
		}
		base := 0
		for _, f := range feats {
			k := base + 3*int(rec[f])
			hb := h[k : k+3 : k+3] // one bounds check for the bin's three sums
			hb[0] += w
			hb[1] += wy
			hb[2] += n
			base += stride
		}
	}
	if track {
		trackBins(mat, p, feats, rows, lo, hi)
	}
}

// splitRule is a chosen split in bin terms: numeric bins 1…bin go left, or, when left is
// set, the bins it marks (bin 0, missing, included).
type splitRule struct {
	feature     int
	bin         int
	missingLeft bool
	left        []bool
}

func (s *splitRule) goesLeft(b int) bool {
	switch {
	case s.left != nil:
		return s.left[b]
	case b == 0:
		return s.missingLeft
	}
	return b <= s.bin
}

// partitionRows is a stable partition of node e's rows, weights and targets.
func partitionRows[B uint8 | uint16](g *grower, mat []B, e pending, s splitRule) int {
	start, end := int(e.start), int(e.end)
	rows, wts := g.rows[start:end], g.wts[start:end]
	p, f := g.set.features, s.feature
	nl, nr := 0, 0
	if g.lab != nil {
		lab := g.lab[start:end]
		for i, r := range rows {
			if s.goesLeft(int(mat[int(r)*p+f])) {
				rows[nl], wts[nl], lab[nl] = r, wts[i], lab[i]
				nl++
			} else {
				g.tmpRows[nr], g.tmpW[nr], g.tmpLab[nr] = r, wts[i], lab[i]
				nr++
			}
		}
		copy(lab[nl:], g.tmpLab[:nr])
	} else {
		yv := g.yv[start:end]
		for i, r := range rows {
			if s.goesLeft(int(mat[int(r)*p+f])) {
				rows[nl], wts[nl], yv[nl] = r, wts[i], yv[i]
				nl++
			} else {
				g.tmpRows[nr], g.tmpW[nr], g.tmpY[nr] = r, wts[i], yv[i]
				nr++
			}
		}
		copy(yv[nl:], g.tmpY[:nr])
	}
	copy(rows[nl:], g.tmpRows[:nr])
	copy(wts[nl:], g.tmpW[:nr])
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
