package links

import (
	"fmt"
	"math"
	"math/bits"

	"strata/stages/rng"
	"strata/stages/sampler"
)

// Lanes is the number of independent replicas of the link chain packed in
// one machine word: bit ℓ of word b is the occupation of bond b in lane ℓ.
const Lanes = 64

// planes counts, per lane, the set bits of words as bit planes
// (little-endian: count = Σ_p 2^p · bit of planes[p]).
func planes(words []uint64, out []uint64) []uint64 {
	out = out[:0]
	for _, x := range words {
		carry := x
		for p := 0; carry != 0; p++ {
			if p == len(out) {
				out = append(out, 0)
			}
			c := out[p] & carry
			out[p] ^= carry
			carry = c
		}
	}
	return out
}

// equal returns the lanes whose count (planes) equals v.
func equal(pl []uint64, v int) uint64 {
	if v < 0 || v >= 1<<len(pl) {
		return 0
	}
	m := ^uint64(0)
	for p, x := range pl {
		if v>>p&1 != 0 {
			m &= x
		} else {
			m &^= x
		}
	}
	return m
}

// RunLanes runs 64 independent fixed-n link chains packed in words (each
// lane starts from its own random placement of n/2 disjoint bonds) and
// returns, per measured sweep, the lane averages of A = Σ_{even-even bonds}
// t^{1−2k_b} and B = #{odd-odd bonds}, row-major (sweeps × 2): the same
// measurement as Run, averaged over 64 lanes. The moves and the sweep are
// those of Chain (single bonds with one odd end, plaquettes, winding
// lines, bond pairs, segments), each proposed once for all lanes and
// decided per lane: a lane flips when the move keeps its n and it accepts
// with min(1, t^{Δ|k|}) by its own uniform number (sampler.Decide, exact
// against the threshold). With TwoSector the lanes run on {n−2, n} (each
// with its own "in the upper sector" bit; moves that add or remove a pair
// of monomers are kept when they stay in the pair) and RunLanes returns
// per sweep the lane average of the fraction of bond proposals after
// which the lane was in n.
func (c Chain) RunLanes() ([]float64, error) { return c.runLanes(nil) }

// runLanes is RunLanes with an optional hook called with the bond and
// parity words after every measured sweep (tests).
func (c Chain) runLanes(hook func(k, odd []uint64)) ([]float64, error) {
	lt := c.Lat
	t, err := c.check()
	if err != nil {
		return nil, err
	}
	r := rng.NewRand(c.Seed)
	nb := len(lt.Ends)
	k := make([]uint64, nb)
	odd := make([]uint64, lt.N)
	start := c.Monomers
	if c.TwoSector {
		start -= 2 // every lane starts in the lower sector
	}
	if err := initialLanes(lt, k, odd, start, &r); err != nil {
		return nil, err
	}
	// upper: the lanes in sector n (two-sector chains; fixed n: all)
	upper := ^uint64(0)
	if c.TwoSector {
		upper = 0
	}
	// keeps returns the lanes where a move changing the parities of the
	// sites in toggled keeps the chain in its sectors: fixed n, or in a
	// two-sector chain n → n ± 2 from the lower (upper) sector.
	var oddWords []uint64
	var pl2 []uint64
	keeps := func(toggled []int32) (stay, up, down uint64) {
		oddWords = oddWords[:0]
		for _, x := range toggled {
			oddWords = append(oddWords, odd[x])
		}
		pl2 = planes(oddWords, pl2)
		h := len(toggled) / 2
		stay = equal(pl2, h) // as many odd as even toggled sites: n kept
		if c.TwoSector {
			up = equal(pl2, h-1) &^ upper  // one more even: n + 2
			down = equal(pl2, h+1) & upper // one more odd: n − 2
		}
		return stay, up, down
	}
	inUpper := 0 // (bond proposal, lane) pairs ending in the upper sector, this sweep
	// thr[d] = threshold of t^d, d = Δ|k| > 0
	maxD := max(lt.L, 4, 16)
	thr := make([]uint64, maxD+1)
	for d := 1; d <= maxD; d++ {
		thr[d] = sampler.Threshold(math.Pow(t, float64(d)))
	}
	var masks, mthr, pl, words []uint64
	// flipPath flips the closed or open path of bonds in the lanes of allowed
	// where it is accepted: Δ|k| = len − 2·occupied.
	flipPath := func(path []int32, allowed uint64) uint64 {
		if allowed == 0 {
			return 0
		}
		words = words[:0]
		for _, b := range path {
			words = append(words, k[b]&allowed)
		}
		pl = planes(words, pl)
		sure := uint64(0)
		masks, mthr = masks[:0], mthr[:0]
		for occ := 0; occ <= len(path); occ++ {
			m := equal(pl, occ) & allowed
			if m == 0 {
				continue
			}
			if d := len(path) - 2*occ; d <= 0 {
				sure |= m
			} else {
				masks, mthr = append(masks, m), append(mthr, thr[d])
			}
		}
		acc := sure
		if und := allowed &^ sure; und != 0 {
			acc |= sampler.Decide(und, masks, mthr, &r)
		}
		for _, b := range path {
			k[b] ^= acc
		}
		return acc
	}
	z := 2 * lt.D
	path := make([]int32, 0, lt.L)
	segments, maxLen := lt.segments(), min(lt.L-1, 16)
	pair, one := make([]int32, 2), make([]int32, 1)
	var toggled []int32
	ends2 := make([]int32, 2)
	// move flips path (whose parities change at the sites in ends) in the
	// lanes where that keeps the sectors and Metropolis accepts
	move := func(path, ends []int32) {
		stay, up, down := keeps(ends)
		acc := flipPath(path, stay|up|down)
		for _, x := range ends {
			odd[x] ^= acc
		}
		upper ^= acc & (up | down)
	}
	sweep := func() {
		inUpper = 0
		for p := 0; p < nb; p++ {
			b := int32(r.Uniform(uint64(nb)))
			e := lt.Ends[b]
			if e[0] != e[1] {
				one[0] = b
				ends2[0], ends2[1] = e[0], e[1]
				move(one, ends2)
			}
			inUpper += bits.OnesCount64(upper)
		}
		for p := 0; p < len(lt.Plaq); p++ {
			flipPath(lt.Plaq[r.Uniform(uint64(len(lt.Plaq)))][:], ^uint64(0))
		}
		for a := range lt.Lines {
			flipPath(lt.Lines[a][r.Uniform(uint64(len(lt.Lines[a])))], ^uint64(0))
		}
		for p := 0; p < lt.N/2; p++ {
			b1, b2 := int32(r.Uniform(uint64(nb))), int32(r.Uniform(uint64(nb)))
			if b1 == b2 {
				continue
			}
			ends := [4]int32{lt.Ends[b1][0], lt.Ends[b1][1], lt.Ends[b2][0], lt.Ends[b2][1]}
			// the sites toggled an odd number of times; n is kept in the
			// lanes where exactly half of them are odd
			toggled = toggled[:0]
			for i, x := range ends {
				times := 0
				for _, y := range ends {
					if y == x {
						times++
					}
				}
				first := true
				for _, y := range ends[:i] {
					first = first && y != x
				}
				if times%2 == 1 && first {
					toggled = append(toggled, x)
				}
			}
			pair[0], pair[1] = b1, b2
			move(pair, toggled)
		}
		for p := 0; p < segments; p++ {
			s := int32(r.Uniform(uint64(lt.N)))
			dir := int(r.Uniform(uint64(z)))
			ln := 1 + int(r.Uniform(uint64(maxLen)))
			var e int32
			path, e = lt.segment(s, dir, ln, path[:0])
			if s == e {
				continue
			}
			ends2[0], ends2[1] = s, e
			move(path, ends2)
		}
	}
	for s := 0; s < c.Therm; s++ {
		sweep()
	}
	if c.TwoSector {
		out := make([]float64, 0, c.Sweeps)
		for s := 0; s < c.Sweeps; s++ {
			sweep()
			out = append(out, float64(inUpper)/float64(nb*Lanes))
		}
		return out, nil
	}
	out := make([]float64, 0, 2*c.Sweeps)
	for s := 0; s < c.Sweeps; s++ {
		sweep()
		var c0, c1, cb int
		for b, e := range lt.Ends {
			ee := ^odd[e[0]] &^ odd[e[1]]
			c1 += bits.OnesCount64(ee & k[b])
			c0 += bits.OnesCount64(ee &^ k[b])
			cb += bits.OnesCount64(odd[e[0]] & odd[e[1]])
		}
		out = append(out, (float64(c1)/t+float64(c0)*t)/Lanes, float64(cb)/Lanes)
		if hook != nil {
			hook(k, odd)
		}
	}
	return out, nil
}

// initialLanes places, in every lane independently, n/2 disjoint bonds by
// a greedy pass over the bonds in a random order (a random maximal
// matching), falling back to bond order when the random pass places too
// few; thermalization then randomizes.
func initialLanes(lt *Lattice, k, odd []uint64, n int, r *rng.Rand) error {
	nb := len(lt.Ends)
	order := make([]int, nb)
	kk := make([]bool, nb)
	oo := make([]bool, lt.N)
	for l := 0; l < Lanes; l++ {
		for i := range order {
			order[i] = i
		}
		for i := nb - 1; i > 0; i-- {
			j := int(r.Uniform(uint64(i + 1)))
			order[i], order[j] = order[j], order[i]
		}
		place := func(order []int) bool {
			clear(kk)
			clear(oo)
			placed := 0
			for _, b := range order {
				if placed == n/2 {
					break
				}
				e := lt.Ends[b]
				if e[0] == e[1] || oo[e[0]] || oo[e[1]] {
					continue
				}
				kk[b], oo[e[0]], oo[e[1]] = true, true, true
				placed++
			}
			return placed == n/2
		}
		if !place(order) {
			for i := range order {
				order[i] = i
			}
			if !place(order) {
				return fmt.Errorf("links: cannot place %d monomers on %d sites", n, lt.N)
			}
		}
		for b, x := range kk {
			if x {
				k[b] |= 1 << l
			}
		}
		for i, x := range oo {
			if x {
				odd[i] |= 1 << l
			}
		}
	}
	return nil
}
