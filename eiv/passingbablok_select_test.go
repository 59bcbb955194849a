package eiv

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"testing"
	"time"
)

// pbSorted is Passing & Bablok (1983) the plain way, as this package
// computed it before slope selection: every pair of the points ordered by
// (x, y), identical points and slopes of exactly −1 left out, equal x as
// +∞, all slopes sorted, the shifted order statistics read off. It is the
// reference the selection must match bit for bit.
type pbPlain struct {
	N, K                   int
	b, a, bl, bu, al, au   float64
	okMedian, okLow, okUpp bool
	// onLine: every slope is the same (the data lie on one line).
	onLine bool
}

func pbSorted(x, y []float64, conf float64) pbPlain {
	n := len(x)
	idx := make([]int, n)
	for i := range idx {
		idx[i] = i
	}
	slices.SortFunc(idx, func(a, b int) int {
		if x[a] != x[b] {
			return cmpFloat(x[a], x[b])
		}
		return cmpFloat(y[a], y[b])
	})
	var s []float64
	k := 0
	for p := range n {
		for q := p + 1; q < n; q++ {
			i, j := idx[p], idx[q]
			dx, dy := x[j]-x[i], y[j]-y[i]
			if dx == 0 && dy == 0 {
				continue
			}
			sl := math.Inf(1)
			if dx != 0 {
				sl = dy / dx
			}
			if sl == -1 {
				continue
			}
			if sl < -1 {
				k++
			}
			s = append(s, sl)
		}
	}
	slices.Sort(s)
	N := len(s)
	out := pbPlain{N: N, K: k, onLine: N > 0 && s[0] == s[N-1]}
	at := func(r int) (float64, bool) {
		if r < 1 || r > N {
			return 0, false
		}
		return s[r-1], true
	}
	if N%2 == 1 {
		out.b, out.okMedian = at((N+1)/2 + k)
	} else {
		lo, ok1 := at(N/2 + k)
		hi, ok2 := at(N/2 + 1 + k)
		out.b, out.okMedian = (lo+hi)/2, ok1 && ok2
	}
	z := zQuantile(conf)
	c := z * math.Sqrt(float64(n)*float64(n-1)*float64(2*n+5)/18)
	m1 := int(math.Round((float64(N) - c) / 2))
	m2 := N - m1 + 1
	out.bl, out.okLow = at(m1 + k)
	out.bu, out.okUpp = at(m2 + k)
	out.a = medianOf(y, x, out.b)
	out.al, out.au = medianOf(y, x, out.bu), medianOf(y, x, out.bl)
	return out
}

// pbCase draws a named kind of data set.
func pbCase(kind string, seed uint64, n int) (x, y []float64) {
	r := rand.New(rand.NewPCG(seed, uint64(n)))
	x, y = make([]float64, n), make([]float64, n)
	for i := range n {
		t := 5 + 100*r.Float64()
		xv, yv := t+2*r.NormFloat64(), 3+0.95*t+2.5*r.NormFloat64()
		switch kind {
		case "continuous":
		case "grid4": // ties in x, in y and in slopes
			xv, yv = math.Round(xv/4)*4, math.Round(yv/4)*4
		case "integers": // few values: many duplicated points, many slopes of −1
			xv, yv = float64(r.IntN(12)), float64(r.IntN(12))
		case "decimals": // one decimal: differences are rounded, slopes nearly tied
			xv, yv = math.Round(xv*10)/10, math.Round(yv*10)/10
		case "same": // y = x: every slope is 1
			xv = math.Round(xv*100) / 100
			yv = xv
		case "shifted": // y = x + 0.1 in decimals
			xv = math.Round(xv*10) / 10
			yv = xv + 0.1
		case "minus1": // pairs along −1 and duplicated x
			xv = float64(r.IntN(n/3 + 2))
			yv = 50 - xv + float64(r.IntN(3))
		case "negative": // falling line: the shift K is large
			yv = 200 - 1.3*t + r.NormFloat64()
		case "offset": // decimals far from zero: every difference is rounded
			xv, yv = 1e6+math.Round(xv*10)/10, 1e6+math.Round(yv*10)/10
		case "logscale": // many decades, y = x up to a few units in the last place: slopes within ulps of 1
			xv = math.Exp(4 * r.NormFloat64())
			yv = xv * (1 + 0x1p-52*float64(r.IntN(5)-2))
		case "tiny": // small magnitudes and a steep line
			xv, yv = xv*1e-9, yv*3e-3
		}
		x[i], y[i] = xv, yv
	}
	return x, y
}

// pbRace is set under the race detector.
var pbRace bool

func sameBits(a, b float64) bool { return math.Float64bits(a) == math.Float64bits(b) }

// The selection gives exactly (bit for bit) the slope, intercept and
// interval ends of sorting all slopes, on many seeded data sets of many
// kinds, with the default enumeration cap and with a cap of 8 slopes that
// forces the sampling steps.
func TestPassingBablokSelectionExact(t *testing.T) {
	kinds := []string{"continuous", "grid4", "integers", "decimals", "same", "shifted", "minus1", "negative", "offset", "logscale", "tiny"}
	sizes := []int{3, 4, 5, 6, 7, 10, 13, 20, 33, 64, 100, 257, 700, 2000}
	if testing.Short() || pbRace {
		sizes = sizes[:10] // up to n = 64; the race detector slows the plain sort tenfold
	}
	defer func(c int64) { pbSelectCap = c }(pbSelectCap)
	for _, kind := range kinds {
		for _, n := range sizes {
			seeds := 3
			if n >= 700 {
				seeds = 1
			}
			for seed := range uint64(seeds) {
				x, y := pbCase(kind, seed+1, n)
				want := pbSorted(x, y, 0.95)
				for _, cp := range []int64{1 << 16, 8} {
					t.Run(fmt.Sprintf("%s/n=%d/seed=%d/cap=%d", kind, n, seed+1, cp), func(t *testing.T) {
						pbSelectCap = cp
						got, err := PassingBablok(x, y, nil)
						if want.N < 2 || !want.okMedian || math.IsInf(want.b, 0) {
							if !errors.Is(err, ErrDegenerate) && !errors.Is(err, ErrConstantX) {
								t.Fatalf("plain: degenerate; selection: %v", err)
							}
							return
						}
						if err != nil {
							t.Fatalf("plain: b = %v; selection: %v", want.b, err)
						}
						if got.Slopes != want.N || got.Shift != want.K {
							t.Errorf("N, K = %d, %d, want %d, %d", got.Slopes, got.Shift, want.N, want.K)
						}
						f := got.Fit
						check := func(name string, g, w float64) {
							if !sameBits(g, w) {
								t.Errorf("%s = %v (%#x), plain %v (%#x)", name, g, math.Float64bits(g), w, math.Float64bits(w))
							}
						}
						check("slope", f.Slope.Value, want.b)
						check("intercept", f.Intercept.Value, want.a)
						degenerate := want.okLow && want.okUpp && want.bl == want.bu && !want.onLine
						if !degenerate && want.okLow && want.okUpp && !math.IsInf(want.bl, 0) && !math.IsInf(want.bu, 0) {
							check("slope lower", f.Slope.CI.Lower, want.bl)
							check("slope upper", f.Slope.CI.Upper, want.bu)
							check("intercept lower", f.Intercept.CI.Lower, want.al)
							check("intercept upper", f.Intercept.CI.Upper, want.au)
						} else if f.Slope.CI.Method != "" || f.Intercept.CI.Method != "" {
							// Without an interval (none, or a zero-width one off a
							// line) both stay unset: no placeholder.
							t.Errorf("interval %+v, plain has none", f.Slope.CI)
						}
						// The resampling fitter above its sorting size selects too.
						if n > pbFitterBruteMaxN {
							a, b, err := PassingBablokEstimator{}.NewFitter(n).FitLine(Sample{X: x, Y: y})
							if err != nil || !sameBits(a, want.a) || !sameBits(b, want.b) {
								t.Errorf("fitter (%v, %v, %v), plain (%v, %v)", a, b, err, want.a, want.b)
							}
						}
					})
				}
			}
		}
	}
}

// A cancelled context stops the selection with the context's error: before
// it starts, and while it runs on 10⁵ points.
func TestPassingBablokCancel(t *testing.T) {
	x, y := pbCase("continuous", 7, 100_000)
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := PassingBablokContext(ctx, x, y, nil); !errors.Is(err, context.Canceled) {
		t.Fatalf("cancelled before: %v", err)
	}
	ctx, cancel = context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() {
		_, err := PassingBablokContext(ctx, x, y, nil)
		done <- err
	}()
	time.Sleep(20 * time.Millisecond)
	cancel()
	// A generous bound: this checks that the work stops, not how fast (the
	// machine is shared); the whole fit takes longer than this.
	select {
	case err := <-done:
		if !errors.Is(err, context.Canceled) {
			t.Fatalf("cancelled while running: %v", err)
		}
	case <-time.After(5 * time.Second):
		t.Fatal("no return 5 s after cancel")
	}
}

// The O(n log n) Kendall counts equal the double loop over all pairs,
// written here from the definition, on data with and without ties.
func TestKendallPairs(t *testing.T) {
	for _, kind := range []string{"continuous", "grid4", "integers", "minus1", "same"} {
		for _, n := range []int{3, 4, 9, 50, 400} {
			t.Run(fmt.Sprintf("%s/n=%d", kind, n), func(t *testing.T) {
				x, y := pbCase(kind, 3, n)
				sgn := func(v float64) int64 {
					switch {
					case v > 0:
						return 1
					case v < 0:
						return -1
					}
					return 0
				}
				var s, dis int64
				for i := range n {
					for j := i + 1; j < n; j++ {
						p := sgn(x[j]-x[i]) * sgn(y[j]-y[i])
						s += p
						if p < 0 {
							dis++
						}
					}
				}
				gs, gd := kendallPairs(x, y)
				if gs != s || gd != dis {
					t.Errorf("S, D = %d, %d, want %d, %d", gs, gd, s, dis)
				}
			})
		}
	}
}

// BenchmarkPassingBablok times the whole fit (selection, intercepts, cusum,
// Kendall) on seeded continuous data.
func BenchmarkPassingBablok(b *testing.B) {
	for _, n := range []int{100, 1000, 2000, 20_000, 100_000} {
		x, y := pbCase("continuous", 1, n)
		b.Run(fmt.Sprintf("n=%d", n), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				if _, err := PassingBablok(x, y, nil); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// BenchmarkPassingBablokSorted is the former way, all slopes stored and
// sorted, at n = 2000 for a ratio within one run.
func BenchmarkPassingBablokSorted(b *testing.B) {
	x, y := pbCase("continuous", 1, 2000)
	b.ReportAllocs()
	for b.Loop() {
		pbSorted(x, y, 0.95)
	}
}
