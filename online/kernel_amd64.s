//go:build !purego

#include "textflag.h"

// AVX2 + FMA kernels; kernel_amd64.go selects them only when the CPU and the
// OS support both. Each processes 4 float64 per iteration, then a scalar
// tail with the same operation order (FMA on every element).

// func cpuid(eaxArg, ecxArg uint32) (eax, ebx, ecx, edx uint32)
TEXT ·cpuid(SB), NOSPLIT, $0-24
	MOVL eaxArg+0(FP), AX
	MOVL ecxArg+4(FP), CX
	CPUID
	MOVL AX, eax+8(FP)
	MOVL BX, ebx+12(FP)
	MOVL CX, ecx+16(FP)
	MOVL DX, edx+20(FP)
	RET

// func xgetbv() (eax, edx uint32)
TEXT ·xgetbv(SB), NOSPLIT, $0-8
	MOVL $0, CX
	XGETBV
	MOVL AX, eax+0(FP)
	MOVL DX, edx+4(FP)
	RET

// func stdDotAVX(theta, x, mu, inv []float64) float64
// Σ θ_j (x_j − μ_j) inv_j
TEXT ·stdDotAVX(SB), NOSPLIT, $0-104
	MOVQ theta_base+0(FP), AX
	MOVQ theta_len+8(FP), CX
	MOVQ x_base+24(FP), BX
	MOVQ mu_base+48(FP), DX
	MOVQ inv_base+72(FP), SI
	VXORPD Y0, Y0, Y0
	VXORPD Y1, Y1, Y1
	XORQ R8, R8
	MOVQ CX, R9
	ANDQ $-8, R9
	JZ   sd_quad

sd_loop8:
	VMOVUPD (BX)(R8*8), Y2
	VMOVUPD 32(BX)(R8*8), Y3
	VSUBPD  (DX)(R8*8), Y2, Y2
	VSUBPD  32(DX)(R8*8), Y3, Y3
	VMULPD  (SI)(R8*8), Y2, Y2
	VMULPD  32(SI)(R8*8), Y3, Y3
	VFMADD231PD (AX)(R8*8), Y2, Y0
	VFMADD231PD 32(AX)(R8*8), Y3, Y1
	ADDQ $8, R8
	CMPQ R8, R9
	JLT  sd_loop8

sd_quad:
	MOVQ CX, R9
	ANDQ $-4, R9
	CMPQ R8, R9
	JGE  sd_reduce
	VMOVUPD (BX)(R8*8), Y2
	VSUBPD  (DX)(R8*8), Y2, Y2
	VMULPD  (SI)(R8*8), Y2, Y2
	VFMADD231PD (AX)(R8*8), Y2, Y0
	ADDQ $4, R8

sd_reduce:
	VADDPD Y1, Y0, Y0
	VEXTRACTF128 $1, Y0, X1
	VADDPD X1, X0, X0
	VPERMILPD $1, X0, X1
	VADDSD X1, X0, X0
	CMPQ R8, CX
	JGE  sd_done

sd_tail:
	VMOVSD (BX)(R8*8), X2
	VSUBSD (DX)(R8*8), X2, X2
	VMULSD (SI)(R8*8), X2, X2
	VFMADD231SD (AX)(R8*8), X2, X0
	INCQ R8
	CMPQ R8, CX
	JLT  sd_tail

sd_done:
	VZEROUPPER
	MOVSD X0, ret+96(FP)
	RET

// func stdSqAVX(x, mu, inv []float64) float64
// Σ ((x_j − μ_j) inv_j)²
TEXT ·stdSqAVX(SB), NOSPLIT, $0-80
	MOVQ x_base+0(FP), BX
	MOVQ x_len+8(FP), CX
	MOVQ mu_base+24(FP), DX
	MOVQ inv_base+48(FP), SI
	VXORPD Y0, Y0, Y0
	XORQ R8, R8
	MOVQ CX, R9
	ANDQ $-4, R9
	JZ   sq_reduce

sq_loop4:
	VMOVUPD (BX)(R8*8), Y2
	VSUBPD  (DX)(R8*8), Y2, Y2
	VMULPD  (SI)(R8*8), Y2, Y2
	VFMADD231PD Y2, Y2, Y0
	ADDQ $4, R8
	CMPQ R8, R9
	JLT  sq_loop4

sq_reduce:
	VEXTRACTF128 $1, Y0, X1
	VADDPD X1, X0, X0
	VPERMILPD $1, X0, X1
	VADDSD X1, X0, X0
	CMPQ R8, CX
	JGE  sq_done

sq_tail:
	VMOVSD (BX)(R8*8), X2
	VSUBSD (DX)(R8*8), X2, X2
	VMULSD (SI)(R8*8), X2, X2
	VFMADD231SD X2, X2, X0
	INCQ R8
	CMPQ R8, CX
	JLT  sq_tail

sq_done:
	VZEROUPPER
	MOVSD X0, ret+72(FP)
	RET

// func axpyAVX(a float64, x, y []float64)
// y_j += a x_j
TEXT ·axpyAVX(SB), NOSPLIT, $0-56
	VBROADCASTSD a+0(FP), Y8
	MOVQ x_base+8(FP), BX
	MOVQ x_len+16(FP), CX
	MOVQ y_base+32(FP), DI
	XORQ R8, R8
	MOVQ CX, R9
	ANDQ $-4, R9
	JZ   ax_tail_check

ax_loop4:
	VMOVUPD (DI)(R8*8), Y1
	VFMADD231PD (BX)(R8*8), Y8, Y1
	VMOVUPD Y1, (DI)(R8*8)
	ADDQ $4, R8
	CMPQ R8, R9
	JLT  ax_loop4

ax_tail_check:
	CMPQ R8, CX
	JGE  ax_done

ax_tail:
	VMOVSD (DI)(R8*8), X1
	VFMADD231SD (BX)(R8*8), X8, X1
	VMOVSD X1, (DI)(R8*8)
	INCQ R8
	CMPQ R8, CX
	JLT  ax_tail

ax_done:
	VZEROUPPER
	RET

// func welfordAVX(mu, m2, sxy, x []float64, f, w, wy float64)
// δ = x − μ; μ += f δ; m2 += w δ (x − μ); sxy += wy x
TEXT ·welfordAVX(SB), NOSPLIT, $0-120
	MOVQ mu_base+0(FP), AX
	MOVQ mu_len+8(FP), CX
	MOVQ m2_base+24(FP), DX
	MOVQ sxy_base+48(FP), SI
	MOVQ x_base+72(FP), BX
	VBROADCASTSD f+96(FP), Y8
	VBROADCASTSD w+104(FP), Y9
	VBROADCASTSD wy+112(FP), Y10
	XORQ R8, R8
	MOVQ CX, R9
	ANDQ $-4, R9
	JZ   wf_tail_check

wf_loop4:
	VMOVUPD (BX)(R8*8), Y0
	VMOVUPD (AX)(R8*8), Y1
	VSUBPD  Y1, Y0, Y2
	VFMADD231PD Y2, Y8, Y1
	VMOVUPD Y1, (AX)(R8*8)
	VSUBPD  Y1, Y0, Y3
	VMULPD  Y2, Y3, Y3
	VMOVUPD (DX)(R8*8), Y4
	VFMADD231PD Y3, Y9, Y4
	VMOVUPD Y4, (DX)(R8*8)
	VMOVUPD (SI)(R8*8), Y5
	VFMADD231PD Y0, Y10, Y5
	VMOVUPD Y5, (SI)(R8*8)
	ADDQ $4, R8
	CMPQ R8, R9
	JLT  wf_loop4

wf_tail_check:
	CMPQ R8, CX
	JGE  wf_done

wf_tail:
	VMOVSD (BX)(R8*8), X0
	VMOVSD (AX)(R8*8), X1
	VSUBSD X1, X0, X2
	VFMADD231SD X2, X8, X1
	VMOVSD X1, (AX)(R8*8)
	VSUBSD X1, X0, X3
	VMULSD X2, X3, X3
	VMOVSD (DX)(R8*8), X4
	VFMADD231SD X3, X9, X4
	VMOVSD X4, (DX)(R8*8)
	VMOVSD (SI)(R8*8), X5
	VFMADD231SD X0, X10, X5
	VMOVSD X5, (SI)(R8*8)
	INCQ R8
	CMPQ R8, CX
	JLT  wf_tail

wf_done:
	VZEROUPPER
	RET

// func stdRowAVX(dst, x, mu, inv []float64)
// dst_j = (x_j − μ_j) inv_j
TEXT ·stdRowAVX(SB), NOSPLIT, $0-96
	MOVQ dst_base+0(FP), DI
	MOVQ dst_len+8(FP), CX
	MOVQ x_base+24(FP), BX
	MOVQ mu_base+48(FP), DX
	MOVQ inv_base+72(FP), SI
	XORQ R8, R8
	MOVQ CX, R9
	ANDQ $-4, R9
	JZ   sr_tail_check

sr_loop4:
	VMOVUPD (BX)(R8*8), Y0
	VSUBPD  (DX)(R8*8), Y0, Y0
	VMULPD  (SI)(R8*8), Y0, Y0
	VMOVUPD Y0, (DI)(R8*8)
	ADDQ $4, R8
	CMPQ R8, R9
	JLT  sr_loop4

sr_tail_check:
	CMPQ R8, CX
	JGE  sr_done

sr_tail:
	VMOVSD (BX)(R8*8), X0
	VSUBSD (DX)(R8*8), X0, X0
	VMULSD (SI)(R8*8), X0, X0
	VMOVSD X0, (DI)(R8*8)
	INCQ R8
	CMPQ R8, CX
	JLT  sr_tail

sr_done:
	VZEROUPPER
	RET

// func dotAVX(a, b []float64) float64
TEXT ·dotAVX(SB), NOSPLIT, $0-56
	MOVQ a_base+0(FP), AX
	MOVQ a_len+8(FP), CX
	MOVQ b_base+24(FP), BX
	VXORPD Y0, Y0, Y0
	VXORPD Y1, Y1, Y1
	XORQ R8, R8
	MOVQ CX, R9
	ANDQ $-8, R9
	JZ   dt_quad

dt_loop8:
	VMOVUPD (AX)(R8*8), Y2
	VMOVUPD 32(AX)(R8*8), Y3
	VFMADD231PD (BX)(R8*8), Y2, Y0
	VFMADD231PD 32(BX)(R8*8), Y3, Y1
	ADDQ $8, R8
	CMPQ R8, R9
	JLT  dt_loop8

dt_quad:
	MOVQ CX, R9
	ANDQ $-4, R9
	CMPQ R8, R9
	JGE  dt_reduce
	VMOVUPD (AX)(R8*8), Y2
	VFMADD231PD (BX)(R8*8), Y2, Y0
	ADDQ $4, R8

dt_reduce:
	VADDPD Y1, Y0, Y0
	VEXTRACTF128 $1, Y0, X1
	VADDPD X1, X0, X0
	VPERMILPD $1, X0, X1
	VADDSD X1, X0, X0
	CMPQ R8, CX
	JGE  dt_done

dt_tail:
	VMOVSD (AX)(R8*8), X2
	VFMADD231SD (BX)(R8*8), X2, X0
	INCQ R8
	CMPQ R8, CX
	JLT  dt_tail

dt_done:
	VZEROUPPER
	MOVSD X0, ret+48(FP)
	RET

// func axpy2AVX(a float64, x []float64, b float64, y, s []float64)
// s_j += a x_j + b y_j
TEXT ·axpy2AVX(SB), NOSPLIT, $0-88
	VBROADCASTSD a+0(FP), Y8
	MOVQ x_base+8(FP), BX
	MOVQ x_len+16(FP), CX
	VBROADCASTSD b+32(FP), Y9
	MOVQ y_base+40(FP), DX
	MOVQ s_base+64(FP), DI
	XORQ R8, R8
	MOVQ CX, R9
	ANDQ $-4, R9
	JZ   a2_tail_check

a2_loop4:
	VMOVUPD (DI)(R8*8), Y1
	VFMADD231PD (BX)(R8*8), Y8, Y1
	VFMADD231PD (DX)(R8*8), Y9, Y1
	VMOVUPD Y1, (DI)(R8*8)
	ADDQ $4, R8
	CMPQ R8, R9
	JLT  a2_loop4

a2_tail_check:
	CMPQ R8, CX
	JGE  a2_done

a2_tail:
	VMOVSD (DI)(R8*8), X1
	VFMADD231SD (BX)(R8*8), X8, X1
	VFMADD231SD (DX)(R8*8), X9, X1
	VMOVSD X1, (DI)(R8*8)
	INCQ R8
	CMPQ R8, CX
	JLT  a2_tail

a2_done:
	VZEROUPPER
	RET

// func imputeAVX(dst, x, mean []float64, limit float64) (ok bool)
// Over the first len(dst)&^3 elements: dst = x with NaN replaced by mean;
// ok is false if some non-NaN |x_j| > limit (the caller rescans for the
// error). The tail is left to the caller.
TEXT ·imputeAVX(SB), NOSPLIT, $0-81
	MOVQ dst_base+0(FP), DI
	MOVQ dst_len+8(FP), CX
	MOVQ x_base+24(FP), BX
	MOVQ mean_base+48(FP), DX
	VBROADCASTSD limit+72(FP), Y6
	VPCMPEQQ Y7, Y7, Y7
	VPSRLQ $1, Y7, Y7
	VXORPD Y5, Y5, Y5
	XORQ R8, R8
	ANDQ $-4, CX
	JZ   im_done

im_loop4:
	VMOVUPD (BX)(R8*8), Y0
	VCMPPD $3, Y0, Y0, Y1
	VANDNPD Y0, Y1, Y2
	VANDPD (DX)(R8*8), Y1, Y3
	VORPD Y3, Y2, Y2
	VMOVUPD Y2, (DI)(R8*8)
	VANDPD Y7, Y0, Y3
	VCMPPD $0x1e, Y6, Y3, Y4
	VORPD Y4, Y5, Y5
	ADDQ $4, R8
	CMPQ R8, CX
	JLT  im_loop4

im_done:
	VMOVMSKPD Y5, AX
	TESTL AX, AX
	SETEQ ok+80(FP)
	VZEROUPPER
	RET

// func welford2AVX(mu, m2, sxy, xo, xn []float64, fo, wo, wyo, fn, wn, wyn float64)
// welfordAVX removing xo (fo, wo, wyo), then welfordAVX adding xn (fn, wn,
// wyn), fused per element: the same operations in the same order.
TEXT ·welford2AVX(SB), NOSPLIT, $0-168
	MOVQ mu_base+0(FP), AX
	MOVQ mu_len+8(FP), CX
	MOVQ m2_base+24(FP), DX
	MOVQ sxy_base+48(FP), SI
	MOVQ xo_base+72(FP), BX
	MOVQ xn_base+96(FP), DI
	VBROADCASTSD fo+120(FP), Y8
	VBROADCASTSD wo+128(FP), Y9
	VBROADCASTSD wyo+136(FP), Y10
	VBROADCASTSD fn+144(FP), Y11
	VBROADCASTSD wn+152(FP), Y12
	VBROADCASTSD wyn+160(FP), Y13
	XORQ R8, R8
	MOVQ CX, R9
	ANDQ $-4, R9
	JZ   w2_tail_check

w2_loop4:
	VMOVUPD (BX)(R8*8), Y0
	VMOVUPD (AX)(R8*8), Y1
	VSUBPD  Y1, Y0, Y2
	VFMADD231PD Y2, Y8, Y1
	VSUBPD  Y1, Y0, Y3
	VMULPD  Y2, Y3, Y3
	VMOVUPD (DX)(R8*8), Y4
	VFMADD231PD Y3, Y9, Y4
	VMOVUPD (SI)(R8*8), Y5
	VFMADD231PD Y0, Y10, Y5
	VMOVUPD (DI)(R8*8), Y0
	VSUBPD  Y1, Y0, Y2
	VFMADD231PD Y2, Y11, Y1
	VMOVUPD Y1, (AX)(R8*8)
	VSUBPD  Y1, Y0, Y3
	VMULPD  Y2, Y3, Y3
	VFMADD231PD Y3, Y12, Y4
	VMOVUPD Y4, (DX)(R8*8)
	VFMADD231PD Y0, Y13, Y5
	VMOVUPD Y5, (SI)(R8*8)
	ADDQ $4, R8
	CMPQ R8, R9
	JLT  w2_loop4

w2_tail_check:
	CMPQ R8, CX
	JGE  w2_done

w2_tail:
	VMOVSD (BX)(R8*8), X0
	VMOVSD (AX)(R8*8), X1
	VSUBSD X1, X0, X2
	VFMADD231SD X2, X8, X1
	VSUBSD X1, X0, X3
	VMULSD X2, X3, X3
	VMOVSD (DX)(R8*8), X4
	VFMADD231SD X3, X9, X4
	VMOVSD (SI)(R8*8), X5
	VFMADD231SD X0, X10, X5
	VMOVSD (DI)(R8*8), X0
	VSUBSD X1, X0, X2
	VFMADD231SD X2, X11, X1
	VMOVSD X1, (AX)(R8*8)
	VSUBSD X1, X0, X3
	VMULSD X2, X3, X3
	VFMADD231SD X3, X12, X4
	VMOVSD X4, (DX)(R8*8)
	VFMADD231SD X0, X13, X5
	VMOVSD X5, (SI)(R8*8)
	INCQ R8
	CMPQ R8, CX
	JLT  w2_tail

w2_done:
	VZEROUPPER
	RET

// func stdPrepAVX(xa, xt, x, row, mu, inv, refMu, refInv []float64) (sqRef, sqWork float64)
// xa = (x − μ) inv; xt = (row − μ) inv; sqRef = Σ ((x − refMu) refInv)²;
// sqWork = Σ xa². The sums reduce like stdSqAVX (one accumulator, lanes
// 0+2 and 1+3, then the scalar tail), so they equal its results.
TEXT ·stdPrepAVX(SB), NOSPLIT, $0-208
	MOVQ xa_base+0(FP), DI
	MOVQ xa_len+8(FP), CX
	MOVQ xt_base+24(FP), R10
	MOVQ x_base+48(FP), BX
	MOVQ row_base+72(FP), R11
	MOVQ mu_base+96(FP), DX
	MOVQ inv_base+120(FP), SI
	MOVQ refMu_base+144(FP), R12
	MOVQ refInv_base+168(FP), R13
	VXORPD Y0, Y0, Y0
	VXORPD Y1, Y1, Y1
	XORQ R8, R8
	MOVQ CX, R9
	ANDQ $-4, R9
	JZ   sp_reduce

sp_loop4:
	VMOVUPD (BX)(R8*8), Y2
	VMOVUPD (DX)(R8*8), Y6
	VMOVUPD (SI)(R8*8), Y7
	VSUBPD  Y6, Y2, Y3
	VMULPD  Y7, Y3, Y3
	VMOVUPD Y3, (DI)(R8*8)
	VFMADD231PD Y3, Y3, Y0
	VSUBPD  (R12)(R8*8), Y2, Y4
	VMULPD  (R13)(R8*8), Y4, Y4
	VFMADD231PD Y4, Y4, Y1
	VMOVUPD (R11)(R8*8), Y5
	VSUBPD  Y6, Y5, Y5
	VMULPD  Y7, Y5, Y5
	VMOVUPD Y5, (R10)(R8*8)
	ADDQ $4, R8
	CMPQ R8, R9
	JLT  sp_loop4

sp_reduce:
	VEXTRACTF128 $1, Y0, X2
	VADDPD X2, X0, X0
	VPERMILPD $1, X0, X2
	VADDSD X2, X0, X0
	VEXTRACTF128 $1, Y1, X3
	VADDPD X3, X1, X1
	VPERMILPD $1, X1, X3
	VADDSD X3, X1, X1
	CMPQ R8, CX
	JGE  sp_done

sp_tail:
	VMOVSD (BX)(R8*8), X2
	VMOVSD (DX)(R8*8), X6
	VMOVSD (SI)(R8*8), X7
	VSUBSD  X6, X2, X3
	VMULSD  X7, X3, X3
	VMOVSD X3, (DI)(R8*8)
	VFMADD231SD X3, X3, X0
	VSUBSD  (R12)(R8*8), X2, X4
	VMULSD  (R13)(R8*8), X4, X4
	VFMADD231SD X4, X4, X1
	VMOVSD (R11)(R8*8), X5
	VSUBSD  X6, X5, X5
	VMULSD  X7, X5, X5
	VMOVSD X5, (R10)(R8*8)
	INCQ R8
	CMPQ R8, CX
	JLT  sp_tail

sp_done:
	VZEROUPPER
	MOVSD X1, sqRef+192(FP)
	MOVSD X0, sqWork+200(FP)
	RET

// func stdPrep1AVX(theta, x, row, mu, inv, refMu, refInv []float64) (sqRef, sqWork, da, dt float64)
// stdPrepAVX without the stores, returning θ against xa and xt instead.
TEXT ·stdPrep1AVX(SB), NOSPLIT, $0-200
	MOVQ theta_base+0(FP), AX
	MOVQ theta_len+8(FP), CX
	MOVQ x_base+24(FP), BX
	MOVQ row_base+48(FP), R11
	MOVQ mu_base+72(FP), DX
	MOVQ inv_base+96(FP), SI
	MOVQ refMu_base+120(FP), R12
	MOVQ refInv_base+144(FP), R13
	VXORPD Y0, Y0, Y0
	VXORPD Y1, Y1, Y1
	VXORPD Y8, Y8, Y8
	VXORPD Y9, Y9, Y9
	XORQ R8, R8
	MOVQ CX, R9
	ANDQ $-4, R9
	JZ   p1_reduce

p1_loop4:
	VMOVUPD (BX)(R8*8), Y2
	VMOVUPD (DX)(R8*8), Y6
	VMOVUPD (SI)(R8*8), Y7
	VMOVUPD (AX)(R8*8), Y10
	VSUBPD  Y6, Y2, Y3
	VMULPD  Y7, Y3, Y3
	VFMADD231PD Y3, Y3, Y0
	VFMADD231PD Y3, Y10, Y8
	VSUBPD  (R12)(R8*8), Y2, Y4
	VMULPD  (R13)(R8*8), Y4, Y4
	VFMADD231PD Y4, Y4, Y1
	VMOVUPD (R11)(R8*8), Y5
	VSUBPD  Y6, Y5, Y5
	VMULPD  Y7, Y5, Y5
	VFMADD231PD Y5, Y10, Y9
	ADDQ $4, R8
	CMPQ R8, R9
	JLT  p1_loop4

p1_reduce:
	VEXTRACTF128 $1, Y0, X2
	VADDPD X2, X0, X0
	VPERMILPD $1, X0, X2
	VADDSD X2, X0, X0
	VEXTRACTF128 $1, Y1, X3
	VADDPD X3, X1, X1
	VPERMILPD $1, X1, X3
	VADDSD X3, X1, X1
	VEXTRACTF128 $1, Y8, X2
	VADDPD X2, X8, X8
	VPERMILPD $1, X8, X2
	VADDSD X2, X8, X8
	VEXTRACTF128 $1, Y9, X3
	VADDPD X3, X9, X9
	VPERMILPD $1, X9, X3
	VADDSD X3, X9, X9
	CMPQ R8, CX
	JGE  p1_done

p1_tail:
	VMOVSD (BX)(R8*8), X2
	VMOVSD (DX)(R8*8), X6
	VMOVSD (SI)(R8*8), X7
	VMOVSD (AX)(R8*8), X10
	VSUBSD  X6, X2, X3
	VMULSD  X7, X3, X3
	VFMADD231SD X3, X3, X0
	VFMADD231SD X3, X10, X8
	VSUBSD  (R12)(R8*8), X2, X4
	VMULSD  (R13)(R8*8), X4, X4
	VFMADD231SD X4, X4, X1
	VMOVSD (R11)(R8*8), X5
	VSUBSD  X6, X5, X5
	VMULSD  X7, X5, X5
	VFMADD231SD X5, X10, X9
	INCQ R8
	CMPQ R8, CX
	JLT  p1_tail

p1_done:
	VZEROUPPER
	MOVSD X1, sqRef+168(FP)
	MOVSD X0, sqWork+176(FP)
	MOVSD X8, da+184(FP)
	MOVSD X9, dt+192(FP)
	RET

// func dot2AllAVX(theta, x, y, out []float64)
// For k < len(out)/2: out[2k] = θ_k·x, out[2k+1] = θ_k·y, θ_k = theta[k·d:],
// d = len(x); two accumulators per dot product.
TEXT ·dot2AllAVX(SB), NOSPLIT, $0-96
	MOVQ theta_base+0(FP), AX
	MOVQ x_base+24(FP), BX
	MOVQ x_len+32(FP), CX
	MOVQ y_base+48(FP), DX
	MOVQ out_base+72(FP), DI
	MOVQ out_len+80(FP), R14
	SHRQ $1, R14
	MOVQ CX, R9
	ANDQ $-8, R9
	MOVQ CX, R10
	ANDQ $-4, R10
	TESTQ R14, R14
	JZ   da_done

da_member:
	VXORPD Y0, Y0, Y0
	VXORPD Y1, Y1, Y1
	VXORPD Y4, Y4, Y4
	VXORPD Y5, Y5, Y5
	XORQ R8, R8
	CMPQ R8, R9
	JGE  da_quad

da_loop8:
	VMOVUPD (AX)(R8*8), Y2
	VMOVUPD 32(AX)(R8*8), Y3
	VFMADD231PD (BX)(R8*8), Y2, Y0
	VFMADD231PD (DX)(R8*8), Y2, Y1
	VFMADD231PD 32(BX)(R8*8), Y3, Y4
	VFMADD231PD 32(DX)(R8*8), Y3, Y5
	ADDQ $8, R8
	CMPQ R8, R9
	JLT  da_loop8

da_quad:
	CMPQ R8, R10
	JGE  da_reduce
	VMOVUPD (AX)(R8*8), Y2
	VFMADD231PD (BX)(R8*8), Y2, Y0
	VFMADD231PD (DX)(R8*8), Y2, Y1
	ADDQ $4, R8

da_reduce:
	VADDPD Y4, Y0, Y0
	VADDPD Y5, Y1, Y1
	VEXTRACTF128 $1, Y0, X2
	VADDPD X2, X0, X0
	VPERMILPD $1, X0, X2
	VADDSD X2, X0, X0
	VEXTRACTF128 $1, Y1, X3
	VADDPD X3, X1, X1
	VPERMILPD $1, X1, X3
	VADDSD X3, X1, X1
	CMPQ R8, CX
	JGE  da_next

da_tail:
	VMOVSD (AX)(R8*8), X2
	VFMADD231SD (BX)(R8*8), X2, X0
	VFMADD231SD (DX)(R8*8), X2, X1
	INCQ R8
	CMPQ R8, CX
	JLT  da_tail

da_next:
	MOVSD X0, 0(DI)
	MOVSD X1, 8(DI)
	LEAQ (AX)(CX*8), AX
	ADDQ $16, DI
	DECQ R14
	JNZ  da_member

da_done:
	VZEROUPPER
	RET

// func sumRowsAVX(s, x, g []float64, d, k, rows int)
// For m < k: s[m·d:] += Σ_r g[r·k+m]·x[r·d:], rows r < rows in order,
// rows with g = 0 skipped; per element the FMAs of axpyAVX row by row. The
// columns go in blocks of 16 (four accumulators), then 4, then 1, each
// block summing over all rows. AX s_m, BX x, DX g column m, R10 rows,
// R11 d·8 (row stride of x), R12 k·8 (row stride of g), R13 members left,
// R14 rows left, X5 zero.
TEXT ·sumRowsAVX(SB), NOSPLIT, $0-96
	MOVQ s_base+0(FP), AX
	MOVQ x_base+24(FP), BX
	MOVQ g_base+48(FP), DX
	MOVQ d+72(FP), CX
	MOVQ k+80(FP), R13
	MOVQ rows+88(FP), R10
	LEAQ (CX*8), R11
	LEAQ (R13*8), R12
	VXORPD X5, X5, X5
	TESTQ R10, R10
	JZ   sr2_done
	TESTQ R13, R13
	JZ   sr2_done

sr2_member:
	XORQ R8, R8

sr2_block16:
	LEAQ 16(R8), R9
	CMPQ R9, CX
	JGT  sr2_block4
	VMOVUPD (AX)(R8*8), Y0
	VMOVUPD 32(AX)(R8*8), Y1
	VMOVUPD 64(AX)(R8*8), Y2
	VMOVUPD 96(AX)(R8*8), Y3
	LEAQ (BX)(R8*8), SI
	MOVQ DX, DI
	MOVQ R10, R14

sr2_row16:
	VMOVSD (DI), X4
	VUCOMISD X5, X4
	JNE  sr2_do16
	JPC  sr2_skip16

sr2_do16:
	VBROADCASTSD X4, Y4
	VFMADD231PD (SI), Y4, Y0
	VFMADD231PD 32(SI), Y4, Y1
	VFMADD231PD 64(SI), Y4, Y2
	VFMADD231PD 96(SI), Y4, Y3

sr2_skip16:
	ADDQ R11, SI
	ADDQ R12, DI
	DECQ R14
	JNZ  sr2_row16
	VMOVUPD Y0, (AX)(R8*8)
	VMOVUPD Y1, 32(AX)(R8*8)
	VMOVUPD Y2, 64(AX)(R8*8)
	VMOVUPD Y3, 96(AX)(R8*8)
	MOVQ R9, R8
	JMP  sr2_block16

sr2_block4:
	LEAQ 4(R8), R9
	CMPQ R9, CX
	JGT  sr2_col
	VMOVUPD (AX)(R8*8), Y0
	LEAQ (BX)(R8*8), SI
	MOVQ DX, DI
	MOVQ R10, R14

sr2_row4:
	VMOVSD (DI), X4
	VUCOMISD X5, X4
	JNE  sr2_do4
	JPC  sr2_skip4

sr2_do4:
	VBROADCASTSD X4, Y4
	VFMADD231PD (SI), Y4, Y0

sr2_skip4:
	ADDQ R11, SI
	ADDQ R12, DI
	DECQ R14
	JNZ  sr2_row4
	VMOVUPD Y0, (AX)(R8*8)
	MOVQ R9, R8
	JMP  sr2_block4

sr2_col:
	CMPQ R8, CX
	JGE  sr2_next
	VMOVSD (AX)(R8*8), X0
	LEAQ (BX)(R8*8), SI
	MOVQ DX, DI
	MOVQ R10, R14

sr2_row1:
	VMOVSD (DI), X4
	VUCOMISD X5, X4
	JNE  sr2_do1
	JPC  sr2_skip1

sr2_do1:
	VFMADD231SD (SI), X4, X0

sr2_skip1:
	ADDQ R11, SI
	ADDQ R12, DI
	DECQ R14
	JNZ  sr2_row1
	VMOVSD X0, (AX)(R8*8)
	INCQ R8
	JMP  sr2_col

sr2_next:
	ADDQ R11, AX
	ADDQ $8, DX
	DECQ R13
	JNZ  sr2_member

sr2_done:
	VZEROUPPER
	RET
