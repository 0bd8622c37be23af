package online_test

import (
	"fmt"
	"math/rand/v2"

	"lariat/online"
)

// stream returns n records of y = 3·x0 − 2·x2 + noise over 5 features.
func stream(n int) []online.Record {
	r := rand.New(rand.NewPCG(1, 2))
	rs := make([]online.Record, n)
	for i := range rs {
		x := make([]float64, 5)
		for j := range x {
			x[j] = 10 + 2*r.NormFloat64()
		}
		rs[i] = online.Record{X: x, Y: 3*x[0] - 2*x[2] + 0.1*r.NormFloat64()}
	}
	return rs
}

func ExampleNewLadder() {
	l, err := online.NewLadder(&online.Options{Features: 5, Window: 1000, Seed: 1})
	if err != nil {
		panic(err)
	}
	fmt.Println(l.Size(), l.Features(), l.Penalty().Kind(), l.Loss().Name())
	// Output: 12 5 lasso squared
}

func ExampleLadder_Add() {
	l, _ := online.NewLadder(&online.Options{Features: 5, Window: 500, Seed: 1})
	for _, r := range stream(2000) {
		if err := l.Add(r); err != nil {
			panic(err)
		}
	}
	fmt.Println(l.Len(), l.Seen())
	fmt.Println(l.Converge(1e-8, 100))
	last := l.Size() - 1
	fmt.Printf("nonzero at λ_max: %d, at the smallest λ: %d\n", l.Nonzero(0), l.Nonzero(last))
	// Output:
	// 500 2000
	// true
	// nonzero at λ_max: 0, at the smallest λ: 2
}

func ExampleLadder_Model() {
	l, _ := online.NewLadder(&online.Options{Features: 5, Window: 500, Lambda: 0.01, Seed: 1})
	for _, r := range stream(500) {
		_ = l.Add(r)
	}
	l.Converge(1e-10, 100)
	m := l.Model(0)
	fmt.Printf("raw: %.2f %.2f %.2f\n", m.Coef[0], m.Coef[2], m.Intercept)
	fmt.Printf("support: %d of %d\n", m.Nonzero(), len(m.Coef))
	// Output:
	// raw: 2.99 -2.00 0.03
	// support: 2 of 5
}

func ExampleLadder_Optimum() {
	l, _ := online.NewLadder(&online.Options{Features: 5, Window: 500, Seed: 1})
	for _, r := range stream(2000) {
		_ = l.Add(r) // 2 streaming steps per record: the members are approximate
	}
	opt := l.Optimum(8, nil, nil) // member 8's exact optimum on the window; the ladder is unchanged
	fmt.Println("converged:", opt.Converged, "KKT below 1e-6:", opt.KKT <= online.DefaultKKT)
	fmt.Printf("raw: %.1f %.1f, support %d of %d\n", opt.Model.Coef[0], opt.Model.Coef[2], opt.Model.Nonzero(), len(opt.Model.Coef))
	path := l.OptimumPath(nil, nil) // every member, from the window's Gram matrix
	fmt.Println("support at λ_max:", path[0].Model.Nonzero())
	// Output:
	// converged: true KKT below 1e-6: true
	// raw: 3.0 -2.0, support 2 of 5
	// support at λ_max: 0
}

// A ridge ladder's grid is anchored on the effective degrees of freedom of
// the window: member 0 at df 0.5, the last member at rank − 0.5. When the
// held-out minimum sits at the smallest λ, Extend moves the grid down.
func ExampleLadder_Grid() {
	ridge := online.Ridge()
	l, err := online.NewLadder(&online.Options{Features: 5, Window: 1000, Penalty: &ridge, Seed: 1})
	if err != nil {
		panic(err)
	}
	for _, r := range stream(1000) {
		if err := l.Add(r); err != nil {
			panic(err)
		}
	}
	l.Converge(1e-3, 1) // anchors the grid on the whole window
	g := l.Grid()
	fmt.Printf("%s anchor: df %.1f to %.1f (rank %d), λ %.2g to %.2g\n", g.Anchor, g.DF[0], g.DF[1], g.Rank, g.Top, g.Bottom)
	moved := l.Extend(l.Size()-1, l.Size()-1) // minimum and choice at the smallest λ
	g = l.Grid()
	fmt.Printf("moved %d members down: extended %d of at most %d\n", moved, g.Extended, g.MaxExtended)
	// Output:
	// df anchor: df 0.5 to 4.5 (rank 5), λ 9 to 0.11
	// moved 3 members down: extended 3 of at most 34
}
