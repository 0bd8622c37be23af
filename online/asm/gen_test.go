package main

import (
	"bytes"
	"os"
	"os/exec"
	"testing"
)

// TestGenerated checks that the committed kernel_amd64.s is byte for byte
// what the generator prints, so that the description in this directory and
// the assembly that runs cannot drift apart. Loading the package's Go
// declarations runs the go command; without it the test is skipped.
func TestGenerated(t *testing.T) {
	if _, err := exec.LookPath("go"); err != nil {
		t.Skip("no go command to load the package with")
	}
	got, err := generate("lariat/online")
	if err != nil {
		t.Fatal(err)
	}
	want, err := os.ReadFile("../kernel_amd64.s")
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(got, want) {
		t.Fatal("kernel_amd64.s differs from the generator's output: run go generate ./online/")
	}
}
