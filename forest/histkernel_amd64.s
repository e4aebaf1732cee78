#include "textflag.h"

// func histNewtonAVX2(h *float64, strideBytes int, rec0 *uint8, p int, nf int, rows *int32, n int, wts *float64, y *float64, rw *float64)
//
// For each of n rows r = rows[i]: the vector (wts[i], wts[i]·y[i], rw[r] or 1, 0) is
// added to the 32-byte cell of bin rec0[r·p + f] in feature f's histogram, h + f·stride,
// for f = 0 … nf−1: one load-add-store per cell instead of three. The record of the row
// eight ahead is prefetched, since deep nodes' rows lie far apart. Each cell gets its rows
// in order, with the same IEEE additions as the Go loop, so the sums are bit-identical.
TEXT ·histNewtonAVX2(SB), NOSPLIT, $0-80
	MOVQ h+0(FP), DI
	MOVQ strideBytes+8(FP), R8
	MOVQ rec0+16(FP), SI
	MOVQ p+24(FP), R9
	MOVQ rows+40(FP), R10
	MOVQ n+48(FP), R11
	MOVQ wts+56(FP), R12
	MOVQ y+64(FP), R13
	MOVQ rw+72(FP), R14
	TESTQ R11, R11
	JEQ done
	MOVQ $0x3FF0000000000000, AX // 1.0
	MOVQ AX, X6
	VXORPD X5, X5, X5

row:
	CMPQ R11, $8
	JLT fetched
	MOVLQSX 32(R10), AX
	IMULQ R9, AX
	PREFETCHT0 (SI)(AX*1)

fetched:
	MOVLQSX (R10), AX
	VMOVAPD X6, X2
	TESTQ R14, R14
	JEQ unweighted
	VMOVSD (R14)(AX*8), X2

unweighted:
	IMULQ R9, AX
	LEAQ (SI)(AX*1), BX          // the row's first byte
	VMOVSD (R12), X0             // w
	VMULSD (R13), X0, X1         // w·y
	VUNPCKLPD X1, X0, X0         // (w, w·y)
	VUNPCKLPD X5, X2, X2         // (n, 0)
	VINSERTF128 $1, X2, Y0, Y0   // (w, w·y, n, 0)
	MOVQ DI, DX
	MOVQ nf+32(FP), CX

feature:
	MOVBQZX (BX), AX
	SHLQ $5, AX
	ADDQ DX, AX
	VADDPD (AX), Y0, Y1
	VMOVUPD Y1, (AX)
	INCQ BX
	ADDQ R8, DX
	DECQ CX
	JNE feature

	ADDQ $4, R10
	ADDQ $8, R12
	ADDQ $8, R13
	DECQ R11
	JNE row

done:
	VZEROUPPER
	RET
