package forest

import "golang.org/x/sys/cpu"

// useAVX2 selects the assembly histogram loop; tests turn it off to compare with the Go
// loop.
var useAVX2 = cpu.X86.HasAVX2

// histNewtonAVX2 is histNewton's loop for one-byte bins and a run of nf features that
// are consecutive in the record (rec0 points at the first one's byte of row 0), with the
// four-wide Newton cells; see histkernel_amd64.s.
//
//go:noescape
func histNewtonAVX2(h *float64, strideBytes int, rec0 *uint8, p int, nf int, rows *int32, n int, wts *float64, y *float64, rw *float64)
