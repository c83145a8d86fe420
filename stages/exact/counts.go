package exact

import (
	"fmt"
	"math"
	"math/bits"

	"strata/stages/lattice"
)

// MaxEnumerateSites bounds Enumerate: 2^27 states take about 2 s.
const MaxEnumerateSites = 27

// Counts holds the exact number of states g(S, M) of a lattice with bond
// sum S = Σ_⟨ij⟩ s_i s_j and magnetization M.
type Counts struct {
	D, L, N, Bonds int
	// G[(S+Bonds)/2][(M+N)/2]
	G [][]uint64
}

// Enumerate visits all 2^N states in Gray-code order (one spin flip per
// step) and counts g(S, M).
func Enumerate(lat *lattice.Lattice) (*Counts, error) {
	n := lat.N
	if n > MaxEnumerateSites {
		return nil, fmt.Errorf("exact: enumeration of %d sites exceeds the limit of %d", n, MaxEnumerateSites)
	}
	c := &Counts{D: lat.D, L: lat.L, N: n, Bonds: lat.Bonds()}
	c.G = make([][]uint64, c.Bonds+1)
	for i := range c.G {
		c.G[i] = make([]uint64, n+1)
	}
	s := make([]int8, n)
	for i := range s {
		s[i] = 1
	}
	S, M := c.Bonds, n
	c.G[(S+c.Bonds)/2][(M+n)/2]++
	total := uint64(1) << uint(n)
	for i := uint64(1); i < total; i++ {
		k := bits.TrailingZeros64(i)
		h := lat.Field(s, k)
		S -= 2 * int(s[k]) * h
		M -= 2 * int(s[k])
		s[k] = -s[k]
		c.G[(S+c.Bonds)/2][(M+n)/2]++
	}
	return c, nil
}

// LnRho returns ln ρ_β(M) = ln Σ_S g(S, M) e^{βS}.
func (c *Counts) LnRho(beta float64) []float64 {
	out := make([]float64, c.N+1)
	for k := range out {
		var terms []float64
		for si, row := range c.G {
			if row[k] != 0 {
				terms = append(terms, math.Log(float64(row[k]))+beta*float64(2*si-c.Bonds))
			}
		}
		out[k] = logSumExp(terms)
	}
	return out
}

// LnRhoErr bounds the absolute float64 rounding error of LnRho: each term
// ln g + βS is rounded to a few ulps of its size, and the log-sum-exp adds
// one rounding per term (first order; Higham, Accuracy and Stability of
// Numerical Algorithms, §4.2).
func (c *Counts) LnRhoErr(beta float64) []float64 {
	lr := c.LnRho(beta)
	out := make([]float64, len(lr))
	for k, v := range lr {
		out[k] = 0x1p-53 * (4*(math.Abs(v)+beta*float64(c.Bonds)+float64(c.N)*math.Ln2+1) + float64(c.Bonds+2))
	}
	return out
}

// EnergyCounts returns g(E) over E = −S (summed over M), indexed by
// (S+Bonds)/2.
func (c *Counts) EnergyCounts() []uint64 {
	out := make([]uint64, len(c.G))
	for i, row := range c.G {
		for _, v := range row {
			out[i] += v
		}
	}
	return out
}
