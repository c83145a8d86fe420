// Package rng holds the project's random number generator.
package rng

import (
	"math"
	"math/bits"
)

// Rand is xoshiro256** (D. Blackman and S. Vigna, "Scrambled linear
// pseudorandom number generators", ACM TOMS 47 (2021)), a small value type so
// that its state stays in registers in the hot loops.
type Rand struct{ s0, s1, s2, s3 uint64 }

// NewRand seeds the generator from seed through splitmix64, as its authors
// recommend.
func NewRand(seed uint64) Rand {
	var r Rand
	next := func() uint64 {
		seed += 0x9e3779b97f4a7c15
		z := seed
		z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
		z = (z ^ (z >> 27)) * 0x94d049bb133111eb
		return z ^ (z >> 31)
	}
	r.s0, r.s1, r.s2, r.s3 = next(), next(), next(), next()
	return r
}

// Uint64 returns 64 random bits.
func (r *Rand) Uint64() uint64 {
	result := bits.RotateLeft64(r.s1*5, 7) * 9
	t := r.s1 << 17
	r.s2 ^= r.s0
	r.s3 ^= r.s1
	r.s1 ^= r.s2
	r.s0 ^= r.s3
	r.s2 ^= t
	r.s3 = bits.RotateLeft64(r.s3, 45)
	return result
}

// Intn returns a uniform integer in [0, n) by Lemire's multiply-shift
// (a bias below n/2^64, negligible for lattice sizes).
func (r *Rand) Intn(n int) int {
	hi, _ := bits.Mul64(r.Uint64(), uint64(n))
	return int(hi)
}

// Uniform returns an exactly uniform integer in [0, n), n ≥ 1, by
// Lemire's multiply-shift with rejection of the short interval (D. Lemire,
// "Fast random integer generation in an interval", ACM TOMS 29 (2019)):
// no bias at any n, one multiplication in the common case.
func (r *Rand) Uniform(n uint64) uint64 {
	hi, lo := bits.Mul64(r.Uint64(), n)
	if lo < n {
		thresh := -n % n
		for lo < thresh {
			hi, lo = bits.Mul64(r.Uint64(), n)
		}
	}
	return hi
}

// Float64 returns a uniform float64 in [0, 1).
func (r *Rand) Float64() float64 { return float64(r.Uint64()>>11) * 0x1p-53 }

// Norm returns a standard normal deviate (Marsaglia polar method).
func (r *Rand) Norm() float64 {
	for {
		u := 2*r.Float64() - 1
		v := 2*r.Float64() - 1
		s := u*u + v*v
		if s > 0 && s < 1 {
			return u * math.Sqrt(-2*math.Log(s)/s)
		}
	}
}
