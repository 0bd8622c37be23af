package main

import (
	"bytes"
	"fmt"
	"os"

	"github.com/mmcloughlin/avo/build"
	"github.com/mmcloughlin/avo/operand"
	"github.com/mmcloughlin/avo/pass"
	"github.com/mmcloughlin/avo/printer"
	"github.com/mmcloughlin/avo/reg"
)

// generate returns the assembly file for the package at path pkg.
func generate(pkg string) ([]byte, error) {
	// The declarations to implement are in the package's amd64 files, which
	// the go command lists only for that architecture, whatever the host.
	if err := os.Setenv("GOARCH", "amd64"); err != nil {
		return nil, err
	}
	g := gen{build.NewContext()}
	g.Package(pkg)
	g.ConstraintExpr("!purego")
	kernels(g)
	f, err := g.Result()
	if err != nil {
		return nil, err
	}
	// textflag.h for NOSPLIT, go_asm.h for the offsets of stepParam.
	f.Includes = []string{"textflag.h", "go_asm.h"}
	var buf bytes.Buffer
	cfg := printer.Config{Name: "go run ./asm", Pkg: "online"}
	out := &pass.Output{Writer: nopCloser{&buf}, Printer: printer.NewGoAsm(cfg)}
	if err := pass.Concat(pass.Compile, out).Execute(f); err != nil {
		return nil, err
	}
	return buf.Bytes(), nil
}

type nopCloser struct{ *bytes.Buffer }

func (nopCloser) Close() error { return nil }

// gen is the avo build context with the helpers the kernels share. The
// kernels use fixed registers, named in each description; R8 is always the
// element index and CX the element count.
type gen struct{ *build.Context }

// lanes is the width of one pass of a loop body: 4 float64 in a YMM
// register, or 1 in the low lane of an XMM register (the scalar tail).
type lanes int

const (
	vec    lanes = 4
	scalar lanes = 1
)

var (
	ymm = [16]reg.VecPhysical{reg.Y0, reg.Y1, reg.Y2, reg.Y3, reg.Y4, reg.Y5, reg.Y6, reg.Y7,
		reg.Y8, reg.Y9, reg.Y10, reg.Y11, reg.Y12, reg.Y13, reg.Y14, reg.Y15}
	xmm = [16]reg.VecPhysical{reg.X0, reg.X1, reg.X2, reg.X3, reg.X4, reg.X5, reg.X6, reg.X7,
		reg.X8, reg.X9, reg.X10, reg.X11, reg.X12, reg.X13, reg.X14, reg.X15}
)

// r returns vector register n at this width.
func (w lanes) r(n int) reg.VecPhysical {
	if w == vec {
		return ymm[n]
	}
	return xmm[n]
}

// op returns a register number as the register at this width and a memory
// operand as itself.
func (w lanes) op(v any) operand.Op {
	switch v := v.(type) {
	case int:
		return w.r(v)
	case operand.Mem:
		return v
	}
	panic(fmt.Sprintf("asm: operand %T", v))
}

// at is element R8 of the array at base, plus off bytes.
func at(base reg.Register, off int) operand.Mem {
	return operand.Mem{Base: base, Index: reg.R8, Scale: 8, Disp: off}
}

// field is the stepParam field name at the address in base, its offset
// taken from go_asm.h (stepParam_e and so on).
func field(base reg.Register, name string) operand.Mem {
	return operand.Mem{Symbol: operand.Symbol{Name: "stepParam_" + name}, Base: base}
}

// arg is the address of the argument or result name in the frame.
func (g gen) arg(name string) operand.Mem {
	c := g.Param(name)
	if b, err := c.Resolve(); err == nil {
		return b.Addr
	}
	b, err := g.Return(name).Resolve()
	if err != nil {
		panic(fmt.Sprintf("asm: argument %s: %v", name, err))
	}
	return b.Addr
}

// bases loads the base pointers of the named slice arguments into regs.
func (g gen) bases(names []string, regs ...reg.Register) {
	for i, n := range names {
		g.Load(g.Param(n).Base(), regs[i])
	}
}

// broadcast loads each named float64 argument into all lanes of ymm[regs[i]].
func (g gen) broadcast(names []string, regs ...int) {
	for i, n := range names {
		g.VBROADCASTSD(g.arg(n), ymm[regs[i]])
	}
}

// zero clears vector registers.
func (g gen) zero(regs ...int) {
	for _, n := range regs {
		g.VXORPD(ymm[n], ymm[n], ymm[n])
	}
}

// The arithmetic, in Go assembler operand order (sources first, the
// destination last): packed at width vec, scalar at width scalar.

func (g gen) load(w lanes, src operand.Mem, dst int) {
	if w == vec {
		g.VMOVUPD(src, ymm[dst])
	} else {
		g.VMOVSD(src, xmm[dst])
	}
}

func (g gen) store(w lanes, src int, dst operand.Mem) {
	if w == vec {
		g.VMOVUPD(ymm[src], dst)
	} else {
		g.VMOVSD(xmm[src], dst)
	}
}

// mov copies register src to dst.
func (g gen) mov(w lanes, src, dst int) { g.VMOVAPD(w.r(src), w.r(dst)) }

// sub: dst = b − a.
func (g gen) sub(w lanes, a any, b, dst int) {
	if w == vec {
		g.VSUBPD(w.op(a), ymm[b], ymm[dst])
	} else {
		g.VSUBSD(w.op(a), xmm[b], xmm[dst])
	}
}

// mul: dst = b·a.
func (g gen) mul(w lanes, a any, b, dst int) {
	if w == vec {
		g.VMULPD(w.op(a), ymm[b], ymm[dst])
	} else {
		g.VMULSD(w.op(a), xmm[b], xmm[dst])
	}
}

// fma: dst += a·b, rounded once.
func (g gen) fma(w lanes, a any, b, dst int) {
	if w == vec {
		g.VFMADD231PD(w.op(a), ymm[b], ymm[dst])
	} else {
		g.VFMADD231SD(w.op(a), xmm[b], xmm[dst])
	}
}

// fnma: dst −= a·b, rounded once.
func (g gen) fnma(w lanes, a any, b, dst int) {
	if w == vec {
		g.VFNMADD231PD(w.op(a), ymm[b], ymm[dst])
	} else {
		g.VFNMADD231SD(w.op(a), xmm[b], xmm[dst])
	}
}

// clamp: dst = min(max(z, lo), hi) with lo, hi and z registers.
func (g gen) clamp(w lanes, z, lo, hi, dst int) {
	if w == vec {
		g.VMAXPD(ymm[lo], ymm[z], ymm[dst])
		g.VMINPD(ymm[hi], ymm[dst], ymm[dst])
	} else {
		g.VMAXSD(xmm[lo], xmm[z], xmm[dst])
		g.VMINSD(xmm[hi], xmm[dst], xmm[dst])
	}
}

// hsum adds the four lanes of ymm[acc] into the low lane of xmm[acc] as
// (l0 + l2) + (l1 + l3), with tmp as scratch.
func (g gen) hsum(acc, tmp int) {
	g.VEXTRACTF128(operand.U8(1), ymm[acc], xmm[tmp])
	g.VADDPD(xmm[tmp], xmm[acc], xmm[acc])
	g.VPERMILPD(operand.U8(1), xmm[acc], xmm[tmp])
	g.VADDSD(xmm[tmp], xmm[acc], xmm[acc])
}

// loop emits the coordinate loop over CX elements: body at width vec while
// 4 elements remain, then reduce (may be nil), then body at width scalar on
// the rest, in order, so that each element sees the same operations. It
// ends at label "end".
func (g gen) loop(body func(w lanes), reduce func()) {
	g.XORQ(reg.R8, reg.R8)
	g.MOVQ(reg.RCX, reg.R9)
	g.ANDQ(operand.I32(-4), reg.R9)
	g.JZ(operand.LabelRef("reduce"))
	g.Label("loop4")
	body(vec)
	g.ADDQ(operand.U8(4), reg.R8)
	g.CMPQ(reg.R8, reg.R9)
	g.JLT(operand.LabelRef("loop4"))
	g.Label("reduce")
	if reduce != nil {
		reduce()
	}
	g.tail(body)
}

// tail emits body at width scalar for the elements R8 up to CX, then the
// label "end".
func (g gen) tail(body func(w lanes)) {
	g.CMPQ(reg.R8, reg.RCX)
	g.JGE(operand.LabelRef("end"))
	g.Label("tail")
	body(scalar)
	g.INCQ(reg.R8)
	g.CMPQ(reg.R8, reg.RCX)
	g.JLT(operand.LabelRef("tail"))
	g.Label("end")
}

// loop8 is loop for sums kept in two sets of accumulators: body(w, off, h)
// handles the elements at byte offset off from R8 into set h. Blocks of 8
// feed sets 0 and 1, one block of 4 set 0, then reduce, then the scalar
// tail set 0.
func (g gen) loop8(body func(w lanes, off, h int), reduce func()) {
	g.XORQ(reg.R8, reg.R8)
	g.MOVQ(reg.RCX, reg.R9)
	g.ANDQ(operand.I32(-8), reg.R9)
	g.JZ(operand.LabelRef("quad"))
	g.Label("loop8")
	body(vec, 0, 0)
	body(vec, 32, 1)
	g.ADDQ(operand.U8(8), reg.R8)
	g.CMPQ(reg.R8, reg.R9)
	g.JLT(operand.LabelRef("loop8"))
	g.Label("quad")
	g.MOVQ(reg.RCX, reg.R9)
	g.ANDQ(operand.I32(-4), reg.R9)
	g.CMPQ(reg.R8, reg.R9)
	g.JGE(operand.LabelRef("reduce"))
	body(vec, 0, 0)
	g.ADDQ(operand.U8(4), reg.R8)
	g.Label("reduce")
	reduce()
	g.tail(func(w lanes) { body(w, 0, 0) })
}

// done ends a kernel that used YMM registers.
func (g gen) done() {
	g.VZEROUPPER()
	g.RET()
}
