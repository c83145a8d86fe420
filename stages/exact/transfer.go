package exact

import (
	"fmt"
	"math/bits"
)

// MaxTorusSize bounds TorusCounts (8×8 takes several seconds and about
// 150 MB).
const MaxTorusSize = 8

// TorusCounts returns g(S, M) of the periodic L×L square lattice by a
// site-by-site transfer matrix that carries, for every configuration of the
// most recent L spins (the front), the polynomial Σ g x^S y^{#up}. The first
// row r0 is held fixed so that the last row can close the vertical periodic
// boundary; first rows related by a cyclic shift or a reflection of the
// columns give the same counts, so one representative per class is run
// and weighted by the class size. Counts use uint64 arithmetic modulo 2^64,
// which is exact because every final g(S, M) is below 2^64 (at L = 8 the
// total is 2^64, split over many (S, M)).
func TorusCounts(l int) (*Counts, error) {
	if l < 2 || l > MaxTorusSize {
		return nil, fmt.Errorf("exact: torus transfer matrix needs 2 ≤ L ≤ %d, got %d", MaxTorusSize, l)
	}
	n := l * l
	bonds := 2 * n
	ms := n + 1       // up-spin count index 0..N
	ss := 2*bonds + 1 // partial bond sums index S + bonds, S in [−bonds, bonds]
	size := ss * ms
	states := 1 << uint(l)
	cur := make([]uint64, states*size)
	next := make([]uint64, states*size)
	total := make([]uint64, size)
	spin := func(st, x int) int { return 2*int(st>>uint(x)&1) - 1 }
	for r0 := 0; r0 < states; r0++ {
		mult := classWeight(r0, l)
		if mult == 0 {
			continue
		}
		for i := range cur {
			cur[i] = 0
		}
		s0 := 0
		for x := 0; x < l; x++ {
			s0 += spin(r0, x) * spin(r0, (x+1)%l)
		}
		up0 := bits.OnesCount(uint(r0))
		cur[r0*size+(s0+bonds)*ms+up0] = 1
		lo, hi := (s0+bonds)*ms+up0, (s0+bonds)*ms+up0+1 // active flat range
		for y := 1; y < l; y++ {
			for x := 0; x < l; x++ {
				for i := range next {
					next[i] = 0
				}
				nlo, nhi := size, 0
				for st := 0; st < states; st++ {
					src := cur[st*size : (st+1)*size]
					nb := spin(st, x) // up neighbour (previous row)
					if x > 0 {
						nb += spin(st, x-1) // left, current row
					}
					if x == l-1 {
						nb += spin(st, 0) // right, wraps to column 0 of the current row
					}
					if y == l-1 {
						nb += spin(r0, x) // down, wraps to the first row
					}
					for _, sg := range [2]int{-1, 1} {
						ns := st &^ (1 << uint(x))
						upInc := 0
						if sg > 0 {
							ns |= 1 << uint(x)
							upInc = 1
						}
						off := sg*nb*ms + upInc
						dst := next[ns*size : (ns+1)*size]
						a, b := lo, hi
						if a+off < 0 {
							a = -off
						}
						if b+off > size {
							b = size - off
						}
						for i := a; i < b; i++ {
							dst[i+off] += src[i]
						}
						if a+off < nlo {
							nlo = a + off
						}
						if b+off > nhi {
							nhi = b + off
						}
					}
				}
				cur, next = next, cur
				lo, hi = nlo, nhi
			}
		}
		for st := 0; st < states; st++ {
			src := cur[st*size : (st+1)*size]
			for i := lo; i < hi; i++ {
				total[i] += mult * src[i]
			}
		}
	}
	c := &Counts{D: 2, L: l, N: n, Bonds: bonds}
	c.G = make([][]uint64, bonds+1)
	for i := range c.G {
		c.G[i] = make([]uint64, n+1)
	}
	for si := 0; si < ss; si++ {
		s := si - bonds
		for up := 0; up < ms; up++ {
			v := total[si*ms+up]
			if v == 0 {
				continue
			}
			if (s+bonds)%2 != 0 {
				return nil, fmt.Errorf("exact: odd bond sum %d in the transfer matrix", s)
			}
			// M = 2·up − N, index (M+N)/2 = up
			c.G[(s+bonds)/2][up] = v
		}
	}
	return c, nil
}

// classWeight returns the size of r0's class under cyclic shifts and
// reflection of l columns if r0 is the smallest member, else 0.
func classWeight(r0, l int) uint64 {
	mask := 1<<uint(l) - 1
	seen := map[int]bool{}
	for shift := 0; shift < l; shift++ {
		v := ((r0 << uint(shift)) | (r0 >> uint(l-shift))) & mask
		for _, w := range []int{v, reverse(v, l)} {
			if w < r0 {
				return 0
			}
			seen[w] = true
		}
	}
	return uint64(len(seen))
}

func reverse(v, l int) int {
	r := 0
	for i := 0; i < l; i++ {
		if v>>uint(i)&1 == 1 {
			r |= 1 << uint(l-1-i)
		}
	}
	return r
}
