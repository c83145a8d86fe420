// Package lattice builds periodic hypercubic lattices L^d (d = 1, 2, 3) and
// their nearest-neighbour tables.
//
// Sites are numbered i = x_0 + L x_1 + L² x_2. Each site has z = 2d
// neighbours; Nbr[i*z+2k] and Nbr[i*z+2k+1] are the neighbours at x_k+1
// and x_k−1 (mod L). For L = 2 both entries name the same site, so that
// site pair carries two bonds, as the periodic L = 2 lattice does.
package lattice

import "fmt"

// Lattice is a periodic hypercubic lattice.
type Lattice struct {
	D, L, N int
	Z       int     // coordination number 2d
	Nbr     []int32 // N*Z neighbour indices
}

// New returns the periodic lattice L^d. It requires d in 1..3 and L ≥ 2.
func New(d, L int) (*Lattice, error) {
	if d < 1 || d > 3 {
		return nil, fmt.Errorf("lattice: dimension %d not in 1..3", d)
	}
	if L < 2 {
		return nil, fmt.Errorf("lattice: size %d < 2", L)
	}
	n := 1
	for k := 0; k < d; k++ {
		if n > (1<<31-1)/L {
			return nil, fmt.Errorf("lattice: %d^%d sites is too many", L, d)
		}
		n *= L
	}
	z := 2 * d
	lat := &Lattice{D: d, L: L, N: n, Z: z, Nbr: make([]int32, n*z)}
	stride := 1
	for k := 0; k < d; k++ {
		for i := 0; i < n; i++ {
			x := (i / stride) % L
			up := i + ((x+1)%L-x)*stride
			dn := i + ((x+L-1)%L-x)*stride
			lat.Nbr[i*z+2*k] = int32(up)
			lat.Nbr[i*z+2*k+1] = int32(dn)
		}
		stride *= L
	}
	return lat, nil
}

// Bonds returns the number of bonds, d·N.
func (l *Lattice) Bonds() int { return l.D * l.N }

// Field returns h_i = Σ_{j nn i} s_j.
func (l *Lattice) Field(s []int8, i int) int {
	h := 0
	for _, j := range l.Nbr[i*l.Z : (i+1)*l.Z] {
		h += int(s[j])
	}
	return h
}
