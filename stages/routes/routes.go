// Package routes holds routes from the magnetization density of states
// ρ(M) to the Lee–Yang zeros other than the direct Fourier sum: real-field
// cumulants with their leading-zero estimates, and cumulant expansions of
// the phase θM.
//
// Conventions: weight ρ(M) e^{hM} with h = βH dimensionless and real; the
// zeros of Z lie at h = ±iθ_k (Lee–Yang); ln ρ is indexed by k = (M+N)/2;
// natural logs; κ_n = ∂ⁿ ln Z/∂hⁿ (total magnetization, not per site).
package routes

import (
	"math"
	"math/big"
	"math/bits"
)

// Cumulants returns κ_0 … κ_maxOrder (κ_0 = 0) of M at real field h,
// κ_n = ∂ⁿ ln Z/∂hⁿ with Z(h) = Σ_M ρ(M) e^{hM}.
//
// The cumulants are formed from raw moments μ_j = ⟨M^j⟩ by the recursion
// κ_n = μ_n − Σ_{m=1}^{n−1} C(n−1, m−1) κ_m μ_{n−m}, which cancels: μ_n can
// exceed κ_n by a factor of order N^{n/2}. The weights w(M) = ρ(M)e^{hM}
// (float64, relative to their largest) are converted to math/big exactly
// and everything after is done at 128 + maxOrder·(⌈log₂(N+1)⌉ + 2) bits,
// more than the cancellation can consume, so the result is the exact
// cumulant of the given float64 weights rounded once to float64.
func Cumulants(n int, lnRho []float64, h float64, maxOrder int) []float64 {
	prec := uint(128 + maxOrder*(bits.Len(uint(n+1))+2))
	top := math.Inf(-1)
	for k, v := range lnRho {
		top = math.Max(top, v+h*float64(2*k-n))
	}
	nf := func() *big.Float { return new(big.Float).SetPrec(prec) }
	mu := make([]*big.Float, maxOrder+1)
	for j := range mu {
		mu[j] = nf()
	}
	pow, term := nf(), nf()
	for k, v := range lnRho {
		m := 2*k - n
		w := math.Exp(v + h*float64(m) - top)
		if w == 0 {
			continue
		}
		pow.SetFloat64(w)
		mb := nf().SetInt64(int64(m))
		for j := 0; j <= maxOrder; j++ {
			mu[j].Add(mu[j], pow)
			pow.Mul(pow, mb)
		}
	}
	for j := maxOrder; j >= 0; j-- {
		mu[j].Quo(mu[j], mu[0])
	}
	kappa := make([]*big.Float, maxOrder+1)
	kappa[0] = nf()
	binom := make([]*big.Float, maxOrder+1) // C(n−1, m−1) for the current n
	out := make([]float64, maxOrder+1)
	for order := 1; order <= maxOrder; order++ {
		// binomials of row n−1
		c := int64(1)
		for m := 1; m <= order; m++ {
			binom[m] = nf().SetInt64(c)
			c = c * int64(order-m) / int64(m)
		}
		k := nf().Set(mu[order])
		for m := 1; m < order; m++ {
			term.Mul(binom[m], kappa[m])
			term.Mul(term, mu[order-m])
			k.Sub(k, term)
		}
		kappa[order] = k
		out[order], _ = k.Float64()
	}
	return out
}

// H0Sequence returns the leading-zero estimates at h = 0,
// θ₁^{(j)} = [−2j(2j+1) κ_{2j}/κ_{2j+2}]^{1/2} for j = 1 … ⌊maxOrder/2⌋−1
// (index j−1), NaN where the ratio is not positive. With κ_{2j} =
// 2(2j−1)!(−1)^{j+1} Σ_k θ_k^{−2j} over all positive zeros (Hadamard
// product of the entire function Z(iθ), whose zeros are real by the
// Lee–Yang theorem) the sequence decreases to θ₁ like (θ₁/θ₂)^{2j}.
func H0Sequence(kappa []float64) []float64 {
	var out []float64
	for j := 1; 2*j+2 < len(kappa); j++ {
		r := -float64(2*j*(2*j+1)) * kappa[2*j] / kappa[2*j+2]
		if r > 0 {
			out = append(out, math.Sqrt(r))
		} else {
			out = append(out, math.NaN())
		}
	}
	return out
}

// LeadingPair estimates the pair of zeros h₀, h₀* closest to the real
// field h from the four cumulants κ_n … κ_{n+3} at h, assuming they
// dominate: with p_m = κ_m/((−1)^{m−1}(m−1)!) = u^m + u*^m, u = 1/(h − h₀),
// the recurrence p_{m+2} = A p_{m+1} − B p_m (A = 2 Re u, B = |u|²) gives A
// and B from the four values, and h₀ = h − A/(2B) + i√(B − A²/4)/B (the
// linear system of C. Flindt and J. P. Garrahan, Phys. Rev. Lett. 110,
// 050601 (2013), as used by A. Deger, F. Brange, C. Flindt,
// arXiv:2006.15125 (2020)). It returns Re h₀ (0 by the Lee–Yang theorem:
// a diagnostic) and θ₁ = Im h₀; ok is false when the four values admit no
// complex pair. At h = 0 and even n it reduces to H0Sequence.
func LeadingPair(kappa []float64, n int, h float64) (reH, theta float64, ok bool) {
	p := make([]float64, 4)
	for i := range p {
		m := n + i
		f, _ := math.Lgamma(float64(m)) // ln (m−1)!
		p[i] = kappa[m] / math.Exp(f)
		if (m-1)%2 == 1 {
			p[i] = -p[i]
		}
	}
	d := p[0]*p[2] - p[1]*p[1]
	if d == 0 {
		return math.NaN(), math.NaN(), false
	}
	a := (p[0]*p[3] - p[1]*p[2]) / d
	b := (p[1]*p[3] - p[2]*p[2]) / d
	disc := b - a*a/4
	if !(b > 0 && disc > 0) {
		return math.NaN(), math.NaN(), false
	}
	return h - a/(2*b), math.Sqrt(disc) / b, true
}

// PhaseSigns returns the cumulant expansions of sign(θ) = ⟨cos θM⟩ under
// P₀(M) = ρ(M)/Z(0) at each θ:
//
//	series2 = exp(−θ²κ₂/2), series4 = exp(−θ²κ₂/2 + θ⁴κ₄/24)
//
// in the unwrapped phase θM (κ_n the h = 0 cumulants of M, κ_n[θM] =
// θⁿκ_n), and phase2, phase4 the same truncations in the cumulants of the
// phase φ = θM wrapped into (−π, π]. Every truncation is positive, so none
// can produce a zero.
func PhaseSigns(n int, lnRho, theta []float64) (phase2, phase4, series2, series4 []float64) {
	k := Cumulants(n, lnRho, 0, 4)
	top := math.Inf(-1)
	for _, v := range lnRho {
		top = math.Max(top, v)
	}
	p := make([]float64, len(lnRho))
	z := 0.0
	for i, v := range lnRho {
		p[i] = math.Exp(v - top)
		z += p[i]
	}
	for i := range p {
		p[i] /= z
	}
	phase2 = make([]float64, len(theta))
	phase4 = make([]float64, len(theta))
	series2 = make([]float64, len(theta))
	series4 = make([]float64, len(theta))
	for t, th := range theta {
		series2[t] = math.Exp(-th * th * k[2] / 2)
		series4[t] = math.Exp(-th*th*k[2]/2 + th*th*th*th*k[4]/24)
		var m1, m2, m3, m4 float64
		for i, w := range p {
			phi := wrap(th * float64(2*i-n))
			m1 += w * phi
			m2 += w * phi * phi
			m3 += w * phi * phi * phi
			m4 += w * phi * phi * phi * phi
		}
		k2 := m2 - m1*m1
		k4 := m4 - 4*m3*m1 - 3*m2*m2 + 12*m2*m1*m1 - 6*m1*m1*m1*m1
		phase2[t] = math.Exp(-k2 / 2)
		phase4[t] = math.Exp(-k2/2 + k4/24)
	}
	return phase2, phase4, series2, series4
}

// wrap maps x into (−π, π].
func wrap(x float64) float64 {
	y := math.Mod(x, 2*math.Pi)
	switch {
	case y > math.Pi:
		y -= 2 * math.Pi
	case y <= -math.Pi:
		y += 2 * math.Pi
	}
	return y
}
