//go:build !amd64

package forest

// useAVX2 is false off amd64: histNewton runs its Go loop.
var useAVX2 = false

func histNewtonAVX2(h *float64, strideBytes int, rec0 *uint8, p int, nf int, rows *int32, n int, wts *float64, y *float64, rw *float64) {
	panic("forest: no assembly histogram loop on this architecture")
}
