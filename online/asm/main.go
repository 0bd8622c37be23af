// Command asm writes kernel_amd64.s, the AVX2+FMA kernels of package online,
// from the description in kernels.go, with the avo assembler generator
// (github.com/mmcloughlin/avo). It runs from the package directory through
// go generate:
//
//	//go:generate go run ./asm -out kernel_amd64.s
//
// The signatures come from the Go declarations in the package (avo's
// Implement), the struct offsets from go_asm.h, which the Go toolchain
// writes for a package with assembly; nothing in the output is a number
// copied by hand. TestGenerated in this directory checks that the committed
// file is byte for byte what this command prints.
package main

import (
	"flag"
	"fmt"
	"os"
)

func main() {
	// A flag set of its own: avo's build package registers its flags on
	// the default one.
	fs := flag.NewFlagSet("asm", flag.ExitOnError)
	out := fs.String("out", "", "assembly output `file` (default standard output)")
	pkg := fs.String("pkg", "lariat/online", "import path of the package the kernels belong to")
	_ = fs.Parse(os.Args[1:])
	src, err := generate(*pkg)
	if err != nil {
		fmt.Fprintln(os.Stderr, "asm:", err)
		os.Exit(1)
	}
	if *out == "" {
		_, err = os.Stdout.Write(src)
	} else {
		err = os.WriteFile(*out, src, 0o644)
	}
	if err != nil {
		fmt.Fprintln(os.Stderr, "asm:", err)
		os.Exit(1)
	}
}
