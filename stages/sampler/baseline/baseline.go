// Package baseline is the plain reference approach against which the
// sampler's efficiency is measured: the two-sector indicator chain with
// single-spin Metropolis in random site order, math/rand/v2's PCG with
// Float64 and math.Exp per proposal, one core, the indicator of being in
// the upper sector measured once per sweep, errors by binning.
package baseline

import (
	"math"
	"math/rand/v2"

	"strata/stages/lattice"
)

// Pair runs the plain chain on {m, m−2} and returns the per-sweep indicator
// of being in m.
func Pair(lat *lattice.Lattice, beta float64, m, therm, sweeps int, seed uint64) []float64 {
	r := rand.New(rand.NewPCG(seed, 1))
	s := make([]int8, lat.N)
	for i := range s {
		if i < (lat.N+m)/2 {
			s[i] = 1
		} else {
			s[i] = -1
		}
	}
	cur := m
	out := make([]float64, sweeps)
	for sw := 0; sw < therm+sweeps; sw++ {
		for step := 0; step < lat.N; step++ {
			i := r.IntN(lat.N)
			if (s[i] > 0) != (cur == m) {
				continue
			}
			dS := -2 * int(s[i]) * lat.Field(s, i)
			if r.Float64() < math.Exp(beta*float64(dS)) {
				cur -= 2 * int(s[i])
				s[i] = -s[i]
			}
		}
		if sw >= therm && cur == m {
			out[sw-therm] = 1
		}
	}
	return out
}

// LnRatio returns ln r = ln x̄ − ln(1 − x̄) and its error from binning
// (H. Flyvbjerg and H. G. Petersen, J. Chem. Phys. 91, 461 (1989)): the
// series is cut into 50 bins and the error of the bin means propagated.
func LnRatio(x []float64) (lnr, err float64) {
	const bins = 50
	n := len(x) / bins
	mean := 0.0
	bm := make([]float64, bins)
	for b := 0; b < bins; b++ {
		for _, v := range x[b*n : (b+1)*n] {
			bm[b] += v
		}
		bm[b] /= float64(n)
		mean += bm[b] / bins
	}
	v := 0.0
	for _, m := range bm {
		v += (m - mean) * (m - mean)
	}
	sigma := math.Sqrt(v / float64(bins*(bins-1)))
	return math.Log(mean / (1 - mean)), sigma * (1/mean + 1/(1-mean))
}
