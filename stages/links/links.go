// Package links samples the high-temperature (link and monomer)
// representation of the Ising model on a periodic L^d lattice: link
// configurations k ⊆ bonds with weight t^{|k|}, t = tanh β, in a sector of
// fixed n, the number of odd-degree sites (monomers). Its density of states
// D_β(n) = Σ_{k: n odd sites} t^{|k|} gives the partition function at
// imaginary field in the dual form sign(θ) = cos^N θ Σ_n (−1)^{n/2}
// (D(n)/D(0)) tanⁿθ (expansion e^{βss'} = cosh β (1 + t ss'), e^{iθs} =
// cos θ (1 + i s tan θ); R. B. Griffiths, C. A. Hurst, S. Sherman, J. Math.
// Phys. 11, 790 (1970), from memory; the worm picture: N. Prokof'ev,
// B. Svistunov, Phys. Rev. Lett. 87, 160601 (2001)).
//
// The ratio D(n+2)/D(n) follows from the two-sided identity (checked by
// enumeration in ../shared/PHYSICS.md)
//
//	D(n+2)/D(n) = ⟨Σ_{bonds with both ends even} t^{1−2k_b}⟩_n / ⟨#bonds with both ends odd⟩_{n+2},
//
// so a chain at fixed n measures A = Σ_{even-even} t^{1−2k} (the numerator
// for n → n+2) and B = #{odd-odd bonds} (the denominator for n−2 → n).
package links

import (
	"fmt"
	"math"
	"slices"

	"strata/stages/lattice"
	"strata/stages/rng"
)

// Lattice is the bond structure the chain needs.
type Lattice struct {
	D, L, N int
	Ends    [][2]int32 // bond b joins Ends[b][0] and Ends[b][1] (d·N bonds)
	Plaq    [][4]int32 // bonds of each elementary plaquette (d ≥ 2)
	Lines   [][][]int32
	// Lines[a] lists, for axis a, every line of L bonds along a (a
	// winding loop); flipping one toggles the winding parity along a.
	// Nbr[i*2d+2a] and Nbr[i*2d+2a+1] are the +a and −a neighbours of i.
	Nbr []int32
}

// NewLattice builds the bonds, plaquettes and winding lines of L^d.
func NewLattice(d, l int) (*Lattice, error) {
	lat, err := lattice.New(d, l)
	if err != nil {
		return nil, err
	}
	n := lat.N
	out := &Lattice{D: d, L: l, N: n, Nbr: lat.Nbr}
	// bond (i, a): from site i to its +a neighbour
	bond := func(i, a int) int32 { return int32(i*d + a) }
	out.Ends = make([][2]int32, n*d)
	for i := 0; i < n; i++ {
		for a := 0; a < d; a++ {
			out.Ends[i*d+a] = [2]int32{int32(i), lat.Nbr[i*lat.Z+2*a]}
		}
	}
	plus := func(i, a int) int { return int(lat.Nbr[i*lat.Z+2*a]) }
	for i := 0; i < n; i++ {
		for a := 0; a < d; a++ {
			for c := a + 1; c < d; c++ {
				ia, ic := plus(i, a), plus(i, c)
				out.Plaq = append(out.Plaq, [4]int32{bond(i, a), bond(ia, c), bond(ic, a), bond(i, c)})
			}
		}
	}
	out.Lines = make([][][]int32, d)
	stride := 1
	for a := 0; a < d; a++ {
		for i := 0; i < n; i++ {
			if (i/stride)%l != 0 {
				continue // one line per site of the slice x_a = 0
			}
			var line []int32
			j := i
			for s := 0; s < l; s++ {
				line = append(line, bond(j, a))
				j = plus(j, a)
			}
			out.Lines[a] = append(out.Lines[a], line)
		}
		stride *= l
	}
	return out, nil
}

// segments is the number of segment proposals per sweep.
func (lt *Lattice) segments() int {
	if lt.L < 2 {
		return 0
	}
	return (lt.N + 3) / 4
}

// segment appends to path the bonds of the straight path of ln bonds from
// site s in direction dir (axis dir/2, sign dir%2) and returns it with its
// end site.
func (lt *Lattice) segment(s int32, dir, ln int, path []int32) ([]int32, int32) {
	z := 2 * lt.D
	e := s
	for q := 0; q < ln; q++ {
		nx := lt.Nbr[int(e)*z+dir]
		if dir%2 == 0 {
			path = append(path, e*int32(lt.D)+int32(dir/2))
		} else {
			path = append(path, nx*int32(lt.D)+int32(dir/2))
		}
		e = nx
	}
	return path, e
}

// Proposals returns the number of proposals in one sweep (see Chain).
func (lt *Lattice) Proposals() int {
	return len(lt.Ends) + len(lt.Plaq) + len(lt.Lines) + lt.N/2 + lt.segments()
}

// Chain is a Metropolis chain at fixed n. A sweep is
//   - d·N single-bond proposals (a bond with exactly one odd end is
//     flipped, which moves a monomer; other bonds would change n and are
//     skipped),
//   - N·d(d−1)/2 plaquette proposals and one winding-line proposal per
//     axis (closed loops: every parity unchanged),
//   - N/2 bond-pair proposals (two uniformly random bonds flipped
//     together, kept only when n is unchanged: this moves a short dimer
//     — two monomers joined by a link — anywhere at once), and
//   - ⌈N/4⌉ segment proposals (a random site, axis, direction and
//     length 1 … min(L−1, 16); the straight path of bonds is flipped,
//     which toggles only its two end sites, kept when exactly one end was
//     odd: a monomer jumps along the axis, past others).
//
// Every proposal is symmetric and each flip is accepted with
// min(1, t^{Δ|k|}). The local moves alone make monomers diffuse, and in
// d = 1 they cannot pass each other: the autocorrelation of B then has a
// power-law tail that the Γ-method's window cuts (errors ~1.5× too small
// on 64-rings); the pair and segment moves remove it.
type Chain struct {
	Lat           *Lattice
	Beta          float64
	Monomers      int // n: even, 0 ≤ n ≤ N
	Therm, Sweeps int
	Seed          uint64
	// DropWinding lists axes whose winding-line moves are left out (for
	// the test that shows the chain is then not ergodic at n = 0).
	DropWinding []int
	// TwoSector runs the chain on the union of the sectors Monomers−2 and
	// Monomers (Monomers ≥ 2): bond flips with both ends even (n → n+2)
	// or both odd (n → n−2) are proposed too and rejected only when they
	// would leave the pair. Run then returns one column per sweep: the
	// fraction of bond proposals after which the chain was in the upper
	// sector, whose mean x̄ gives D(n)/D(n−2) = x̄/(1−x̄).
	TwoSector bool
}

// check validates the chain and returns t = tanh β.
func (c Chain) check() (float64, error) {
	if c.Monomers%2 != 0 || c.Monomers < 0 || c.Monomers > c.Lat.N {
		return 0, fmt.Errorf("links: %d monomers on %d sites (need even, 0 … N)", c.Monomers, c.Lat.N)
	}
	if c.TwoSector && c.Monomers < 2 {
		return 0, fmt.Errorf("links: a two-sector chain needs an upper sector n ≥ 2, got %d", c.Monomers)
	}
	t := math.Tanh(c.Beta)
	if !(t > 0) {
		return 0, fmt.Errorf("links: β = %v gives t = tanh β = %v (need β > 0)", c.Beta, t)
	}
	return t, nil
}

// Run returns, per measured sweep, A = Σ_{even-even bonds} t^{1−2k_b} and
// B = #{odd-odd bonds}, row-major (sweeps × 2); with TwoSector, the
// fraction of time in the upper sector (sweeps × 1).
func (c Chain) Run() ([]float64, error) {
	lt := c.Lat
	t, err := c.check()
	if err != nil {
		return nil, err
	}
	r := rng.NewRand(c.Seed)
	nb := len(lt.Ends)
	k := make([]bool, nb)
	odd := make([]bool, lt.N)
	start, cur := c.Monomers, c.Monomers // cur: the number of odd sites now
	if c.TwoSector {
		start, cur = c.Monomers-2, c.Monomers-2
	}
	if err := initial(lt, k, odd, start); err != nil {
		return nil, err
	}
	upper := 0 // bond proposals that ended in the upper sector, this sweep
	flip := func(b int32) {
		k[b] = !k[b]
		e := lt.Ends[b]
		odd[e[0]] = !odd[e[0]]
		odd[e[1]] = !odd[e[1]]
	}
	accept := func(delta int) bool { // Δ|k|
		if delta <= 0 {
			return true
		}
		return r.Float64() < math.Pow(t, float64(delta))
	}
	// flipLoop proposes to flip every bond of a closed loop (a plaquette or
	// a winding line): each site on it has two of its bonds, so no parity
	// changes; Δ|k| is the number of empty bonds minus occupied ones.
	flipLoop := func(bonds []int32) {
		d := 0
		for _, b := range bonds {
			if k[b] {
				d--
			} else {
				d++
			}
		}
		if accept(d) {
			for _, b := range bonds {
				k[b] = !k[b]
			}
		}
	}
	// flipPath flips the path of bonds in bonds if that keeps the pair of
	// sectors (fixed n: exactly one end odd), with Metropolis acceptance.
	flipPath := func(bonds []int32, a, b int32) {
		dn := 0
		for _, s := range [2]int32{a, b} {
			if odd[s] {
				dn -= 2
			} else {
				dn += 2
			}
		}
		dn /= 2
		if a == b {
			dn = 0
		}
		if dn != 0 && !(c.TwoSector && cur+dn >= c.Monomers-2 && cur+dn <= c.Monomers) {
			return
		}
		d := 0
		for _, x := range bonds {
			if k[x] {
				d--
			} else {
				d++
			}
		}
		if accept(d) {
			for _, x := range bonds {
				k[x] = !k[x]
			}
			if a != b {
				odd[a], odd[b] = !odd[a], !odd[b]
			}
			cur += dn
		}
	}
	// flipPair flips bonds b1 and b2 together if that keeps the pair of
	// sectors, with Metropolis acceptance.
	flipPair := func(b1, b2 int32) {
		ends := [4]int32{lt.Ends[b1][0], lt.Ends[b1][1], lt.Ends[b2][0], lt.Ends[b2][1]}
		dn := 0
		for _, x := range ends {
			times := 0
			for _, y := range ends {
				if y == x {
					times++
				}
			}
			if times%2 == 0 {
				continue // toggled twice: unchanged
			}
			if odd[x] {
				dn--
			} else {
				dn++
			}
		}
		if dn != 0 && !(c.TwoSector && cur+dn >= c.Monomers-2 && cur+dn <= c.Monomers) {
			return
		}
		d := 0
		for _, x := range [2]int32{b1, b2} {
			if k[x] {
				d--
			} else {
				d++
			}
		}
		if accept(d) {
			flip(b1)
			flip(b2)
			cur += dn
		}
	}
	z := 2 * lt.D
	path := make([]int32, 0, lt.L)
	segments, maxLen := lt.segments(), min(lt.L-1, 16)
	sweep := func() {
		upper = 0
		for p := 0; p < nb; p++ {
			b := int32(r.Intn(nb))
			e := lt.Ends[b]
			dn := 0
			if e[0] != e[1] && odd[e[0]] == odd[e[1]] {
				dn = 2 // both even: n+2; both odd: n−2
				if odd[e[0]] {
					dn = -2
				}
			}
			switch {
			case dn == 0 && e[0] != e[1]:
			case c.TwoSector && cur+dn >= c.Monomers-2 && cur+dn <= c.Monomers:
			default:
				if cur == c.Monomers {
					upper++
				}
				continue // would leave the sector (or the pair)
			}
			d := 1
			if k[b] {
				d = -1
			}
			if accept(d) {
				flip(b)
				cur += dn
			}
			if cur == c.Monomers {
				upper++
			}
		}
		for p := 0; p < len(lt.Plaq); p++ {
			flipLoop(lt.Plaq[r.Intn(len(lt.Plaq))][:])
		}
		for a := range lt.Lines {
			if !slices.Contains(c.DropWinding, a) {
				flipLoop(lt.Lines[a][r.Intn(len(lt.Lines[a]))])
			}
		}
		for p := 0; p < lt.N/2; p++ {
			b1, b2 := int32(r.Intn(nb)), int32(r.Intn(nb))
			if b1 == b2 {
				continue
			}
			flipPair(b1, b2)
		}
		for p := 0; p < segments; p++ {
			s := int32(r.Intn(lt.N))
			dir := r.Intn(z) // axis dir/2, sign dir%2
			ln := 1 + r.Intn(maxLen)
			var e int32
			path, e = lt.segment(s, dir, ln, path[:0])
			flipPath(path, s, e)
		}
	}
	for s := 0; s < c.Therm; s++ {
		sweep()
	}
	if c.TwoSector {
		out := make([]float64, 0, c.Sweeps)
		for s := 0; s < c.Sweeps; s++ {
			sweep()
			out = append(out, float64(upper)/float64(nb))
		}
		return out, nil
	}
	out := make([]float64, 0, 2*c.Sweeps)
	for s := 0; s < c.Sweeps; s++ {
		sweep()
		a, bcount := 0.0, 0.0
		for b, e := range lt.Ends {
			switch {
			case !odd[e[0]] && !odd[e[1]]:
				if k[b] {
					a += 1 / t
				} else {
					a += t
				}
			case odd[e[0]] && odd[e[1]]:
				bcount++
			}
		}
		out = append(out, a, bcount)
	}
	return out, nil
}

// initial sets a configuration with exactly n odd sites: n/2 disjoint
// bonds chosen greedily in bond order (a maximal matching, enough on the
// periodic lattices here); thermalization then randomizes it.
func initial(lt *Lattice, k, odd []bool, n int) error {
	placed := 0
	for b, e := range lt.Ends {
		if placed == n/2 {
			break
		}
		if k[b] || odd[e[0]] || odd[e[1]] {
			continue
		}
		k[b] = true
		odd[e[0]], odd[e[1]] = true, true
		placed++
	}
	if placed < n/2 {
		return fmt.Errorf("links: cannot place %d monomers on %d sites", n, lt.N)
	}
	return nil
}
