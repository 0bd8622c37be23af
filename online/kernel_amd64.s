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

// func sagaAVX(theta, s, x, mu, inv []float64, e, h, c, t, r, delta float64)
// q = e x + s − h μ; z = θ − c inv q; θ = (max(z−t,0) + min(z+t,0)) r; s += δ x
TEXT ·sagaAVX(SB), NOSPLIT, $0-168
	MOVQ theta_base+0(FP), AX
	MOVQ theta_len+8(FP), CX
	MOVQ s_base+24(FP), DI
	MOVQ x_base+48(FP), BX
	MOVQ mu_base+72(FP), DX
	MOVQ inv_base+96(FP), SI
	VBROADCASTSD e+120(FP), Y8
	VBROADCASTSD h+128(FP), Y9
	VBROADCASTSD c+136(FP), Y10
	VBROADCASTSD t+144(FP), Y11
	VBROADCASTSD r+152(FP), Y12
	VBROADCASTSD delta+160(FP), Y13
	VXORPD Y14, Y14, Y14
	XORQ R8, R8
	MOVQ CX, R9
	ANDQ $-4, R9
	JZ   sg_tail_check

sg_loop4:
	VMOVUPD (BX)(R8*8), Y0
	VMOVUPD (DI)(R8*8), Y1
	VMOVAPD Y1, Y2
	VFMADD231PD Y0, Y8, Y2
	VFNMADD231PD (DX)(R8*8), Y9, Y2
	VMULPD  (SI)(R8*8), Y2, Y2
	VMOVUPD (AX)(R8*8), Y4
	VFNMADD231PD Y2, Y10, Y4
	VSUBPD  Y11, Y4, Y5
	VMAXPD  Y14, Y5, Y5
	VADDPD  Y11, Y4, Y6
	VMINPD  Y14, Y6, Y6
	VADDPD  Y6, Y5, Y5
	VMULPD  Y12, Y5, Y5
	VMOVUPD Y5, (AX)(R8*8)
	VFMADD231PD Y0, Y13, Y1
	VMOVUPD Y1, (DI)(R8*8)
	ADDQ $4, R8
	CMPQ R8, R9
	JLT  sg_loop4

sg_tail_check:
	CMPQ R8, CX
	JGE  sg_done

sg_tail:
	VMOVSD (BX)(R8*8), X0
	VMOVSD (DI)(R8*8), X1
	VMOVAPD X1, X2
	VFMADD231SD X0, X8, X2
	VFNMADD231SD (DX)(R8*8), X9, X2
	VMULSD  (SI)(R8*8), X2, X2
	VMOVSD (AX)(R8*8), X4
	VFNMADD231SD X2, X10, X4
	VSUBSD  X11, X4, X5
	VMAXSD  X14, X5, X5
	VADDSD  X11, X4, X6
	VMINSD  X14, X6, X6
	VADDSD  X6, X5, X5
	VMULSD  X12, X5, X5
	VMOVSD X5, (AX)(R8*8)
	VFMADD231SD X0, X13, X1
	VMOVSD X1, (DI)(R8*8)
	INCQ R8
	CMPQ R8, CX
	JLT  sg_tail

sg_done:
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

// func sagaDotAVX(theta, s, x, mu, inv, xn []float64, e, h, c, t, r, delta float64) float64
// sagaAVX, then returns Σ θ_new,j·xn_j (the next step's dot product, fused).
TEXT ·sagaDotAVX(SB), NOSPLIT, $0-200
	MOVQ theta_base+0(FP), AX
	MOVQ theta_len+8(FP), CX
	MOVQ s_base+24(FP), DI
	MOVQ x_base+48(FP), BX
	MOVQ mu_base+72(FP), DX
	MOVQ inv_base+96(FP), SI
	MOVQ xn_base+120(FP), R10
	VBROADCASTSD e+144(FP), Y8
	VBROADCASTSD h+152(FP), Y9
	VBROADCASTSD c+160(FP), Y10
	VBROADCASTSD t+168(FP), Y11
	VBROADCASTSD r+176(FP), Y12
	VBROADCASTSD delta+184(FP), Y13
	VXORPD Y14, Y14, Y14
	VXORPD Y15, Y15, Y15
	VXORPD X7, X7, X7
	XORQ R8, R8
	MOVQ CX, R9
	ANDQ $-4, R9
	JZ   sd2_tail_check

sd2_loop4:
	VMOVUPD (BX)(R8*8), Y0
	VMOVUPD (DI)(R8*8), Y1
	VMOVAPD Y1, Y2
	VFMADD231PD Y0, Y8, Y2
	VFNMADD231PD (DX)(R8*8), Y9, Y2
	VMULPD  (SI)(R8*8), Y2, Y2
	VMOVUPD (AX)(R8*8), Y4
	VFNMADD231PD Y2, Y10, Y4
	VSUBPD  Y11, Y4, Y5
	VMAXPD  Y14, Y5, Y5
	VADDPD  Y11, Y4, Y6
	VMINPD  Y14, Y6, Y6
	VADDPD  Y6, Y5, Y5
	VMULPD  Y12, Y5, Y5
	VMOVUPD Y5, (AX)(R8*8)
	VFMADD231PD (R10)(R8*8), Y5, Y15
	VFMADD231PD Y0, Y13, Y1
	VMOVUPD Y1, (DI)(R8*8)
	ADDQ $4, R8
	CMPQ R8, R9
	JLT  sd2_loop4

sd2_tail_check:
	CMPQ R8, CX
	JGE  sd2_done

sd2_tail:
	VMOVSD (BX)(R8*8), X0
	VMOVSD (DI)(R8*8), X1
	VMOVAPD X1, X2
	VFMADD231SD X0, X8, X2
	VFNMADD231SD (DX)(R8*8), X9, X2
	VMULSD  (SI)(R8*8), X2, X2
	VMOVSD (AX)(R8*8), X4
	VFNMADD231SD X2, X10, X4
	VSUBSD  X11, X4, X5
	VMAXSD  X14, X5, X5
	VADDSD  X11, X4, X6
	VMINSD  X14, X6, X6
	VADDSD  X6, X5, X5
	VMULSD  X12, X5, X5
	VMOVSD X5, (AX)(R8*8)
	VFMADD231SD (R10)(R8*8), X5, X7
	VFMADD231SD X0, X13, X1
	VMOVSD X1, (DI)(R8*8)
	INCQ R8
	CMPQ R8, CX
	JLT  sd2_tail

sd2_done:
	VEXTRACTF128 $1, Y15, X1
	VADDPD X1, X15, X0
	VPERMILPD $1, X0, X1
	VADDSD X1, X0, X0
	VADDSD X7, X0, X0
	VZEROUPPER
	MOVSD X0, ret+192(FP)
	RET

// func dot2AVX(a, x, y []float64) (ax, ay float64)
// Σ a_j x_j and Σ a_j y_j in one pass over a (two accumulators each).
TEXT ·dot2AVX(SB), NOSPLIT, $0-88
	MOVQ a_base+0(FP), AX
	MOVQ a_len+8(FP), CX
	MOVQ x_base+24(FP), BX
	MOVQ y_base+48(FP), DX
	VXORPD Y0, Y0, Y0
	VXORPD Y1, Y1, Y1
	VXORPD Y4, Y4, Y4
	VXORPD Y5, Y5, Y5
	XORQ R8, R8
	MOVQ CX, R9
	ANDQ $-8, R9
	JZ   d2_quad

d2_loop8:
	VMOVUPD (AX)(R8*8), Y2
	VMOVUPD 32(AX)(R8*8), Y3
	VFMADD231PD (BX)(R8*8), Y2, Y0
	VFMADD231PD (DX)(R8*8), Y2, Y1
	VFMADD231PD 32(BX)(R8*8), Y3, Y4
	VFMADD231PD 32(DX)(R8*8), Y3, Y5
	ADDQ $8, R8
	CMPQ R8, R9
	JLT  d2_loop8

d2_quad:
	MOVQ CX, R9
	ANDQ $-4, R9
	CMPQ R8, R9
	JGE  d2_reduce
	VMOVUPD (AX)(R8*8), Y2
	VFMADD231PD (BX)(R8*8), Y2, Y0
	VFMADD231PD (DX)(R8*8), Y2, Y1
	ADDQ $4, R8

d2_reduce:
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
	JGE  d2_done

d2_tail:
	VMOVSD (AX)(R8*8), X2
	VFMADD231SD (BX)(R8*8), X2, X0
	VFMADD231SD (DX)(R8*8), X2, X1
	INCQ R8
	CMPQ R8, CX
	JLT  d2_tail

d2_done:
	VZEROUPPER
	MOVSD X0, ax+72(FP)
	MOVSD X1, ay+80(FP)
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

// func sagaArriveAVX(theta, s, x, mu, inv, xa, xo, xn []float64, e, h, c, t, r, delta, a, b float64) float64
// sagaDotAVX with the arrival and eviction folded in first: s += a·xa + b·xo.
TEXT ·sagaArriveAVX(SB), NOSPLIT, $0-264
	MOVQ theta_base+0(FP), AX
	MOVQ theta_len+8(FP), CX
	MOVQ s_base+24(FP), DI
	MOVQ x_base+48(FP), BX
	MOVQ mu_base+72(FP), DX
	MOVQ inv_base+96(FP), SI
	MOVQ xa_base+120(FP), R11
	MOVQ xo_base+144(FP), R12
	MOVQ xn_base+168(FP), R10
	VBROADCASTSD e+192(FP), Y8
	VBROADCASTSD h+200(FP), Y9
	VBROADCASTSD c+208(FP), Y10
	VBROADCASTSD t+216(FP), Y11
	VBROADCASTSD r+224(FP), Y12
	VBROADCASTSD delta+232(FP), Y13
	VBROADCASTSD a+240(FP), Y3
	VBROADCASTSD b+248(FP), Y7
	VXORPD Y14, Y14, Y14
	VXORPD Y15, Y15, Y15
	XORQ R8, R8
	MOVQ CX, R9
	ANDQ $-4, R9
	JZ   sa_reduce

sa_loop4:
	VMOVUPD (BX)(R8*8), Y0
	VMOVUPD (DI)(R8*8), Y1
	VFMADD231PD (R11)(R8*8), Y3, Y1
	VFMADD231PD (R12)(R8*8), Y7, Y1
	VMOVAPD Y1, Y2
	VFMADD231PD Y0, Y8, Y2
	VFNMADD231PD (DX)(R8*8), Y9, Y2
	VMULPD  (SI)(R8*8), Y2, Y2
	VMOVUPD (AX)(R8*8), Y4
	VFNMADD231PD Y2, Y10, Y4
	VSUBPD  Y11, Y4, Y5
	VMAXPD  Y14, Y5, Y5
	VADDPD  Y11, Y4, Y6
	VMINPD  Y14, Y6, Y6
	VADDPD  Y6, Y5, Y5
	VMULPD  Y12, Y5, Y5
	VMOVUPD Y5, (AX)(R8*8)
	VFMADD231PD (R10)(R8*8), Y5, Y15
	VFMADD231PD Y0, Y13, Y1
	VMOVUPD Y1, (DI)(R8*8)
	ADDQ $4, R8
	CMPQ R8, R9
	JLT  sa_loop4

sa_reduce:
	VEXTRACTF128 $1, Y15, X6
	VADDPD X6, X15, X15
	VPERMILPD $1, X15, X6
	VADDSD X6, X15, X15
	CMPQ R8, CX
	JGE  sa_done

sa_tail:
	VMOVSD (BX)(R8*8), X0
	VMOVSD (DI)(R8*8), X1
	VFMADD231SD (R11)(R8*8), X3, X1
	VFMADD231SD (R12)(R8*8), X7, X1
	VMOVAPD X1, X2
	VFMADD231SD X0, X8, X2
	VFNMADD231SD (DX)(R8*8), X9, X2
	VMULSD  (SI)(R8*8), X2, X2
	VMOVSD (AX)(R8*8), X4
	VFNMADD231SD X2, X10, X4
	VSUBSD  X11, X4, X5
	VMAXSD  X14, X5, X5
	VADDSD  X11, X4, X6
	VMINSD  X14, X6, X6
	VADDSD  X6, X5, X5
	VMULSD  X12, X5, X5
	VMOVSD X5, (AX)(R8*8)
	VFMADD231SD (R10)(R8*8), X5, X15
	VFMADD231SD X0, X13, X1
	VMOVSD X1, (DI)(R8*8)
	INCQ R8
	CMPQ R8, CX
	JLT  sa_tail

sa_done:
	VZEROUPPER
	MOVSD X15, ret+256(FP)
	RET
