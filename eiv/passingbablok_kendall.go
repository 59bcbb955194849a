package eiv

import "slices"

// kendallPairs returns, over all pairs i < j, S = Σ sign(x_j − x_i)·sign(y_j − y_i)
// and the number of discordant pairs, in O(n log n) (Knight 1966, J. Am.
// Stat. Assoc. 61:436 — from memory): with the points ordered by (x, y),
// the discordant pairs are the strict inversions of y, counted by merge
// sort, and S = n(n−1)/2 − T_x − T_y + T_xy − 2·D with T the pairs tied in
// x, in y and in both. Integer counts: the same numbers as the double loop.
func kendallPairs(x, y []float64) (s, dis int64) {
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
	ys := make([]float64, n)
	var tx, txy int64
	for p, i := range idx {
		ys[p] = y[i]
	}
	for p := 0; p < n; {
		q, r := p+1, p+1
		for q < n && x[idx[q]] == x[idx[p]] {
			q++
		}
		tx += int64(q-p) * int64(q-p-1) / 2
		for a := p; a < q; a = r {
			for r = a + 1; r < q && ys[r] == ys[a]; r++ {
			}
			txy += int64(r-a) * int64(r-a-1) / 2
		}
		p = q
	}
	// Strict inversions of ys by bottom-up merge sort; ys ends sorted.
	tmp := make([]float64, n)
	src, dst := ys, tmp
	for width := 1; width < n; width *= 2 {
		for lo := 0; lo < n; lo += 2 * width {
			mid, hi := min(lo+width, n), min(lo+2*width, n)
			i, j, o := lo, mid, lo
			for i < mid && j < hi {
				if src[j] < src[i] {
					dis += int64(mid - i)
					dst[o] = src[j]
					j++
				} else {
					dst[o] = src[i]
					i++
				}
				o++
			}
			o += copy(dst[o:], src[i:mid])
			copy(dst[o:], src[j:hi])
		}
		src, dst = dst, src
	}
	var ty int64
	for p := 0; p < n; {
		q := p + 1
		for q < n && src[q] == src[p] {
			q++
		}
		ty += int64(q-p) * int64(q-p-1) / 2
		p = q
	}
	s = int64(n)*int64(n-1)/2 - tx - ty + txy - 2*dis
	return s, dis
}
