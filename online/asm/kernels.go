package main

import (
	"github.com/mmcloughlin/avo/attr"
	"github.com/mmcloughlin/avo/operand"
	"github.com/mmcloughlin/avo/reg"
)

// kernels describes every function of kernel_amd64.s. Each processes 4
// float64 per iteration in YMM registers and then a scalar tail that runs
// the same description on one lane, so every element sees the same
// operations in the same order (FMA included) whatever its position. The
// Go declarations, with their documentation, are in kernel_amd64.go and
// kernel_saga_amd64.go; the portable versions are in kernel.go.
func kernels(g gen) {
	g.cpuid()
	g.xgetbv()
	g.stdDot()
	g.stdSq()
	g.axpy()
	g.welford()
	g.stdRow()
	g.dot()
	g.axpy2()
	g.impute()
	g.welford2()
	g.stdPrep()
	g.stdPrep1()
	g.dot2All()
	g.sumRows()
	for _, k := range sagaKernels {
		g.saga(k)
	}
}

// begin starts the kernel name, whose signature is its Go declaration.
func (g gen) begin(name string, doc ...string) {
	g.Implement(name)
	g.Attributes(attr.NOSPLIT)
	g.Comment(doc...)
}

// length loads len(name) into CX, the element count of the loops.
func (g gen) length(name string) { g.Load(g.Param(name).Len(), reg.RCX) }

func (g gen) cpuid() {
	g.begin("cpuid", "CPUID leaf eaxArg, subleaf ecxArg.")
	g.Load(g.Param("eaxArg"), reg.EAX)
	g.Load(g.Param("ecxArg"), reg.ECX)
	g.CPUID()
	g.Store(reg.EAX, g.Return("eax"))
	g.Store(reg.EBX, g.Return("ebx"))
	g.Store(reg.ECX, g.Return("ecx"))
	g.Store(reg.EDX, g.Return("edx"))
	g.RET()
}

func (g gen) xgetbv() {
	g.begin("xgetbv", "XCR0, the register state the OS saves.")
	g.XORL(reg.ECX, reg.ECX)
	g.XGETBV()
	g.Store(reg.EAX, g.Return("eax"))
	g.Store(reg.EDX, g.Return("edx"))
	g.RET()
}

// standardize leaves (x_j − μ_j)·v_j in register dst, with x at xb, μ at
// DX and v at SI.
func (g gen) standardize(w lanes, xb reg.Register, off, dst int) {
	g.load(w, at(xb, off), dst)
	g.sub(w, at(reg.RDX, off), dst, dst)
	g.mul(w, at(reg.RSI, off), dst, dst)
}

func (g gen) stdDot() {
	g.begin("stdDotAVX", "Σ θ_j (x_j − μ_j) v_j, in two accumulators.")
	g.bases([]string{"theta", "x", "mu", "inv"}, reg.RAX, reg.RBX, reg.RDX, reg.RSI)
	g.length("theta")
	g.zero(0, 1)
	g.loop8(func(w lanes, off, h int) {
		g.standardize(w, reg.RBX, off, 2+h)
		g.fma(w, at(reg.RAX, off), 2+h, h)
	}, func() {
		g.VADDPD(reg.Y1, reg.Y0, reg.Y0)
		g.hsum(0, 1)
	})
	g.VZEROUPPER()
	g.Store(reg.X0, g.ReturnIndex(0))
	g.RET()
}

func (g gen) stdSq() {
	g.begin("stdSqAVX", "Σ ((x_j − μ_j) v_j)², in one accumulator.")
	g.bases([]string{"x", "mu", "inv"}, reg.RBX, reg.RDX, reg.RSI)
	g.length("x")
	g.zero(0)
	g.loop(func(w lanes) {
		g.standardize(w, reg.RBX, 0, 2)
		g.fma(w, 2, 2, 0)
	}, func() { g.hsum(0, 1) })
	g.VZEROUPPER()
	g.Store(reg.X0, g.ReturnIndex(0))
	g.RET()
}

func (g gen) axpy() {
	g.begin("axpyAVX", "y_j += a x_j")
	g.broadcast([]string{"a"}, 8)
	g.bases([]string{"x", "y"}, reg.RBX, reg.RDI)
	g.length("x")
	g.loop(func(w lanes) {
		g.load(w, at(reg.RDI, 0), 1)
		g.fma(w, at(reg.RBX, 0), 8, 1)
		g.store(w, 1, at(reg.RDI, 0))
	}, nil)
	g.done()
}

// welfordStep is one Welford update of element R8 of μ (AX), m2 (DX) and
// sxy (SI) with the value in register x and the scalars f, w, wy in
// registers f, f+1, f+2: δ = x − μ; μ += f δ; m2 += w δ (x − μ); sxy += wy x.
// It leaves μ, m2 and sxy in registers 1, 4 and 5 for the caller to store;
// with loaded they are already there (a second update of the same element).
func (g gen) welfordStep(w lanes, x, f int, loaded bool) {
	if !loaded {
		g.load(w, at(reg.RAX, 0), 1)
	}
	g.sub(w, 1, x, 2)
	g.fma(w, 2, f, 1)
	g.sub(w, 1, x, 3)
	g.mul(w, 2, 3, 3)
	if !loaded {
		g.load(w, at(reg.RDX, 0), 4)
	}
	g.fma(w, 3, f+1, 4)
	if !loaded {
		g.load(w, at(reg.RSI, 0), 5)
	}
	g.fma(w, x, f+2, 5)
}

func (g gen) welford() {
	g.begin("welfordAVX", "δ = x − μ; μ += f δ; m2 += w δ (x − μ); sxy += wy x")
	g.bases([]string{"mu", "m2", "sxy", "x"}, reg.RAX, reg.RDX, reg.RSI, reg.RBX)
	g.length("mu")
	g.broadcast([]string{"f", "w", "wy"}, 8, 9, 10)
	g.loop(func(w lanes) {
		g.load(w, at(reg.RBX, 0), 0)
		g.welfordStep(w, 0, 8, false)
		g.store(w, 1, at(reg.RAX, 0))
		g.store(w, 4, at(reg.RDX, 0))
		g.store(w, 5, at(reg.RSI, 0))
	}, nil)
	g.done()
}

func (g gen) welford2() {
	g.begin("welford2AVX",
		"welfordAVX removing xo (fo, wo, wyo), then welfordAVX adding xn (fn, wn,",
		"wyn), fused per element: the same operations in the same order.")
	g.bases([]string{"mu", "m2", "sxy", "xo", "xn"}, reg.RAX, reg.RDX, reg.RSI, reg.RBX, reg.RDI)
	g.length("mu")
	g.broadcast([]string{"fo", "wo", "wyo", "fn", "wn", "wyn"}, 8, 9, 10, 11, 12, 13)
	g.loop(func(w lanes) {
		g.load(w, at(reg.RBX, 0), 0)
		g.welfordStep(w, 0, 8, false)
		g.load(w, at(reg.RDI, 0), 0)
		g.welfordStep(w, 0, 11, true)
		g.store(w, 1, at(reg.RAX, 0))
		g.store(w, 4, at(reg.RDX, 0))
		g.store(w, 5, at(reg.RSI, 0))
	}, nil)
	g.done()
}

func (g gen) stdRow() {
	g.begin("stdRowAVX", "dst_j = (x_j − μ_j) v_j")
	g.bases([]string{"dst", "x", "mu", "inv"}, reg.RDI, reg.RBX, reg.RDX, reg.RSI)
	g.length("dst")
	g.loop(func(w lanes) {
		g.standardize(w, reg.RBX, 0, 0)
		g.store(w, 0, at(reg.RDI, 0))
	}, nil)
	g.done()
}

func (g gen) dot() {
	g.begin("dotAVX", "Σ a_j b_j, in two accumulators.")
	g.bases([]string{"a", "b"}, reg.RAX, reg.RBX)
	g.length("a")
	g.zero(0, 1)
	g.loop8(func(w lanes, off, h int) {
		g.load(w, at(reg.RAX, off), 2+h)
		g.fma(w, at(reg.RBX, off), 2+h, h)
	}, func() {
		g.VADDPD(reg.Y1, reg.Y0, reg.Y0)
		g.hsum(0, 1)
	})
	g.VZEROUPPER()
	g.Store(reg.X0, g.ReturnIndex(0))
	g.RET()
}

func (g gen) axpy2() {
	g.begin("axpy2AVX", "s_j += a x_j + b y_j (two roundings: a x_j first)")
	g.broadcast([]string{"a", "b"}, 8, 9)
	g.bases([]string{"x", "y", "s"}, reg.RBX, reg.RDX, reg.RDI)
	g.length("x")
	g.loop(func(w lanes) {
		g.load(w, at(reg.RDI, 0), 1)
		g.fma(w, at(reg.RBX, 0), 8, 1)
		g.fma(w, at(reg.RDX, 0), 9, 1)
		g.store(w, 1, at(reg.RDI, 0))
	}, nil)
	g.done()
}

func (g gen) impute() {
	g.begin("imputeAVX",
		"Over the first len(dst)&^3 elements: dst = x with NaN replaced by mean;",
		"ok is false if some non-NaN |x_j| > limit (the caller rescans for the",
		"error). The tail is left to the caller. Y7 masks off the sign bit, Y5",
		"collects the lanes over the limit.")
	g.bases([]string{"dst", "x", "mean"}, reg.RDI, reg.RBX, reg.RDX)
	g.length("dst")
	g.broadcast([]string{"limit"}, 6)
	g.VPCMPEQQ(reg.Y7, reg.Y7, reg.Y7)
	g.VPSRLQ(operand.U8(1), reg.Y7, reg.Y7)
	g.zero(5)
	g.XORQ(reg.R8, reg.R8)
	g.ANDQ(operand.I32(-4), reg.RCX)
	g.JZ(operand.LabelRef("end"))
	g.Label("loop4")
	g.VMOVUPD(at(reg.RBX, 0), reg.Y0)
	g.VCMPPD(operand.U8(3), reg.Y0, reg.Y0, reg.Y1) // unordered: NaN
	g.VANDNPD(reg.Y0, reg.Y1, reg.Y2)
	g.VANDPD(at(reg.RDX, 0), reg.Y1, reg.Y3)
	g.VORPD(reg.Y3, reg.Y2, reg.Y2)
	g.VMOVUPD(reg.Y2, at(reg.RDI, 0))
	g.VANDPD(reg.Y7, reg.Y0, reg.Y3)
	g.VCMPPD(operand.U8(0x1e), reg.Y6, reg.Y3, reg.Y4) // greater than, ordered
	g.VORPD(reg.Y4, reg.Y5, reg.Y5)
	g.ADDQ(operand.U8(4), reg.R8)
	g.CMPQ(reg.R8, reg.RCX)
	g.JLT(operand.LabelRef("loop4"))
	g.Label("end")
	g.VMOVMSKPD(reg.Y5, reg.EAX)
	g.TESTL(reg.EAX, reg.EAX)
	b, err := g.Return("ok").Resolve()
	if err != nil {
		panic(err)
	}
	g.SETEQ(b.Addr)
	g.done()
}

// stdPrepBody standardizes element R8 of x (BX) on the working scale μ
// (DX), v (SI) into register 3 and on the reference scale ρ (R12), u (R13)
// into register 4 (summing their squares into 0 and 1), and row (R11) on
// the working scale into register 5.
func (g gen) stdPrepBody(w lanes, store bool) {
	g.load(w, at(reg.RBX, 0), 2)
	g.load(w, at(reg.RDX, 0), 6)
	g.load(w, at(reg.RSI, 0), 7)
	if !store {
		g.load(w, at(reg.RAX, 0), 10)
	}
	g.sub(w, 6, 2, 3)
	g.mul(w, 7, 3, 3)
	if store {
		g.store(w, 3, at(reg.RDI, 0))
	}
	g.fma(w, 3, 3, 0)
	if !store {
		g.fma(w, 3, 10, 8)
	}
	g.sub(w, at(reg.R12, 0), 2, 4)
	g.mul(w, at(reg.R13, 0), 4, 4)
	g.fma(w, 4, 4, 1)
	g.load(w, at(reg.R11, 0), 5)
	g.sub(w, 6, 5, 5)
	g.mul(w, 7, 5, 5)
	if store {
		g.store(w, 5, at(reg.R10, 0))
	} else {
		g.fma(w, 5, 10, 9)
	}
}

func (g gen) stdPrep() {
	g.begin("stdPrepAVX",
		"xa = (x − μ) v; xt = (row − μ) v; sqRef = Σ ((x − refMu) refInv)²;",
		"sqWork = Σ xa². The sums reduce like stdSqAVX (one accumulator, lanes",
		"0+2 and 1+3, then the scalar tail), so they equal its results.")
	g.bases([]string{"xa", "xt", "x", "row", "mu", "inv", "refMu", "refInv"},
		reg.RDI, reg.R10, reg.RBX, reg.R11, reg.RDX, reg.RSI, reg.R12, reg.R13)
	g.length("xa")
	g.zero(0, 1)
	g.loop(func(w lanes) { g.stdPrepBody(w, true) }, func() {
		g.hsum(0, 2)
		g.hsum(1, 3)
	})
	g.VZEROUPPER()
	g.Store(reg.X1, g.Return("sqRef"))
	g.Store(reg.X0, g.Return("sqWork"))
	g.RET()
}

func (g gen) stdPrep1() {
	g.begin("stdPrep1AVX", "stdPrepAVX without the stores, returning θ against xa and xt instead.")
	g.bases([]string{"theta", "x", "row", "mu", "inv", "refMu", "refInv"},
		reg.RAX, reg.RBX, reg.R11, reg.RDX, reg.RSI, reg.R12, reg.R13)
	g.length("theta")
	g.zero(0, 1, 8, 9)
	g.loop(func(w lanes) { g.stdPrepBody(w, false) }, func() {
		g.hsum(0, 2)
		g.hsum(1, 3)
		g.hsum(8, 2)
		g.hsum(9, 3)
	})
	g.VZEROUPPER()
	g.Store(reg.X1, g.Return("sqRef"))
	g.Store(reg.X0, g.Return("sqWork"))
	g.Store(reg.X8, g.Return("da"))
	g.Store(reg.X9, g.Return("dt"))
	g.RET()
}

func (g gen) dot2All() {
	g.begin("dot2AllAVX",
		"For k < len(out)/2: out[2k] = θ_k·x, out[2k+1] = θ_k·y, θ_k = theta[k·d:],",
		"d = len(x); two accumulators per dot product. R14 counts the members down.")
	g.bases([]string{"theta", "x", "y", "out"}, reg.RAX, reg.RBX, reg.RDX, reg.RDI)
	g.length("x")
	g.Load(g.Param("out").Len(), reg.R14)
	g.SHRQ(operand.U8(1), reg.R14)
	g.TESTQ(reg.R14, reg.R14)
	g.JZ(operand.LabelRef("done"))
	g.Label("member")
	g.zero(0, 1, 4, 5)
	accX, accY := [2]int{0, 4}, [2]int{1, 5}
	g.loop8(func(w lanes, off, h int) {
		g.load(w, at(reg.RAX, off), 2+h)
		g.fma(w, at(reg.RBX, off), 2+h, accX[h])
		g.fma(w, at(reg.RDX, off), 2+h, accY[h])
	}, func() {
		g.VADDPD(reg.Y4, reg.Y0, reg.Y0)
		g.VADDPD(reg.Y5, reg.Y1, reg.Y1)
		g.hsum(0, 2)
		g.hsum(1, 3)
	})
	g.MOVSD(reg.X0, operand.Mem{Base: reg.RDI})
	g.MOVSD(reg.X1, operand.Mem{Base: reg.RDI, Disp: 8})
	g.LEAQ(operand.Mem{Base: reg.RAX, Index: reg.RCX, Scale: 8}, reg.RAX)
	g.ADDQ(operand.U8(16), reg.RDI)
	g.DECQ(reg.R14)
	g.JNZ(operand.LabelRef("member"))
	g.Label("done")
	g.done()
}

func (g gen) sumRows() {
	g.begin("sumRowsAVX",
		"For m < k: s[m·d:] += Σ_r g[r·k+m]·x[r·d:], rows r < rows in order,",
		"rows with g = 0 skipped; per element the FMAs of axpyAVX row by row. The",
		"columns go in blocks of 16 (four accumulators), then 4, then 1, each",
		"block summing over all rows. AX s_m, BX x, DX g column m, R10 rows,",
		"R11 d·8 (row stride of x), R12 k·8 (row stride of g), R13 members left,",
		"R14 rows left, X5 zero.")
	g.bases([]string{"s", "x", "g"}, reg.RAX, reg.RBX, reg.RDX)
	g.Load(g.Param("d"), reg.RCX)
	g.Load(g.Param("k"), reg.R13)
	g.Load(g.Param("rows"), reg.R10)
	g.MOVQ(reg.RCX, reg.R11)
	g.SHLQ(operand.U8(3), reg.R11)
	g.MOVQ(reg.R13, reg.R12)
	g.SHLQ(operand.U8(3), reg.R12)
	g.VXORPD(reg.X5, reg.X5, reg.X5)
	g.TESTQ(reg.R10, reg.R10)
	g.JZ(operand.LabelRef("done"))
	g.TESTQ(reg.R13, reg.R13)
	g.JZ(operand.LabelRef("done"))
	g.Label("member")
	g.XORQ(reg.R8, reg.R8)
	g.columns(16, "block4")
	g.columns(4, "col")
	g.columns(1, "next")
	g.Label("next")
	g.ADDQ(reg.R11, reg.RAX)
	g.ADDQ(operand.U8(8), reg.RDX)
	g.DECQ(reg.R13)
	g.JNZ(operand.LabelRef("member"))
	g.Label("done")
	g.done()
}

// columns emits sumRowsAVX's loop over blocks of n columns (16, 4 or 1),
// leaving for label next when fewer than n remain.
func (g gen) columns(n int, next string) {
	name := map[int]string{16: "block16", 4: "block4", 1: "col"}[n]
	suffix := map[int]string{16: "16", 4: "4", 1: "1"}[n]
	w, regs := vec, n/4
	if n == 1 {
		w, regs = scalar, 1
	}
	g.Label(name)
	g.LEAQ(operand.Mem{Base: reg.R8, Disp: n}, reg.R9)
	g.CMPQ(reg.R9, reg.RCX)
	g.JGT(operand.LabelRef(next))
	for i := range regs {
		g.load(w, at(reg.RAX, 32*i), i)
	}
	g.LEAQ(at(reg.RBX, 0), reg.RSI)
	g.MOVQ(reg.RDX, reg.RDI)
	g.MOVQ(reg.R10, reg.R14)
	g.Label("row" + suffix)
	g.VMOVSD(operand.Mem{Base: reg.RDI}, reg.X4)
	g.VUCOMISD(reg.X5, reg.X4)
	g.JNE(operand.LabelRef("do" + suffix))
	g.JPC(operand.LabelRef("skip" + suffix)) // equal and ordered: g is 0
	g.Label("do" + suffix)
	if w == vec {
		g.VBROADCASTSD(reg.X4, reg.Y4)
	}
	for i := range regs {
		g.fma(w, operand.Mem{Base: reg.RSI, Disp: 32 * i}, 4, i)
	}
	g.Label("skip" + suffix)
	g.ADDQ(reg.R11, reg.RSI)
	g.ADDQ(reg.R12, reg.RDI)
	g.DECQ(reg.R14)
	g.JNZ(operand.LabelRef("row" + suffix))
	for i := range regs {
		g.store(w, i, at(reg.RAX, 32*i))
	}
	g.MOVQ(reg.R9, reg.R8)
	g.JMP(operand.LabelRef(name))
}
