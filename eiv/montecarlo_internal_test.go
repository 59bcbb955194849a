package eiv

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
)

var sinkTDraw float64

// BenchmarkTDrawMethods: one t draw per op by each exact method that
// applies to ν, in the loop as the Monte Carlo uses it (one tDraw, one
// rand.Rand), to choose newTDraw's method per ν.
func BenchmarkTDrawMethods(b *testing.B) {
	for _, nu := range []float64{1, 2, 3, 4, 5, 9, 30} {
		for _, m := range []struct {
			name string
			m    tMethod
		}{{"inverse2", tInverse2}, {"bailey", tBailey}, {"gamma", tGamma}} {
			if (m.m == tInverse2 && nu != 2) || (m.m == tGamma && nu < 2) {
				continue
			}
			b.Run(fmt.Sprintf("nu=%g/%s", nu, m.name), func(b *testing.B) {
				t := newTDraw(nu)
				t.method = m.m
				t.d = nu/2 - 1.0/3
				t.c = 1 / math.Sqrt(9*t.d)
				src := rand.NewPCG(1, 2)
				rng := rand.New(src)
				var s float64
				for b.Loop() {
					s += t.draw(rng, src)
				}
				sinkTDraw = s
			})
		}
	}
}
