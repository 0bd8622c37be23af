package main

import (
	"github.com/mmcloughlin/avo/operand"
	"github.com/mmcloughlin/avo/reg"
)

// sagaKind is one variant of the proximal SAGA step kernel (kernel.go:
// sagaGo and its variants). Per coordinate:
//
//	q = e·x + s − h·μ; z = θ − c·v·q; θ = soft(z, t)·r; s += δ·x
//
// with soft(z, t) = z − clamp(z, −t, t) (for finite z and t ≥ 0 it equals
// max(z−t, 0) + min(z+t, 0), up to the sign of a zero). The eight kernels
// are this one description with four switches.
type sagaKind struct {
	name string
	doc  []string
	// all steps every member of a ladder in one call: θ and s are K×d row
	// major (member k at k·d), prm[k] holds member k's scalars (stepParam,
	// offsets from go_asm.h) and receives its dot product; c is shared.
	all bool
	// arrive first folds s += a·xa + b·xo (a record admitted, one evicted);
	// a single-member kernel then also copies xa to dst (which may be xo:
	// each xo_j is read before dst_j is written).
	arrive bool
	// dot returns Σ θ_new,j·xn_j: with xn standardized (dotStd) or raw and
	// standardized on the fly (dotRaw).
	dot dotKind
}

type dotKind int

const (
	noDot dotKind = iota
	dotStd
	dotRaw
)

var sagaKernels = []sagaKind{
	{name: "sagaAVX", doc: []string{"One step."}},
	{name: "sagaDotRawAVX", dot: dotRaw,
		doc: []string{"One step; returns the new θ against the raw xn, standardized on the fly."}},
	{name: "sagaArrive0AVX", arrive: true,
		doc: []string{"One step with an arrival and an eviction folded in; copies xa to dst."}},
	{name: "sagaArriveRawAVX", arrive: true, dot: dotRaw,
		doc: []string{"One step with an arrival and an eviction, returning the new θ against the", "raw xn; copies xa to dst."}},
	{name: "sagaAllAVX", all: true, doc: []string{"One step of every member."}},
	{name: "sagaAllDotAVX", all: true, dot: dotStd,
		doc: []string{"One step of every member, each returning its new θ against the standardized xn."}},
	{name: "sagaAllArrive0AVX", all: true, arrive: true,
		doc: []string{"One step of every member with an arrival and an eviction folded in."}},
	{name: "sagaAllArriveAVX", all: true, arrive: true, dot: dotStd,
		doc: []string{"One step of every member with an arrival and an eviction, each returning", "its new θ against the standardized xn."}},
}

// Registers of the SAGA kernels: AX θ, DI s, BX x, DX μ, SI v, R11 xa,
// R12 xo, R10 xn, R13 dst (single member) or the current stepParam
// (batched), R14 the members left; Y8 e, Y9 h, Y10 c, Y11 t, Y14 −t, Y12 r,
// Y13 δ, Y3 a, Y7 b, Y15 the dot product.
const (
	rE, rH, rC, rT, rR, rDelta, rNegT, rA, rB, rDot = 8, 9, 10, 11, 12, 13, 14, 3, 7, 15
)

func (g gen) saga(k sagaKind) {
	g.begin(k.name, k.doc...)
	g.bases([]string{"theta", "s", "x", "mu", "inv"}, reg.RAX, reg.RDI, reg.RBX, reg.RDX, reg.RSI)
	if k.all {
		g.length("x")
	} else {
		g.length("theta")
	}
	if k.arrive {
		g.bases([]string{"xa", "xo"}, reg.R11, reg.R12)
	}
	if k.dot != noDot {
		g.bases([]string{"xn"}, reg.R10)
	}
	// Without an arrival the scalar tail of the dot product sums apart in
	// X7 and is added last; with one, Y7 holds b and the tail sums on in
	// X15 (both orders are kept as they were first written, so results
	// stay the same to the bit).
	tailAcc := rDot
	if !k.arrive {
		tailAcc = 7
	}
	if !k.all {
		if k.arrive {
			g.bases([]string{"dst"}, reg.R13)
		}
		g.broadcast([]string{"e", "h", "c", "t", "r", "delta"}, rE, rH, rC, rT, rR, rDelta)
		if k.arrive {
			g.broadcast([]string{"a", "b"}, rA, rB)
		}
		g.sagaInit(k, tailAcc)
		g.loop(func(w lanes) { g.sagaBody(w, k, tailAcc) }, g.sagaReduce(k))
		if tailAcc != rDot && k.dot != noDot {
			g.VADDSD(xmm[tailAcc], xmm[rDot], xmm[rDot])
		}
		g.VZEROUPPER()
		if k.dot != noDot {
			g.Store(xmm[rDot], g.ReturnIndex(0))
		}
		g.RET()
		return
	}
	g.Load(g.Param("prm").Base(), reg.R13)
	g.Load(g.Param("prm").Len(), reg.R14)
	g.broadcast([]string{"c"}, rC)
	g.TESTQ(reg.R14, reg.R14)
	g.JZ(operand.LabelRef("done"))
	g.Label("member")
	fields := []struct {
		name string
		reg  int
	}{{"e", rE}, {"h", rH}, {"t", rT}, {"r", rR}, {"delta", rDelta}, {"a", rA}, {"b", rB}}
	for _, f := range fields {
		if k.arrive || f.reg != rA && f.reg != rB {
			g.VBROADCASTSD(field(reg.R13, f.name), ymm[f.reg])
		}
	}
	g.sagaInit(k, tailAcc)
	g.loop(func(w lanes) { g.sagaBody(w, k, tailAcc) }, g.sagaReduce(k))
	if k.dot != noDot {
		if tailAcc != rDot {
			g.VADDSD(xmm[tailAcc], xmm[rDot], xmm[rDot])
		}
		g.MOVSD(xmm[rDot], field(reg.R13, "dot"))
	}
	g.LEAQ(operand.Mem{Base: reg.RAX, Index: reg.RCX, Scale: 8}, reg.RAX)
	g.LEAQ(operand.Mem{Base: reg.RDI, Index: reg.RCX, Scale: 8}, reg.RDI)
	g.LEAQ(field(reg.R13, "_size"), reg.R13)
	g.DECQ(reg.R14)
	g.JNZ(operand.LabelRef("member"))
	g.Label("done")
	g.done()
}

// sagaInit sets −t and clears the dot product's accumulators.
func (g gen) sagaInit(k sagaKind, tailAcc int) {
	g.zero(rNegT)
	g.VSUBPD(ymm[rT], ymm[rNegT], ymm[rNegT])
	if k.dot != noDot {
		g.zero(rDot)
		if tailAcc != rDot {
			g.zero(tailAcc)
		}
	}
}

// sagaReduce returns the horizontal sum of the dot product, or nil.
func (g gen) sagaReduce(k sagaKind) func() {
	if k.dot == noDot {
		return nil
	}
	return func() { g.hsum(rDot, 6) }
}

// sagaBody is one coordinate (or four) of the step.
func (g gen) sagaBody(w lanes, k sagaKind, tailAcc int) {
	x, s, q, z, p := 0, 1, 2, 4, 5
	g.load(w, at(reg.RBX, 0), x)
	g.load(w, at(reg.RDI, 0), s)
	switch {
	case k.arrive && !k.all: // s += a·xa + b·xo, and dst = xa
		g.load(w, at(reg.R11, 0), 6)
		g.fma(w, 6, rA, s)
		g.fma(w, at(reg.R12, 0), rB, s)
		g.store(w, 6, at(reg.R13, 0))
	case k.arrive:
		g.fma(w, at(reg.R11, 0), rA, s)
		g.fma(w, at(reg.R12, 0), rB, s)
	}
	// q = (s + e·x − h·μ)·v
	g.mov(w, s, q)
	g.fma(w, x, rE, q)
	g.fnma(w, at(reg.RDX, 0), rH, q)
	g.mul(w, at(reg.RSI, 0), q, q)
	// z = θ − c·q; θ = (z − clamp(z, −t, t))·r
	g.load(w, at(reg.RAX, 0), z)
	g.fnma(w, q, rC, z)
	g.clamp(w, z, rNegT, rT, p)
	g.sub(w, p, z, p)
	g.mul(w, rR, p, p)
	g.store(w, p, at(reg.RAX, 0))
	acc := rDot
	if w == scalar {
		acc = tailAcc
	}
	switch k.dot {
	case dotRaw:
		g.standardize(w, reg.R10, 0, 6)
		g.fma(w, 6, p, acc)
	case dotStd:
		g.fma(w, at(reg.R10, 0), p, acc)
	}
	// s += δ·x
	g.fma(w, x, rDelta, s)
	g.store(w, s, at(reg.RDI, 0))
}
