package sampler

import (
	"fmt"
	"math"
	"math/bits"

	"strata/stages/lattice"
	"strata/stages/rng"
)

// Lanes is the number of independent replicas of a chain packed into one
// machine word: bit ℓ of word i is spin i of lane ℓ (1 = up).
const Lanes = 64

// Block is a chain's compact measurement: lane-summed counts accumulated
// over BlockSweeps consecutive sweeps.
//
// Fixed-M chains (SectorLanes, SectorBlocks) store per block 2·W counts,
// W = 2d+1: Hist[b] counts (site, lane, sweep) triples with an up spin and
// b up neighbours (local field h = 2b − 2d), Hist[W+b] those with a down
// spin. Two-sector chains (PairLanes) store one count per block: the
// (proposal, lane) pairs after which the lane was in the upper sector.

// laneState is a 64-lane spin configuration.
type laneState struct {
	lat *lattice.Lattice
	s   []uint64
}

// upCount returns the lanes' up-neighbour counts of site i as bit planes:
// lane ℓ has k = bit ℓ of c0 + 2·(bit ℓ of c1) + 4·(bit ℓ of c2) up
// neighbours (a ripple-carry add of the z neighbour words; z ≤ 6 fits
// three planes).
func (ls *laneState) upCount(i int) (c0, c1, c2 uint64) {
	z := ls.lat.Z
	for _, nb := range ls.lat.Nbr[i*z : i*z+z] {
		x := ls.s[nb]
		k0 := c0 & x
		c0 ^= x
		k1 := c1 & k0
		c1 ^= k0
		c2 ^= k1
	}
	return c0, c1, c2
}

// randomLanes fills every lane independently with a uniformly random
// configuration of nu up spins (a partial Fisher–Yates shuffle per lane).
func randomLanes(n, nu int, r *rng.Rand) []uint64 {
	s := make([]uint64, n)
	perm := make([]int32, n)
	for l := 0; l < Lanes; l++ {
		for i := range perm {
			perm[i] = int32(i)
		}
		for k := 0; k < nu; k++ {
			j := k + int(r.Uniform(uint64(n-k)))
			perm[k], perm[j] = perm[j], perm[k]
			s[perm[k]] |= 1 << l
		}
	}
	return s
}

// thresholds64 returns, for q = 1 … qmax, the uint64 thresholds of the
// acceptance probabilities e^{−c·q} (P(u < thr) = p for uniform u).
func thresholds64(c float64, qmax int) []uint64 {
	thr := make([]uint64, qmax+1)
	for q := 1; q <= qmax; q++ {
		thr[q] = threshold(math.Exp(-c * float64(q)))
	}
	return thr
}

// Decide is decide for other packages' lane chains (see there).
func Decide(und uint64, masks, thr []uint64, r *rng.Rand) uint64 { return decide(und, masks, thr, r) }

// Threshold converts an acceptance probability p ≤ 1 to the uint64
// threshold u with P(x < u) = p for a uniform 64-bit x.
func Threshold(p float64) uint64 { return threshold(p) }

// decide returns the lanes of und (undecided lanes; masks[j] holds those
// whose acceptance probability has the uint64 threshold thr[j], the masks
// disjoint) that accept: each lane compares its own uniform 64-bit number,
// drawn bit by bit from the most significant end (one random word per
// bit, shared by the lanes as independent bits), with its threshold; the
// comparison stops when every lane is decided. A lane accepts iff its
// number is below its threshold: exactly the scalar test u < thr.
func decide(und uint64, masks, thr []uint64, r *rng.Rand) uint64 {
	var acc uint64
	for bit := 63; bit >= 0 && und != 0; bit-- {
		var t uint64 // lanes whose threshold has this bit set
		for j, m := range masks {
			t |= m & -(thr[j] >> uint(bit) & 1)
		}
		u := r.Uint64()
		acc |= und & t &^ u // threshold bit 1, random bit 0: below
		und &^= t ^ u       // decided where the bits differ
	}
	return acc
}

// SectorLanes runs 64 independent fixed-magnetization chains packed in
// words (each lane starts from its own uniformly random configuration of
// the sector) and returns the compact measurement: per block of
// blockSweeps sweeps, the 2·W lane-summed local-field counts (see Block),
// row-major (Sweeps/blockSweeps rows).
//
// A sweep is N proposals. Each proposal draws one site pair {a, b}, a ≠ b,
// uniformly (by rejection: no modulo bias) for all lanes; in every lane
// where s_a ≠ s_b the two spins are exchanged with that lane's own
// Metropolis decision min(1, e^{βΔS}), ΔS = 4(u_down − u_up − bonds(a,b))
// from the bit-sliced up-neighbour counts u of the site that is up and the
// site that is down in that lane. Lanes where s_a = s_b are unchanged (the
// pair is useful in a fraction 2p(1−p) of lanes, p the fraction of up
// spins). Each lane is therefore a Metropolis chain with symmetric
// proposals (a uniformly random pair) at fixed M.
func SectorLanes(c Chain, blockSweeps int) ([]uint32, error) {
	if err := c.check(false); err != nil {
		return nil, err
	}
	if err := checkBlocks(c, blockSweeps); err != nil {
		return nil, err
	}
	return sectorLanes(c, blockSweeps, nil)
}

// checkBlocks refuses partial blocks and counts that could overflow uint32.
func checkBlocks(c Chain, blockSweeps int) error {
	if blockSweeps < 1 || c.Sweeps%blockSweeps != 0 {
		return fmt.Errorf("sampler: %d sweeps are not whole blocks of %d", c.Sweeps, blockSweeps)
	}
	if uint64(c.Lat.N)*Lanes*uint64(blockSweeps) >= 1<<32 {
		return fmt.Errorf("sampler: %d sites × %d lanes × %d sweeps per block overflow a 32-bit count; lower block_sweeps", c.Lat.N, Lanes, blockSweeps)
	}
	return nil
}

// sectorLanes is SectorLanes with an optional hook called with the words
// after every measured sweep (tests).
func sectorLanes(c Chain, blockSweeps int, hook func(s []uint64)) ([]uint32, error) {
	lat := c.Lat
	n, z, d := lat.N, lat.Z, lat.D
	w := HistWidth(d)
	nu := (n + c.M) / 2
	r := rng.NewRand(c.Seed)
	ls := &laneState{lat: lat, s: randomLanes(n, nu, &r)}
	// q = −ΔS/4 ranges over 1 … z + 2 (bonds ≤ 2 on L = 2 lattices) for
	// moves that may be rejected; ΔS ≥ 0 is accepted outright
	qmax := 8
	thr := thresholds64(4*c.Beta, qmax)
	var act, actThr [8]uint64 // the q classes present in one proposal
	blocks := c.Sweeps / blockSweeps
	out := make([]uint32, blocks*2*w)
	var acc [14]uint64
	nbr := lat.Nbr
	total := c.Therm + c.Sweeps
	mixed := nu > 0 && nu < n
	for sweep := 0; sweep < total; sweep++ {
		for step := 0; mixed && step < n; step++ {
			a := int(r.Uniform(uint64(n)))
			b := int(r.Uniform(uint64(n - 1)))
			if b >= a {
				b++
			}
			sa, sb := ls.s[a], ls.s[b]
			x := sa ^ sb
			if x == 0 {
				continue
			}
			bonds := 0
			for _, j := range nbr[a*z : a*z+z] {
				if int(j) == b {
					bonds++
				}
			}
			a0, a1, a2 := ls.upCount(a)
			b0, b1, b2 := ls.upCount(b)
			t1, t2 := sa&^sb, sb&^sa // a up b down; a down b up
			// u: up neighbours of the site that is up, v: of the site that
			// is down; q + 7 = u + (7 − v) + bonds ∈ [1, 15] in four planes
			u0, u1, u2 := a0&t1|b0&t2, a1&t1|b1&t2, a2&t1|b2&t2
			w0, w1, w2 := ^(b0&t1 | a0&t2), ^(b1&t1 | a1&t2), ^(b2&t1 | a2&t2)
			s0 := u0 ^ w0
			cy := u0 & w0
			s1 := u1 ^ w1 ^ cy
			cy = u1&w1 | cy&(u1^w1)
			s2 := u2 ^ w2 ^ cy
			s3 := u2&w2 | cy&(u2^w2)
			for k := 0; k < bonds; k++ { // + 1 per bond
				c := s0
				s0 = ^s0
				c1 := s1 & c
				s1 ^= c
				c2 := s2 & c1
				s2 ^= c1
				s3 ^= c2
			}
			// q ≤ 0 (plane 3 clear): accepted outright; else q − 1 = low bits
			move := x &^ s3
			if und := x & s3; und != 0 {
				k := 0
				lo := [2]uint64{^s0, s0}
				mid := [2]uint64{^s1, s1}
				hi := [2]uint64{^s2 & und, s2 & und}
				for q := 1; q <= qmax; q++ {
					if m := lo[(q-1)&1] & mid[(q-1)>>1&1] & hi[(q-1)>>2]; m != 0 {
						act[k], actThr[k] = m, thr[q]
						k++
					}
				}
				masks, mthr := act[:k], actThr[:k]
				move |= decide(und, masks, mthr, &r)
			}
			ls.s[a] ^= move
			ls.s[b] ^= move
		}
		if sweep < c.Therm {
			continue
		}
		t := sweep - c.Therm
		ls.histogram(&acc)
		if hook != nil {
			hook(ls.s)
		}
		if (t+1)%blockSweeps == 0 {
			row := out[(t/blockSweeps)*2*w : (t/blockSweeps+1)*2*w]
			for k := 0; k < w; k++ {
				row[k] = uint32(acc[k])
				row[w+k] = uint32(acc[7+k])
			}
			acc = [14]uint64{}
		}
	}
	return out, nil
}

// histogram adds to acc[b] the (site, lane) pairs with an up spin and b up
// neighbours and to acc[7+b] those with a down spin.
func (ls *laneState) histogram(acc *[14]uint64) {
	z := ls.lat.Z
	for i, si := range ls.s {
		c0, c1, c2 := ls.upCount(i)
		for k := 0; k <= z; k++ {
			m := oneHot(k, c0, c1, c2)
			acc[k] += uint64(bits.OnesCount64(si & m))
			acc[7+k] += uint64(bits.OnesCount64(^si & m))
		}
	}
}

// oneHot returns the lanes whose count (bit planes c0, c1, c2) equals k.
func oneHot(k int, c0, c1, c2 uint64) uint64 {
	m := ^uint64(0)
	if k&1 != 0 {
		m &= c0
	} else {
		m &^= c0
	}
	if k&2 != 0 {
		m &= c1
	} else {
		m &^= c1
	}
	if k&4 != 0 {
		m &= c2
	} else {
		m &^= c2
	}
	return m
}

// PairLanes runs 64 independent two-sector chains on {M, M−2} packed in
// words (each lane starts from its own uniformly random configuration of
// sector M−2) and returns, per block of blockSweeps sweeps, two counts:
// the (proposal, lane) pairs after which the lane was in sector M, and all
// (proposal, lane) pairs (N·64·blockSweeps), row-major.
//
// A sweep is N proposals. Each proposal draws one site i uniformly for all
// lanes; a lane in M may flip i if it is up, a lane in M−2 if it is down
// (other lanes would leave the pair), with its own Metropolis decision
// min(1, e^{βΔS}), ΔS = −2 s_i h_i, from the bit-sliced up-neighbour
// count. D(M)/D(M−2) = x̄/(1−x̄), x̄ the mean fraction of time in M.
func PairLanes(c Chain, blockSweeps int) ([]uint32, error) {
	if err := c.check(true); err != nil {
		return nil, err
	}
	if err := checkBlocks(c, blockSweeps); err != nil {
		return nil, err
	}
	lat := c.Lat
	n, d := lat.N, lat.D
	r := rng.NewRand(c.Seed)
	ls := &laneState{lat: lat, s: randomLanes(n, (n+c.M-2)/2, &r)}
	thr := thresholds64(4*c.Beta, d)
	var inUpper uint64 // lanes now in sector M
	out := make([]uint32, 2*(c.Sweeps/blockSweeps))
	var acc uint64
	var act, actThr [8]uint64
	total := c.Therm + c.Sweeps
	for sweep := 0; sweep < total; sweep++ {
		var count uint64
		for step := 0; step < n; step++ {
			i := int(r.Uniform(uint64(n)))
			si := ls.s[i]
			up := si & inUpper   // up spins that may flip down
			dn := ^si &^ inUpper // down spins that may flip up
			if up|dn != 0 {
				c0, c1, c2 := ls.upCount(i)
				// up spin: ΔS = 4(d − u); down spin: ΔS = 4(u − d); q = −ΔS/4
				var sure uint64
				k := 0
				for u := 0; u <= 2*d; u++ {
					m := oneHot(u, c0, c1, c2)
					mu, md := m&up, m&dn
					if u <= d {
						sure |= mu
					} else if mu != 0 {
						act[k], actThr[k] = mu, thr[u-d]
						k++
					}
					if u >= d {
						sure |= md
					} else if md != 0 {
						act[k], actThr[k] = md, thr[d-u]
						k++
					}
				}
				move := sure
				if und := (up | dn) &^ sure; und != 0 {
					move |= decide(und, act[:k], actThr[:k], &r)
				}
				ls.s[i] ^= move
				inUpper ^= move
			}
			count += uint64(bits.OnesCount64(inUpper))
		}
		if sweep < c.Therm {
			continue
		}
		t := sweep - c.Therm
		acc += count
		if (t+1)%blockSweeps == 0 {
			out[2*(t/blockSweeps)] = uint32(acc)
			out[2*(t/blockSweeps)+1] = uint32(n * Lanes * blockSweeps)
			acc = 0
		}
	}
	return out, nil
}
