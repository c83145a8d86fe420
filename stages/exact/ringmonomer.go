package exact

import (
	"fmt"
	"math"
)

// RingMonomerLnD returns ln[D(n)/D(0)] for n = 0, 2, …, ≤ N (index n/2)
// on a ring of N ≥ 3 sites by the transfer matrix of the link
// representation: bond i is occupied (k_i = 1, weight t = tanh β) or
// empty, and the site between bonds i−1 and i has odd degree exactly when
// k_{i−1} ≠ k_i. Every weight is positive, so the sum of logs by
// log-sum-exp loses nothing to cancellation: each ln D carries a rounding
// error of a few N·2^−53 (no Krawtchouk transform, which cancels by up to
// C(N, n)). Cost O(N²).
func RingMonomerLnD(n int, beta float64) ([]float64, error) {
	if n < 3 {
		return nil, fmt.Errorf("exact: ring of %d sites (need ≥ 3)", n)
	}
	lt := math.Log(math.Tanh(beta))
	if math.IsNaN(lt) || math.IsInf(lt, 0) {
		return nil, fmt.Errorf("exact: β = %v gives no finite ln tanh β", beta)
	}
	ninf := math.Inf(-1)
	// w[first][cur][j]: ln of the weight of bonds 0…i with k_0 = first,
	// k_i = cur and j odd sites among sites 1…i
	var w [2][2][]float64
	for a := 0; a < 2; a++ {
		for b := 0; b < 2; b++ {
			w[a][b] = make([]float64, n+1)
			for j := range w[a][b] {
				w[a][b][j] = ninf
			}
		}
	}
	w[0][0][0], w[1][1][0] = 0, lt
	next := w
	for a := 0; a < 2; a++ {
		for b := 0; b < 2; b++ {
			next[a][b] = make([]float64, n+1)
		}
	}
	for i := 1; i < n; i++ {
		for a := 0; a < 2; a++ {
			for cur := 0; cur < 2; cur++ {
				bond := 0.0
				if cur == 1 {
					bond = lt
				}
				out := next[a][cur]
				same, diff := w[a][cur], w[a][1-cur]
				out[0] = same[0] + bond
				for j := 1; j <= i; j++ {
					out[j] = logAdd(same[j], diff[j-1]) + bond
				}
				for j := i + 1; j <= n; j++ {
					out[j] = ninf
				}
			}
		}
		w, next = next, w
	}
	lnD := make([]float64, n/2+1)
	for m := range lnD {
		v := ninf
		for a := 0; a < 2; a++ {
			for cur := 0; cur < 2; cur++ {
				j := 2 * m // site 0 closes the ring: odd when k_{N−1} ≠ k_0
				if a != cur {
					j--
				}
				if j >= 0 {
					v = logAdd(v, w[a][cur][j])
				}
			}
		}
		lnD[m] = v
	}
	d0 := lnD[0]
	for m := range lnD {
		lnD[m] -= d0
	}
	return lnD, nil
}

// logAdd returns ln(e^a + e^b).
func logAdd(a, b float64) float64 {
	if a < b {
		a, b = b, a
	}
	if math.IsInf(b, -1) {
		return a
	}
	return a + math.Log1p(math.Exp(b-a))
}
