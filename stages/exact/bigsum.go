package exact

import (
	"math"
	"math/big"
)

func newF(prec uint) *big.Float { return new(big.Float).SetPrec(prec) }

// BigExp returns e^x at precision prec: x is halved r times until
// |x/2^r| < 1/2, the Taylor series is summed until the terms fall below
// 2^−(prec+10), and the result is squared r times.
func BigExp(x *big.Float, prec uint) *big.Float {
	wp := prec + 64
	y := newF(wp).Set(x)
	r := 0
	half := big.NewFloat(0.5)
	for new(big.Float).Abs(y).Cmp(half) > 0 {
		y.Quo(y, big.NewFloat(2))
		r++
	}
	sum := newF(wp).SetInt64(1)
	term := newF(wp).SetInt64(1)
	eps := newF(wp).SetMantExp(big.NewFloat(1), -int(wp)-10)
	for k := 1; k < 100000; k++ {
		term.Mul(term, y)
		term.Quo(term, newF(wp).SetInt64(int64(k)))
		sum.Add(sum, term)
		if new(big.Float).Abs(term).Cmp(eps) < 0 {
			break
		}
	}
	for ; r > 0; r-- {
		sum.Mul(sum, sum)
	}
	return newF(prec).Set(sum)
}

// BigCosSin returns cos x and sin x at precision prec by their Taylor
// series (x should be of moderate size, |x| ≲ 10).
func BigCosSin(x *big.Float, prec uint) (c, s *big.Float) {
	wp := prec + 64
	x2 := newF(wp).Mul(x, x)
	eps := newF(wp).SetMantExp(big.NewFloat(1), -int(wp)-10)
	c = newF(wp).SetInt64(1)
	s = newF(wp).Set(x)
	tc := newF(wp).SetInt64(1)
	ts := newF(wp).Set(x)
	for k := 1; k < 100000; k++ {
		tc.Mul(tc, x2)
		tc.Quo(tc, newF(wp).SetInt64(int64((2*k-1)*(2*k))))
		tc.Neg(tc)
		ts.Mul(ts, x2)
		ts.Quo(ts, newF(wp).SetInt64(int64((2*k)*(2*k+1))))
		ts.Neg(ts)
		c.Add(c, tc)
		s.Add(s, ts)
		if new(big.Float).Abs(tc).Cmp(eps) < 0 && new(big.Float).Abs(ts).Cmp(eps) < 0 {
			break
		}
	}
	return newF(prec).Set(c), newF(prec).Set(s)
}

// RhoFunc returns ρ(M) for M = −N..N (index (M+N)/2) at a precision.
type RhoFunc func(prec uint) []*big.Float

// RingRho returns the exact ring density of states in high precision from
// the domain count (N/k)·C(n−1, k−1)·C(N−n−1, k−1), S = N − 4k.
func RingRho(n int, beta float64) RhoFunc {
	return func(prec uint) []*big.Float {
		eb := BigExp(newF(prec).SetFloat64(beta), prec)
		ebInv := newF(prec).Quo(newF(prec).SetInt64(1), eb)
		pow := func(s int) *big.Float { // e^{βs}
			base := eb
			if s < 0 {
				base, s = ebInv, -s
			}
			r := newF(prec).SetInt64(1)
			b := newF(prec).Set(base)
			for ; s > 0; s >>= 1 {
				if s&1 == 1 {
					r.Mul(r, b)
				}
				b.Mul(b, b)
			}
			return r
		}
		out := make([]*big.Float, n+1)
		for up := 0; up <= n; up++ {
			if up == 0 || up == n {
				out[up] = pow(n)
				continue
			}
			sum := newF(prec)
			for k := 1; k <= up && k <= n-up; k++ {
				cnt := new(big.Int).Binomial(int64(up-1), int64(k-1))
				cnt.Mul(cnt, new(big.Int).Binomial(int64(n-up-1), int64(k-1)))
				cnt.Mul(cnt, big.NewInt(int64(n)))
				cnt.Quo(cnt, big.NewInt(int64(k))) // exact: N/k·C·C is an integer count
				t := newF(prec).SetInt(cnt)
				sum.Add(sum, t.Mul(t, pow(n-4*k)))
			}
			out[up] = sum
		}
		return out
	}
}

// Rho returns ρ(M) = Σ_S g(S, M) e^{βS} in high precision.
func (c *Counts) Rho(beta float64) RhoFunc {
	return func(prec uint) []*big.Float {
		eb := BigExp(newF(prec).SetFloat64(beta), prec)
		// powers e^{βS} for S = −Bonds..Bonds
		pw := make([]*big.Float, 2*c.Bonds+1)
		pw[c.Bonds] = newF(prec).SetInt64(1)
		inv := newF(prec).Quo(newF(prec).SetInt64(1), eb)
		for j := 1; j <= c.Bonds; j++ {
			pw[c.Bonds+j] = newF(prec).Mul(pw[c.Bonds+j-1], eb)
			pw[c.Bonds-j] = newF(prec).Mul(pw[c.Bonds-j+1], inv)
		}
		out := make([]*big.Float, c.N+1)
		for k := range out {
			sum := newF(prec)
			for si, row := range c.G {
				if row[k] != 0 {
					t := newF(prec).SetUint64(row[k])
					sum.Add(sum, t.Mul(t, pw[2*si]))
				}
			}
			out[k] = sum
		}
		return out
	}
}

// fourier returns Z(θ)/Z(0) and Σ M ρ sin(θM)/(N Z) at one precision.
func fourier(rho []*big.Float, n int, theta float64, prec uint) (sign, imM *big.Float) {
	th := newF(prec).SetFloat64(theta)
	c2, s2 := BigCosSin(newF(prec).Mul(th, newF(prec).SetInt64(2)), prec)
	m0 := 2 - n%2
	c, s := BigCosSin(newF(prec).Mul(th, newF(prec).SetInt64(int64(m0))), prec)
	z := newF(prec)
	z0 := newF(prec)
	zs := newF(prec)
	if n%2 == 0 {
		z.Set(rho[n/2])
		z0.Set(rho[n/2])
	}
	tmp := newF(prec)
	for m := m0; m <= n; m += 2 {
		r := rho[(m+n)/2]
		z.Add(z, tmp.Mul(r, c))
		z.Add(z, tmp.Mul(r, c))
		z0.Add(z0, r)
		z0.Add(z0, r)
		t := newF(prec).Mul(r, s)
		t.Mul(t, newF(prec).SetInt64(int64(2*m)))
		zs.Add(zs, t)
		nc := newF(prec).Mul(c, c2)
		nc.Sub(nc, tmp.Mul(s, s2))
		ns := newF(prec).Mul(s, c2)
		ns.Add(ns, tmp.Mul(c, s2))
		c, s = nc, ns
	}
	sign = newF(prec).Quo(z, z0)
	imM = newF(prec).Quo(zs, z)
	imM.Quo(imM, newF(prec).SetInt64(int64(n)))
	return sign, imM
}

// HighPrecision evaluates sign(θ) = Z(iθ)/Z(0) and Im m(θ) by the Fourier
// sum in math/big. The needed precision cannot be known before Z is: the
// sum is done at a working precision and again at twice that, and accepted
// when both agree to relative tolerance tol; the precision doubles up to
// maxPrec bits, beyond which NaN is returned rather than an unverified
// number.
func HighPrecision(rho RhoFunc, n int, theta, tol float64, maxPrec uint) (sign, imM float64) {
	prec := uint(128)
	cache := map[uint][2]*big.Float{}
	eval := func(p uint) [2]*big.Float {
		if v, ok := cache[p]; ok {
			return v
		}
		s, m := fourier(rho(p), n, theta, p)
		cache[p] = [2]*big.Float{s, m}
		return cache[p]
	}
	for ; prec <= maxPrec/2; prec *= 2 {
		a, b := eval(prec), eval(2*prec)
		if agree(a[0], b[0], tol) && agree(a[1], b[1], tol) {
			s, _ := b[0].Float64()
			m, _ := b[1].Float64()
			return s, m
		}
	}
	return math.NaN(), math.NaN()
}

func agree(a, b *big.Float, tol float64) bool {
	d := new(big.Float).Sub(a, b)
	d.Abs(d)
	scale := new(big.Float).Abs(b)
	scale.Mul(scale, big.NewFloat(tol))
	return d.Cmp(scale) <= 0
}
