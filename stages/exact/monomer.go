package exact

import (
	"fmt"
	"math"
	"math/big"
)

// MonomerLnD returns ln[D(n)/D(0)] for n = 0, 2, …, ≤ N (index n/2) of the
// monomer (high-temperature) density of states D_β(n), the weight t^{|k|}
// (t = tanh β) of the link configurations with n odd-degree sites, from the
// exact ρ_β(M) by the Krawtchouk transform
//
//	2^N cosh^{dN}β · Σ_n D(n) xⁿ = Σ_M ρ_β(M) (1+x)^{(N+M)/2} (1−x)^{(N−M)/2}
//
// (expand e^{βss'} = cosh β (1 + t ss') and sum the spins: R. B. Griffiths,
// C. A. Hurst, S. Sherman, J. Math. Phys. 11, 790 (1970), from memory), so
// D(n) ∝ Σ_u ρ(u) K_n(u) with the integer Krawtchouk coefficients
// K_n(u) = Σ_j (−1)^j C(N−u, j) C(u, n−j), u the number of up spins. The
// sum cancels by up to C(N, n), so it runs in math/big from exact inputs
// (integer counts, never a float64 ρ): at a working precision and at twice
// it, accepted when every ln ratio agrees to tol, doubling up to maxPrec.
func MonomerLnD(rho RhoFunc, n int, tol float64, maxPrec uint) ([]float64, error) {
	_, ln, err := MonomerD(rho, n, tol, maxPrec)
	return ln, err
}

// MonomerD is MonomerLnD that also returns the ratios D(n)/D(0) in
// math/big at the precision that converged (for sums that cancel).
func MonomerD(rho RhoFunc, n int, tol float64, maxPrec uint) (ratios []*big.Float, ln []float64, err error) {
	// Krawtchouk coefficients as big integers, K[u][k] for even k = 2m
	binom := func(a, b int) *big.Int {
		if b < 0 || b > a {
			return new(big.Int)
		}
		return new(big.Int).Binomial(int64(a), int64(b))
	}
	half := n/2 + 1
	K := make([][]*big.Int, n+1)
	for u := 0; u <= n; u++ {
		K[u] = make([]*big.Int, half)
		for m := 0; m < half; m++ {
			k := 2 * m
			s := new(big.Int)
			for j := 0; j <= k; j++ {
				t := new(big.Int).Mul(binom(n-u, j), binom(u, k-j))
				if j%2 == 1 {
					s.Sub(s, t)
				} else {
					s.Add(s, t)
				}
			}
			K[u][m] = s
		}
	}
	eval := func(prec uint) ([]*big.Float, error) {
		r := rho(prec)
		out := make([]*big.Float, half)
		for m := range out {
			s := newF(prec)
			for u := 0; u <= n; u++ {
				t := newF(prec).SetInt(K[u][m])
				s.Add(s, t.Mul(t, r[u]))
			}
			if s.Sign() <= 0 {
				return nil, fmt.Errorf("exact: D(%d) = %v at %d bits is not positive", 2*m, s, prec)
			}
			out[m] = s
		}
		return out, nil
	}
	lnRatios := func(p []*big.Float) ([]*big.Float, []float64) {
		rs := make([]*big.Float, len(p))
		out := make([]float64, len(p))
		for m, v := range p {
			q := newF(v.Prec()).Quo(v, p[0])
			rs[m] = q
			mant := newF(q.Prec())
			e := q.MantExp(mant)
			f, _ := mant.Float64()
			out[m] = math.Log(f) + float64(e)*math.Ln2
		}
		return rs, out
	}
	for prec := uint(128); prec <= maxPrec/2; prec *= 2 {
		a, errA := eval(prec)
		b, errB := eval(2 * prec)
		if errA != nil || errB != nil {
			continue
		}
		_, la := lnRatios(a)
		rb, lb := lnRatios(b)
		ok := true
		for m := range la {
			if math.Abs(la[m]-lb[m]) > tol*math.Max(1, math.Abs(lb[m])) {
				ok = false
				break
			}
		}
		if ok {
			return rb, lb, nil
		}
	}
	return nil, nil, fmt.Errorf("exact: the Krawtchouk sum of %d sites did not converge below %d bits", n, maxPrec)
}

// MonomerSign returns sign(θ) = cos^N θ · Σ_n (−1)^{n/2} (D(n)/D(0)) tanⁿθ
// (|θ| < π/2), the dual form of Z(β, iθ)/Z(β, 0) from e^{iθs} =
// cos θ (1 + i s tan θ). The alternating sum cancels like the Fourier sum,
// so it runs in math/big on the ratios of MonomerD, at their precision.
func MonomerSign(n int, ratios []*big.Float, theta float64) float64 {
	prec := ratios[0].Prec()
	c, sn := BigCosSin(newF(prec).SetFloat64(theta), prec)
	t := newF(prec).Quo(sn, c)
	t2 := newF(prec).Mul(t, t)
	pow := newF(prec).SetInt64(1)
	sum := newF(prec)
	for m, r := range ratios {
		term := newF(prec).Mul(r, pow)
		if m%2 == 1 {
			sum.Sub(sum, term)
		} else {
			sum.Add(sum, term)
		}
		pow.Mul(pow, t2)
	}
	cn := newF(prec).SetInt64(1)
	for i := 0; i < n; i++ {
		cn.Mul(cn, c)
	}
	out, _ := sum.Mul(sum, cn).Float64()
	return out
}
