//go:build !purego

#include "textflag.h"

// The proximal SAGA step kernels (kernel.go: sagaGo and its variants), AVX2
// + FMA, 4 float64 per iteration and a scalar tail with the same operations.
// Per coordinate: q = e·x + s − h·μ; z = θ − c·v·q; θ = soft(z, t)·r, with
// soft(z, t) = z − clamp(z, −t, t) (for finite z and t ≥ 0 it equals
// max(z−t, 0) + min(z+t, 0), up to the sign of a zero); s += δ·x. "Arrive"
// variants first fold s += a·xa + b·xo (a record admitted, one evicted);
// "Dot" variants return Σ θ_new,j·xn_j with xn standardized, "Raw" ones
// Σ θ_new,j·(xn_j − μ_j)·v_j with xn raw (without an arrival, the scalar
// tail sums apart in X7 and is added last). The single-member kernels serve a
// ladder of one member (K = 1), the batched ones ("All") larger ladders.
// Registers: AX θ, DI s, BX x, DX μ, SI v, R11 xa, R12 xo, R10 xn, R13 dst;
// Y8 e, Y9 h, Y10 c, Y11 t, Y14 −t, Y12 r, Y13 δ, Y3 a, Y7 b, Y15 the dot
// product.

// func sagaAVX(theta, s, x, mu, inv []float64, e, h, c, t, r, delta float64)
// One step.
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
	VSUBPD Y11, Y14, Y14
	XORQ R8, R8
	MOVQ CX, R9
	ANDQ $-4, R9
	JZ   saga_reduce

saga_loop4:
	VMOVUPD (BX)(R8*8), Y0
	VMOVUPD (DI)(R8*8), Y1
	VMOVAPD Y1, Y2
	VFMADD231PD Y0, Y8, Y2
	VFNMADD231PD (DX)(R8*8), Y9, Y2
	VMULPD (SI)(R8*8), Y2, Y2
	VMOVUPD (AX)(R8*8), Y4
	VFNMADD231PD Y2, Y10, Y4
	VMAXPD Y14, Y4, Y5
	VMINPD Y11, Y5, Y5
	VSUBPD Y5, Y4, Y5
	VMULPD Y12, Y5, Y5
	VMOVUPD Y5, (AX)(R8*8)
	VFMADD231PD Y0, Y13, Y1
	VMOVUPD Y1, (DI)(R8*8)
	ADDQ $4, R8
	CMPQ R8, R9
	JLT  saga_loop4

saga_reduce:
	CMPQ R8, CX
	JGE  saga_done

saga_tail:
	VMOVSD (BX)(R8*8), X0
	VMOVSD (DI)(R8*8), X1
	VMOVAPD X1, X2
	VFMADD231SD X0, X8, X2
	VFNMADD231SD (DX)(R8*8), X9, X2
	VMULSD (SI)(R8*8), X2, X2
	VMOVSD (AX)(R8*8), X4
	VFNMADD231SD X2, X10, X4
	VMAXSD X14, X4, X5
	VMINSD X11, X5, X5
	VSUBSD X5, X4, X5
	VMULSD X12, X5, X5
	VMOVSD X5, (AX)(R8*8)
	VFMADD231SD X0, X13, X1
	VMOVSD X1, (DI)(R8*8)
	INCQ R8
	CMPQ R8, CX
	JLT  saga_tail

saga_done:
	VZEROUPPER
	RET

// func sagaDotRawAVX(theta, s, x, mu, inv, xn []float64, e, h, c, t, r, delta float64) float64
// One step; returns the new θ against the raw xn, standardized on the fly.
TEXT ·sagaDotRawAVX(SB), NOSPLIT, $0-200
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
	VSUBPD Y11, Y14, Y14
	VXORPD Y15, Y15, Y15
	VXORPD X7, X7, X7
	XORQ R8, R8
	MOVQ CX, R9
	ANDQ $-4, R9
	JZ   sagadotraw_reduce

sagadotraw_loop4:
	VMOVUPD (BX)(R8*8), Y0
	VMOVUPD (DI)(R8*8), Y1
	VMOVAPD Y1, Y2
	VFMADD231PD Y0, Y8, Y2
	VFNMADD231PD (DX)(R8*8), Y9, Y2
	VMULPD (SI)(R8*8), Y2, Y2
	VMOVUPD (AX)(R8*8), Y4
	VFNMADD231PD Y2, Y10, Y4
	VMAXPD Y14, Y4, Y5
	VMINPD Y11, Y5, Y5
	VSUBPD Y5, Y4, Y5
	VMULPD Y12, Y5, Y5
	VMOVUPD Y5, (AX)(R8*8)
	VMOVUPD (R10)(R8*8), Y6
	VSUBPD (DX)(R8*8), Y6, Y6
	VMULPD (SI)(R8*8), Y6, Y6
	VFMADD231PD Y6, Y5, Y15
	VFMADD231PD Y0, Y13, Y1
	VMOVUPD Y1, (DI)(R8*8)
	ADDQ $4, R8
	CMPQ R8, R9
	JLT  sagadotraw_loop4

sagadotraw_reduce:
	VEXTRACTF128 $1, Y15, X6
	VADDPD X6, X15, X15
	VPERMILPD $1, X15, X6
	VADDSD X6, X15, X15
	CMPQ R8, CX
	JGE  sagadotraw_done

sagadotraw_tail:
	VMOVSD (BX)(R8*8), X0
	VMOVSD (DI)(R8*8), X1
	VMOVAPD X1, X2
	VFMADD231SD X0, X8, X2
	VFNMADD231SD (DX)(R8*8), X9, X2
	VMULSD (SI)(R8*8), X2, X2
	VMOVSD (AX)(R8*8), X4
	VFNMADD231SD X2, X10, X4
	VMAXSD X14, X4, X5
	VMINSD X11, X5, X5
	VSUBSD X5, X4, X5
	VMULSD X12, X5, X5
	VMOVSD X5, (AX)(R8*8)
	VMOVSD (R10)(R8*8), X6
	VSUBSD (DX)(R8*8), X6, X6
	VMULSD (SI)(R8*8), X6, X6
	VFMADD231SD X6, X5, X7
	VFMADD231SD X0, X13, X1
	VMOVSD X1, (DI)(R8*8)
	INCQ R8
	CMPQ R8, CX
	JLT  sagadotraw_tail

sagadotraw_done:
	VADDSD X7, X15, X15
	VZEROUPPER
	MOVSD X15, ret+192(FP)
	RET

// func sagaArrive0AVX(theta, s, x, mu, inv, xa, xo, dst []float64, e, h, c, t, r, delta, a, b float64)
// One step with an arrival and an eviction folded in; copies xa to dst (which
// may be xo: each xo_j is read before dst_j is written).
TEXT ·sagaArrive0AVX(SB), NOSPLIT, $0-256
	MOVQ theta_base+0(FP), AX
	MOVQ theta_len+8(FP), CX
	MOVQ s_base+24(FP), DI
	MOVQ x_base+48(FP), BX
	MOVQ mu_base+72(FP), DX
	MOVQ inv_base+96(FP), SI
	MOVQ xa_base+120(FP), R11
	MOVQ xo_base+144(FP), R12
	MOVQ dst_base+168(FP), R13
	VBROADCASTSD e+192(FP), Y8
	VBROADCASTSD h+200(FP), Y9
	VBROADCASTSD c+208(FP), Y10
	VBROADCASTSD t+216(FP), Y11
	VBROADCASTSD r+224(FP), Y12
	VBROADCASTSD delta+232(FP), Y13
	VBROADCASTSD a+240(FP), Y3
	VBROADCASTSD b+248(FP), Y7
	VXORPD Y14, Y14, Y14
	VSUBPD Y11, Y14, Y14
	XORQ R8, R8
	MOVQ CX, R9
	ANDQ $-4, R9
	JZ   sagaarrive0_reduce

sagaarrive0_loop4:
	VMOVUPD (BX)(R8*8), Y0
	VMOVUPD (DI)(R8*8), Y1
	VMOVUPD (R11)(R8*8), Y6
	VFMADD231PD Y6, Y3, Y1
	VFMADD231PD (R12)(R8*8), Y7, Y1
	VMOVUPD Y6, (R13)(R8*8)
	VMOVAPD Y1, Y2
	VFMADD231PD Y0, Y8, Y2
	VFNMADD231PD (DX)(R8*8), Y9, Y2
	VMULPD (SI)(R8*8), Y2, Y2
	VMOVUPD (AX)(R8*8), Y4
	VFNMADD231PD Y2, Y10, Y4
	VMAXPD Y14, Y4, Y5
	VMINPD Y11, Y5, Y5
	VSUBPD Y5, Y4, Y5
	VMULPD Y12, Y5, Y5
	VMOVUPD Y5, (AX)(R8*8)
	VFMADD231PD Y0, Y13, Y1
	VMOVUPD Y1, (DI)(R8*8)
	ADDQ $4, R8
	CMPQ R8, R9
	JLT  sagaarrive0_loop4

sagaarrive0_reduce:
	CMPQ R8, CX
	JGE  sagaarrive0_done

sagaarrive0_tail:
	VMOVSD (BX)(R8*8), X0
	VMOVSD (DI)(R8*8), X1
	VMOVSD (R11)(R8*8), X6
	VFMADD231SD X6, X3, X1
	VFMADD231SD (R12)(R8*8), X7, X1
	VMOVSD X6, (R13)(R8*8)
	VMOVAPD X1, X2
	VFMADD231SD X0, X8, X2
	VFNMADD231SD (DX)(R8*8), X9, X2
	VMULSD (SI)(R8*8), X2, X2
	VMOVSD (AX)(R8*8), X4
	VFNMADD231SD X2, X10, X4
	VMAXSD X14, X4, X5
	VMINSD X11, X5, X5
	VSUBSD X5, X4, X5
	VMULSD X12, X5, X5
	VMOVSD X5, (AX)(R8*8)
	VFMADD231SD X0, X13, X1
	VMOVSD X1, (DI)(R8*8)
	INCQ R8
	CMPQ R8, CX
	JLT  sagaarrive0_tail

sagaarrive0_done:
	VZEROUPPER
	RET

// func sagaArriveRawAVX(theta, s, x, mu, inv, xa, xo, xn, dst []float64, e, h, c, t, r, delta, a, b float64) float64
// One step with an arrival and an eviction, returning the new θ against the
// raw xn; copies xa to dst as sagaArrive0AVX does.
TEXT ·sagaArriveRawAVX(SB), NOSPLIT, $0-288
	MOVQ theta_base+0(FP), AX
	MOVQ theta_len+8(FP), CX
	MOVQ s_base+24(FP), DI
	MOVQ x_base+48(FP), BX
	MOVQ mu_base+72(FP), DX
	MOVQ inv_base+96(FP), SI
	MOVQ xa_base+120(FP), R11
	MOVQ xo_base+144(FP), R12
	MOVQ xn_base+168(FP), R10
	MOVQ dst_base+192(FP), R13
	VBROADCASTSD e+216(FP), Y8
	VBROADCASTSD h+224(FP), Y9
	VBROADCASTSD c+232(FP), Y10
	VBROADCASTSD t+240(FP), Y11
	VBROADCASTSD r+248(FP), Y12
	VBROADCASTSD delta+256(FP), Y13
	VBROADCASTSD a+264(FP), Y3
	VBROADCASTSD b+272(FP), Y7
	VXORPD Y14, Y14, Y14
	VSUBPD Y11, Y14, Y14
	VXORPD Y15, Y15, Y15
	XORQ R8, R8
	MOVQ CX, R9
	ANDQ $-4, R9
	JZ   sagaarriveraw_reduce

sagaarriveraw_loop4:
	VMOVUPD (BX)(R8*8), Y0
	VMOVUPD (DI)(R8*8), Y1
	VMOVUPD (R11)(R8*8), Y6
	VFMADD231PD Y6, Y3, Y1
	VFMADD231PD (R12)(R8*8), Y7, Y1
	VMOVUPD Y6, (R13)(R8*8)
	VMOVAPD Y1, Y2
	VFMADD231PD Y0, Y8, Y2
	VFNMADD231PD (DX)(R8*8), Y9, Y2
	VMULPD (SI)(R8*8), Y2, Y2
	VMOVUPD (AX)(R8*8), Y4
	VFNMADD231PD Y2, Y10, Y4
	VMAXPD Y14, Y4, Y5
	VMINPD Y11, Y5, Y5
	VSUBPD Y5, Y4, Y5
	VMULPD Y12, Y5, Y5
	VMOVUPD Y5, (AX)(R8*8)
	VMOVUPD (R10)(R8*8), Y6
	VSUBPD (DX)(R8*8), Y6, Y6
	VMULPD (SI)(R8*8), Y6, Y6
	VFMADD231PD Y6, Y5, Y15
	VFMADD231PD Y0, Y13, Y1
	VMOVUPD Y1, (DI)(R8*8)
	ADDQ $4, R8
	CMPQ R8, R9
	JLT  sagaarriveraw_loop4

sagaarriveraw_reduce:
	VEXTRACTF128 $1, Y15, X6
	VADDPD X6, X15, X15
	VPERMILPD $1, X15, X6
	VADDSD X6, X15, X15
	CMPQ R8, CX
	JGE  sagaarriveraw_done

sagaarriveraw_tail:
	VMOVSD (BX)(R8*8), X0
	VMOVSD (DI)(R8*8), X1
	VMOVSD (R11)(R8*8), X6
	VFMADD231SD X6, X3, X1
	VFMADD231SD (R12)(R8*8), X7, X1
	VMOVSD X6, (R13)(R8*8)
	VMOVAPD X1, X2
	VFMADD231SD X0, X8, X2
	VFNMADD231SD (DX)(R8*8), X9, X2
	VMULSD (SI)(R8*8), X2, X2
	VMOVSD (AX)(R8*8), X4
	VFNMADD231SD X2, X10, X4
	VMAXSD X14, X4, X5
	VMINSD X11, X5, X5
	VSUBSD X5, X4, X5
	VMULSD X12, X5, X5
	VMOVSD X5, (AX)(R8*8)
	VMOVSD (R10)(R8*8), X6
	VSUBSD (DX)(R8*8), X6, X6
	VMULSD (SI)(R8*8), X6, X6
	VFMADD231SD X6, X5, X15
	VFMADD231SD X0, X13, X1
	VMOVSD X1, (DI)(R8*8)
	INCQ R8
	CMPQ R8, CX
	JLT  sagaarriveraw_tail

sagaarriveraw_done:
	VZEROUPPER
	MOVSD X15, ret+280(FP)
	RET

// The batched step kernels: one call steps every member of a ladder at the
// same record. θ and s are K×d row-major (member k at k·d), prm[k] holds
// member k's e, h, t, r, δ, a, b (stepParam, 64 bytes) and receives its dot
// product; c is shared. The coordinate loop is that of the kernels above;
// R13 walks prm, R14 counts the members down.

// func sagaAllAVX(theta, s, x, mu, inv []float64, prm []stepParam, c float64)
// One step of every member.
TEXT ·sagaAllAVX(SB), NOSPLIT, $0-152
	MOVQ theta_base+0(FP), AX
	MOVQ s_base+24(FP), DI
	MOVQ x_base+48(FP), BX
	MOVQ x_len+56(FP), CX
	MOVQ mu_base+72(FP), DX
	MOVQ inv_base+96(FP), SI
	MOVQ prm_base+120(FP), R13
	MOVQ prm_len+128(FP), R14
	VBROADCASTSD c+144(FP), Y10
	MOVQ CX, R9
	ANDQ $-4, R9
	TESTQ R14, R14
	JZ   sagaall_done

sagaall_member:
	VBROADCASTSD 0(R13), Y8
	VBROADCASTSD 8(R13), Y9
	VBROADCASTSD 16(R13), Y11
	VBROADCASTSD 24(R13), Y12
	VBROADCASTSD 32(R13), Y13
	VXORPD Y14, Y14, Y14
	VSUBPD Y11, Y14, Y14
	XORQ R8, R8
	CMPQ R8, R9
	JGE  sagaall_reduce

sagaall_loop4:
	VMOVUPD (BX)(R8*8), Y0
	VMOVUPD (DI)(R8*8), Y1
	VMOVAPD Y1, Y2
	VFMADD231PD Y0, Y8, Y2
	VFNMADD231PD (DX)(R8*8), Y9, Y2
	VMULPD (SI)(R8*8), Y2, Y2
	VMOVUPD (AX)(R8*8), Y4
	VFNMADD231PD Y2, Y10, Y4
	VMAXPD Y14, Y4, Y5
	VMINPD Y11, Y5, Y5
	VSUBPD Y5, Y4, Y5
	VMULPD Y12, Y5, Y5
	VMOVUPD Y5, (AX)(R8*8)
	VFMADD231PD Y0, Y13, Y1
	VMOVUPD Y1, (DI)(R8*8)
	ADDQ $4, R8
	CMPQ R8, R9
	JLT  sagaall_loop4

sagaall_reduce:
	CMPQ R8, CX
	JGE  sagaall_next

sagaall_tail:
	VMOVSD (BX)(R8*8), X0
	VMOVSD (DI)(R8*8), X1
	VMOVAPD X1, X2
	VFMADD231SD X0, X8, X2
	VFNMADD231SD (DX)(R8*8), X9, X2
	VMULSD (SI)(R8*8), X2, X2
	VMOVSD (AX)(R8*8), X4
	VFNMADD231SD X2, X10, X4
	VMAXSD X14, X4, X5
	VMINSD X11, X5, X5
	VSUBSD X5, X4, X5
	VMULSD X12, X5, X5
	VMOVSD X5, (AX)(R8*8)
	VFMADD231SD X0, X13, X1
	VMOVSD X1, (DI)(R8*8)
	INCQ R8
	CMPQ R8, CX
	JLT  sagaall_tail

sagaall_next:
	LEAQ (AX)(CX*8), AX
	LEAQ (DI)(CX*8), DI
	ADDQ $64, R13
	DECQ R14
	JNZ  sagaall_member

sagaall_done:
	VZEROUPPER
	RET

// func sagaAllDotAVX(theta, s, x, mu, inv, xn []float64, prm []stepParam, c float64)
// One step of every member, each returning its new θ against the standardized xn.
TEXT ·sagaAllDotAVX(SB), NOSPLIT, $0-176
	MOVQ theta_base+0(FP), AX
	MOVQ s_base+24(FP), DI
	MOVQ x_base+48(FP), BX
	MOVQ x_len+56(FP), CX
	MOVQ mu_base+72(FP), DX
	MOVQ inv_base+96(FP), SI
	MOVQ xn_base+120(FP), R10
	MOVQ prm_base+144(FP), R13
	MOVQ prm_len+152(FP), R14
	VBROADCASTSD c+168(FP), Y10
	MOVQ CX, R9
	ANDQ $-4, R9
	TESTQ R14, R14
	JZ   sagaalldot_done

sagaalldot_member:
	VBROADCASTSD 0(R13), Y8
	VBROADCASTSD 8(R13), Y9
	VBROADCASTSD 16(R13), Y11
	VBROADCASTSD 24(R13), Y12
	VBROADCASTSD 32(R13), Y13
	VXORPD Y14, Y14, Y14
	VSUBPD Y11, Y14, Y14
	VXORPD Y15, Y15, Y15
	VXORPD X7, X7, X7
	XORQ R8, R8
	CMPQ R8, R9
	JGE  sagaalldot_reduce

sagaalldot_loop4:
	VMOVUPD (BX)(R8*8), Y0
	VMOVUPD (DI)(R8*8), Y1
	VMOVAPD Y1, Y2
	VFMADD231PD Y0, Y8, Y2
	VFNMADD231PD (DX)(R8*8), Y9, Y2
	VMULPD (SI)(R8*8), Y2, Y2
	VMOVUPD (AX)(R8*8), Y4
	VFNMADD231PD Y2, Y10, Y4
	VMAXPD Y14, Y4, Y5
	VMINPD Y11, Y5, Y5
	VSUBPD Y5, Y4, Y5
	VMULPD Y12, Y5, Y5
	VMOVUPD Y5, (AX)(R8*8)
	VFMADD231PD (R10)(R8*8), Y5, Y15
	VFMADD231PD Y0, Y13, Y1
	VMOVUPD Y1, (DI)(R8*8)
	ADDQ $4, R8
	CMPQ R8, R9
	JLT  sagaalldot_loop4

sagaalldot_reduce:
	VEXTRACTF128 $1, Y15, X6
	VADDPD X6, X15, X15
	VPERMILPD $1, X15, X6
	VADDSD X6, X15, X15
	CMPQ R8, CX
	JGE  sagaalldot_next

sagaalldot_tail:
	VMOVSD (BX)(R8*8), X0
	VMOVSD (DI)(R8*8), X1
	VMOVAPD X1, X2
	VFMADD231SD X0, X8, X2
	VFNMADD231SD (DX)(R8*8), X9, X2
	VMULSD (SI)(R8*8), X2, X2
	VMOVSD (AX)(R8*8), X4
	VFNMADD231SD X2, X10, X4
	VMAXSD X14, X4, X5
	VMINSD X11, X5, X5
	VSUBSD X5, X4, X5
	VMULSD X12, X5, X5
	VMOVSD X5, (AX)(R8*8)
	VFMADD231SD (R10)(R8*8), X5, X7
	VFMADD231SD X0, X13, X1
	VMOVSD X1, (DI)(R8*8)
	INCQ R8
	CMPQ R8, CX
	JLT  sagaalldot_tail

sagaalldot_next:
	VADDSD X7, X15, X15
	MOVSD X15, 56(R13)
	LEAQ (AX)(CX*8), AX
	LEAQ (DI)(CX*8), DI
	ADDQ $64, R13
	DECQ R14
	JNZ  sagaalldot_member

sagaalldot_done:
	VZEROUPPER
	RET

// func sagaAllArrive0AVX(theta, s, x, mu, inv, xa, xo []float64, prm []stepParam, c float64)
// One step of every member with an arrival and an eviction folded in.
TEXT ·sagaAllArrive0AVX(SB), NOSPLIT, $0-200
	MOVQ theta_base+0(FP), AX
	MOVQ s_base+24(FP), DI
	MOVQ x_base+48(FP), BX
	MOVQ x_len+56(FP), CX
	MOVQ mu_base+72(FP), DX
	MOVQ inv_base+96(FP), SI
	MOVQ xa_base+120(FP), R11
	MOVQ xo_base+144(FP), R12
	MOVQ prm_base+168(FP), R13
	MOVQ prm_len+176(FP), R14
	VBROADCASTSD c+192(FP), Y10
	MOVQ CX, R9
	ANDQ $-4, R9
	TESTQ R14, R14
	JZ   sagaallarrive0_done

sagaallarrive0_member:
	VBROADCASTSD 0(R13), Y8
	VBROADCASTSD 8(R13), Y9
	VBROADCASTSD 16(R13), Y11
	VBROADCASTSD 24(R13), Y12
	VBROADCASTSD 32(R13), Y13
	VBROADCASTSD 40(R13), Y3
	VBROADCASTSD 48(R13), Y7
	VXORPD Y14, Y14, Y14
	VSUBPD Y11, Y14, Y14
	XORQ R8, R8
	CMPQ R8, R9
	JGE  sagaallarrive0_reduce

sagaallarrive0_loop4:
	VMOVUPD (BX)(R8*8), Y0
	VMOVUPD (DI)(R8*8), Y1
	VFMADD231PD (R11)(R8*8), Y3, Y1
	VFMADD231PD (R12)(R8*8), Y7, Y1
	VMOVAPD Y1, Y2
	VFMADD231PD Y0, Y8, Y2
	VFNMADD231PD (DX)(R8*8), Y9, Y2
	VMULPD (SI)(R8*8), Y2, Y2
	VMOVUPD (AX)(R8*8), Y4
	VFNMADD231PD Y2, Y10, Y4
	VMAXPD Y14, Y4, Y5
	VMINPD Y11, Y5, Y5
	VSUBPD Y5, Y4, Y5
	VMULPD Y12, Y5, Y5
	VMOVUPD Y5, (AX)(R8*8)
	VFMADD231PD Y0, Y13, Y1
	VMOVUPD Y1, (DI)(R8*8)
	ADDQ $4, R8
	CMPQ R8, R9
	JLT  sagaallarrive0_loop4

sagaallarrive0_reduce:
	CMPQ R8, CX
	JGE  sagaallarrive0_next

sagaallarrive0_tail:
	VMOVSD (BX)(R8*8), X0
	VMOVSD (DI)(R8*8), X1
	VFMADD231SD (R11)(R8*8), X3, X1
	VFMADD231SD (R12)(R8*8), X7, X1
	VMOVAPD X1, X2
	VFMADD231SD X0, X8, X2
	VFNMADD231SD (DX)(R8*8), X9, X2
	VMULSD (SI)(R8*8), X2, X2
	VMOVSD (AX)(R8*8), X4
	VFNMADD231SD X2, X10, X4
	VMAXSD X14, X4, X5
	VMINSD X11, X5, X5
	VSUBSD X5, X4, X5
	VMULSD X12, X5, X5
	VMOVSD X5, (AX)(R8*8)
	VFMADD231SD X0, X13, X1
	VMOVSD X1, (DI)(R8*8)
	INCQ R8
	CMPQ R8, CX
	JLT  sagaallarrive0_tail

sagaallarrive0_next:
	LEAQ (AX)(CX*8), AX
	LEAQ (DI)(CX*8), DI
	ADDQ $64, R13
	DECQ R14
	JNZ  sagaallarrive0_member

sagaallarrive0_done:
	VZEROUPPER
	RET

// func sagaAllArriveAVX(theta, s, x, mu, inv, xa, xo, xn []float64, prm []stepParam, c float64)
// One step of every member with an arrival and an eviction, each returning
// its new θ against the standardized xn.
TEXT ·sagaAllArriveAVX(SB), NOSPLIT, $0-224
	MOVQ theta_base+0(FP), AX
	MOVQ s_base+24(FP), DI
	MOVQ x_base+48(FP), BX
	MOVQ x_len+56(FP), CX
	MOVQ mu_base+72(FP), DX
	MOVQ inv_base+96(FP), SI
	MOVQ xa_base+120(FP), R11
	MOVQ xo_base+144(FP), R12
	MOVQ xn_base+168(FP), R10
	MOVQ prm_base+192(FP), R13
	MOVQ prm_len+200(FP), R14
	VBROADCASTSD c+216(FP), Y10
	MOVQ CX, R9
	ANDQ $-4, R9
	TESTQ R14, R14
	JZ   sagaallarrive_done

sagaallarrive_member:
	VBROADCASTSD 0(R13), Y8
	VBROADCASTSD 8(R13), Y9
	VBROADCASTSD 16(R13), Y11
	VBROADCASTSD 24(R13), Y12
	VBROADCASTSD 32(R13), Y13
	VBROADCASTSD 40(R13), Y3
	VBROADCASTSD 48(R13), Y7
	VXORPD Y14, Y14, Y14
	VSUBPD Y11, Y14, Y14
	VXORPD Y15, Y15, Y15
	XORQ R8, R8
	CMPQ R8, R9
	JGE  sagaallarrive_reduce

sagaallarrive_loop4:
	VMOVUPD (BX)(R8*8), Y0
	VMOVUPD (DI)(R8*8), Y1
	VFMADD231PD (R11)(R8*8), Y3, Y1
	VFMADD231PD (R12)(R8*8), Y7, Y1
	VMOVAPD Y1, Y2
	VFMADD231PD Y0, Y8, Y2
	VFNMADD231PD (DX)(R8*8), Y9, Y2
	VMULPD (SI)(R8*8), Y2, Y2
	VMOVUPD (AX)(R8*8), Y4
	VFNMADD231PD Y2, Y10, Y4
	VMAXPD Y14, Y4, Y5
	VMINPD Y11, Y5, Y5
	VSUBPD Y5, Y4, Y5
	VMULPD Y12, Y5, Y5
	VMOVUPD Y5, (AX)(R8*8)
	VFMADD231PD (R10)(R8*8), Y5, Y15
	VFMADD231PD Y0, Y13, Y1
	VMOVUPD Y1, (DI)(R8*8)
	ADDQ $4, R8
	CMPQ R8, R9
	JLT  sagaallarrive_loop4

sagaallarrive_reduce:
	VEXTRACTF128 $1, Y15, X6
	VADDPD X6, X15, X15
	VPERMILPD $1, X15, X6
	VADDSD X6, X15, X15
	CMPQ R8, CX
	JGE  sagaallarrive_next

sagaallarrive_tail:
	VMOVSD (BX)(R8*8), X0
	VMOVSD (DI)(R8*8), X1
	VFMADD231SD (R11)(R8*8), X3, X1
	VFMADD231SD (R12)(R8*8), X7, X1
	VMOVAPD X1, X2
	VFMADD231SD X0, X8, X2
	VFNMADD231SD (DX)(R8*8), X9, X2
	VMULSD (SI)(R8*8), X2, X2
	VMOVSD (AX)(R8*8), X4
	VFNMADD231SD X2, X10, X4
	VMAXSD X14, X4, X5
	VMINSD X11, X5, X5
	VSUBSD X5, X4, X5
	VMULSD X12, X5, X5
	VMOVSD X5, (AX)(R8*8)
	VFMADD231SD (R10)(R8*8), X5, X15
	VFMADD231SD X0, X13, X1
	VMOVSD X1, (DI)(R8*8)
	INCQ R8
	CMPQ R8, CX
	JLT  sagaallarrive_tail

sagaallarrive_next:
	MOVSD X15, 56(R13)
	LEAQ (AX)(CX*8), AX
	LEAQ (DI)(CX*8), DI
	ADDQ $64, R13
	DECQ R14
	JNZ  sagaallarrive_member

sagaallarrive_done:
	VZEROUPPER
	RET
