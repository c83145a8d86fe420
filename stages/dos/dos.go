// Package dos stitches density-of-states ratios into ln ρ_β(M) and draws
// error replicas from the ratios' linear error model.
//
// Conventions: ρ_β(M) = Σ_{s: Σs_i = M} exp(β Σ_⟨ij⟩ s_i s_j), natural logs,
// arrays indexed by k = (M+N)/2 for M = −N, −N+2, …, N.
package dos

import (
	"math"

	"strata/stages/ratio"
	"strata/stages/rng"
)

// Stitch returns ln ρ(M) on the full range from ln r(M) = ln ρ(M)/ρ(M−2)
// given for M = N, N−2, …, > 0 (lnr[0] is M = N). The anchor is
// ρ(±N) = e^{βdN} (one state, every bond satisfied) and ρ(M) = ρ(−M):
// ln ρ(M) = βdN − Σ_{M' > M} ln r(M').
func Stitch(d, n int, beta float64, lnr []float64) []float64 {
	out := make([]float64, n+1)
	v := beta * float64(d*n)
	out[n] = v
	for j, m := 0, n; m > 0 && j < len(lnr); j, m = j+1, m-2 {
		v -= lnr[j]
		k := (m - 2 + n) / 2
		out[k] = v
	}
	for k := 0; k < (n+1)/2; k++ { // mirror
		out[k] = out[n-k]
	}
	return out
}

// StitchMonomer returns ln D(n) − ln D(0) for n = 0, 2, …, ≤ N (index n/2)
// from lnr[j] = ln[D(2j+2)/D(2j)]: the monomer density is anchored at
// n = 0, the only ratio the dual sum needs being D(n)/D(0).
func StitchMonomer(lnr []float64) []float64 {
	out := make([]float64, len(lnr)+1)
	for j, v := range lnr {
		out[j+1] = out[j] + v
	}
	return out
}

// Replicas draws R replicas of the ratio vector: each independent chain's
// variables are drawn jointly from a normal distribution with their
// covariance, and every ratio follows from its linear terms, so ratios that
// share a chain stay correlated. Replica j of ratio i is out[j][i].
func Replicas(res *ratio.Result, r int, seed uint64) [][]float64 {
	gen := rng.NewRand(seed)
	chol := make([][][]float64, len(res.Blocks))
	for b, blk := range res.Blocks {
		chol[b] = cholesky(blk.Cov)
	}
	out := make([][]float64, r)
	delta := make([][]float64, len(res.Blocks))
	for j := range out {
		for b, l := range chol {
			k := len(l)
			z := make([]float64, k)
			for i := range z {
				z[i] = gen.Norm()
			}
			d := make([]float64, k)
			for i := 0; i < k; i++ {
				for c := 0; c <= i; c++ {
					d[i] += l[i][c] * z[c]
				}
			}
			delta[b] = d
		}
		row := make([]float64, len(res.Ratios))
		for i, q := range res.Ratios {
			v := q.LnR
			for _, t := range q.Terms {
				v += t.Coef * delta[t.Block][t.Var]
			}
			row[i] = v
		}
		out[j] = row
	}
	return out
}

// cholesky returns the lower factor L with L Lᵀ = a for a symmetric
// positive semi-definite a (directions of zero variance get zero columns).
func cholesky(a [][]float64) [][]float64 {
	k := len(a)
	l := make([][]float64, k)
	for i := range l {
		l[i] = make([]float64, k)
	}
	for i := 0; i < k; i++ {
		for j := 0; j <= i; j++ {
			s := a[i][j]
			for c := 0; c < j; c++ {
				s -= l[i][c] * l[j][c]
			}
			if i == j {
				l[i][i] = math.Sqrt(math.Max(s, 0))
			} else if l[j][j] > 0 {
				l[i][j] = s / l[j][j]
			}
		}
	}
	return l
}
