// Package sampler runs restricted Monte Carlo chains of the ferromagnetic
// Ising model in sectors of fixed total magnetization M = Σ_i s_i.
//
// Conventions: weight exp(β S) with S = Σ_⟨ij⟩ s_i s_j over the d·N bonds
// of a periodic L^d lattice, J = 1, β ≥ 0. The density of states is
// ρ_β(M) = Σ_{s: Σ s_i = M} exp(β S(s)). A sweep is N proposals.
//
// Two chains are provided:
//
//   - Sector: a chain at fixed M that exchanges a random up spin with a
//     random down spin anywhere on the lattice (Metropolis on ΔS; adjacent
//     pairs handled). Each sweep it records the histogram of local fields
//     h_i = Σ_{j nn i} s_j separately for up and for down spins, from which
//     the insertion and Bennett estimators follow exactly.
//   - Pair: a chain restricted to the two sectors {M, M−2} with
//     single-spin Metropolis in random site order; proposals that leave
//     the pair are rejected. Each sweep it records the fraction of
//     proposals after which the chain was in M.
package sampler

import (
	"fmt"
	"math"

	"strata/stages/lattice"
	"strata/stages/rng"
)

// Chain describes one independent chain.
type Chain struct {
	Lat    *lattice.Lattice
	Beta   float64 // β J with J = 1, dimensionless
	M      int     // total magnetization (for Pair: the upper sector)
	Therm  int     // sweeps discarded before measuring
	Sweeps int     // measured sweeps
	Seed   uint64
}

func (c Chain) check(pair bool) error {
	n := c.Lat.N
	lo := -n
	if pair {
		lo = -n + 2
	}
	if c.M > n || c.M < lo || (c.M+n)%2 != 0 {
		return fmt.Errorf("sampler: magnetization %d impossible on %d sites", c.M, n)
	}
	if c.Beta < 0 || math.IsNaN(c.Beta) || math.IsInf(c.Beta, 0) {
		return fmt.Errorf("sampler: β = %v must be finite and ≥ 0", c.Beta)
	}
	if c.Sweeps < 1 || c.Therm < 0 {
		return fmt.Errorf("sampler: need sweeps ≥ 1 and thermalization ≥ 0")
	}
	return nil
}

// threshold converts an acceptance probability p ≤ 1 to a uint64 threshold
// u such that P(x < u) = p for a uniform 64-bit x.
func threshold(p float64) uint64 {
	if p >= 1 {
		return math.MaxUint64
	}
	return uint64(p * 0x1p64)
}

// initial returns a deterministic configuration with magnetization m: the
// first (N+m)/2 sites up (a slab, close to the ground state of the sector).
func initial(n, m int) []int8 {
	s := make([]int8, n)
	up := (n + m) / 2
	for i := range s {
		if i < up {
			s[i] = 1
		} else {
			s[i] = -1
		}
	}
	return s
}

// HistWidth returns the number of histogram bins per spin value, 2d+1:
// bin b holds local field h = 2b − 2d.
func HistWidth(d int) int { return 2*d + 1 }

// Sector runs a fixed-magnetization chain and returns, per measured sweep
// t, 2·W counts (W = HistWidth(d)): out[t*2W + b] is the number of up spins
// with local field h = 2b − 2d, out[t*2W + W + b] the number of down spins.
func Sector(c Chain) ([]float64, error) {
	if err := c.check(false); err != nil {
		return nil, err
	}
	lat := c.Lat
	n, z, d := lat.N, lat.Z, lat.D
	w := HistWidth(d)
	out := make([]float64, c.Sweeps*2*w)
	s := initial(n, c.M)
	nu := (n + c.M) / 2
	nd := n - nu
	if nu == 0 || nd == 0 {
		// a single state: the histogram is the same every sweep
		for t := 0; t < c.Sweeps; t++ {
			measure(lat, s, out[t*2*w:(t+1)*2*w])
		}
		return out, nil
	}
	// sites[0:nu] are up, sites[nu:] down
	sites := make([]int32, n)
	for i := range sites {
		sites[i] = int32(i)
	}
	// ΔS/2 = (h_b − h_a) − 2·bonds(a,b) lies in [−4d − 2z, 4d]; index ΔS/2 + off
	off := 4*d + 2*z
	thr := make([]uint64, off+4*d+1)
	for k := range thr {
		thr[k] = threshold(math.Exp(2 * c.Beta * float64(k-off)))
	}
	// h[i] is the local field Σ_{j nn i} s_j, kept current on every move
	h := make([]int8, n)
	for i := range h {
		h[i] = int8(lat.Field(s, i))
	}
	r := rng.NewRand(c.Seed)
	nbr := lat.Nbr
	total := c.Therm + c.Sweeps
	for sweep := 0; sweep < total; sweep++ {
		for step := 0; step < n; step++ {
			ia := r.Intn(nu)
			ib := nu + r.Intn(nd)
			a, b := sites[ia], sites[ib]
			// k0 ignores a bond between a and b, which can only lower ΔS;
			// thr is increasing in k, so one uniform u decides in two steps
			// and the neighbour list is read only when the bond matters.
			k0 := int(h[b]) - int(h[a]) + off
			var u uint64
			if k0 < off {
				u = r.Uint64()
				if u >= thr[k0] {
					continue
				}
			}
			na := nbr[int(a)*z : int(a)*z+z]
			if k0 < off+2*z { // a bond could change the decision
				bonds := 0
				for _, j := range na {
					if j == b {
						bonds++
					}
				}
				if k := k0 - 2*bonds; bonds > 0 && k < off {
					if k0 >= off {
						u = r.Uint64()
					}
					if u >= thr[k] {
						continue
					}
				}
			}
			s[a], s[b] = -1, 1
			sites[ia], sites[ib] = b, a
			for _, j := range na {
				h[j] -= 2
			}
			for _, j := range nbr[int(b)*z : int(b)*z+z] {
				h[j] += 2
			}
		}
		if sweep >= c.Therm {
			t := sweep - c.Therm
			histogram(d, s, h, out[t*2*w:(t+1)*2*w])
		}
	}
	return out, nil
}

// histogram fills hist[0:W] with the up-spin and hist[W:2W] with the
// down-spin counts of local fields h (bin (h+2d)/2).
func histogram(d int, s, h []int8, hist []float64) {
	w := 2*d + 1
	var cnt [2][7]int
	for i, si := range s {
		cnt[(1-si)/2][(int(h[i])+2*d)/2]++
	}
	for b := 0; b < w; b++ {
		hist[b] = float64(cnt[0][b])
		hist[w+b] = float64(cnt[1][b])
	}
}

// measure fills h[0:W] with the up-spin and h[W:2W] with the down-spin
// local-field histograms.
func measure(lat *lattice.Lattice, s []int8, h []float64) {
	z, d := lat.Z, lat.D
	w := 2*d + 1
	var cnt [2][7]int
	nbr := lat.Nbr
	for i := 0; i < lat.N; i++ {
		f := 0
		for _, j := range nbr[i*z : i*z+z] {
			f += int(s[j])
		}
		cnt[(1-s[i])/2][(f+2*d)/2]++
	}
	for b := 0; b < w; b++ {
		h[b] = float64(cnt[0][b])
		h[w+b] = float64(cnt[1][b])
	}
}

// Pair runs the two-sector chain {M, M−2} and returns, per measured sweep,
// the fraction of the sweep's N proposals after which the chain was in M.
// Sites are chosen at random (a deterministic order with acceptance 1 at
// ΔS ≥ 0 makes this chain non-ergodic).
func Pair(c Chain) ([]float64, error) {
	if err := c.check(true); err != nil {
		return nil, err
	}
	lat := c.Lat
	n, z, d := lat.N, lat.Z, lat.D
	s := initial(n, c.M)
	m := c.M
	// flipping spin s_i changes S by −2 s_i h_i; index s_i h_i + 2d
	thr := make([]uint64, 4*d+1)
	for k := range thr {
		thr[k] = threshold(math.Exp(-2 * c.Beta * float64(k-2*d)))
	}
	out := make([]float64, c.Sweeps)
	r := rng.NewRand(c.Seed)
	nbr := lat.Nbr
	total := c.Therm + c.Sweeps
	for sweep := 0; sweep < total; sweep++ {
		inUpper := 0
		for step := 0; step < n; step++ {
			i := r.Intn(n)
			si := s[i]
			// allowed: an up spin when in M, a down spin when in M−2
			if (si > 0) == (m == c.M) {
				h := 0
				for _, j := range nbr[i*z : i*z+z] {
					h += int(s[j])
				}
				k := int(si)*h + 2*d
				if k <= 2*d || r.Uint64() < thr[k] {
					s[i] = -si
					m -= 2 * int(si)
				}
			}
			if m == c.M {
				inUpper++
			}
		}
		if sweep >= c.Therm {
			out[sweep-c.Therm] = float64(inUpper) / float64(n)
		}
	}
	return out, nil
}
