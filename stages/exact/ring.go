// Package exact provides exact references for the Ising model on periodic
// L^d lattices: closed forms for the ring (d = 1), integer joint counts
// g(S, M) by enumeration for small lattices, and sums in high precision.
//
// Conventions: weight exp(βS + hM), S = Σ_⟨ij⟩ s_i s_j over d·N bonds,
// J = 1, h = iθ; ρ_β(M) = Σ_S g(S, M) e^{βS}; natural logs; arrays over M
// indexed by k = (M+N)/2.
package exact

import (
	"math"
	"math/cmplx"
)

// lnChoose returns ln C(n, k) for 0 ≤ k ≤ n.
func lnChoose(n, k int) float64 {
	a, _ := math.Lgamma(float64(n + 1))
	b, _ := math.Lgamma(float64(k + 1))
	c, _ := math.Lgamma(float64(n - k + 1))
	return a - b - c
}

// RingLnRho returns ln ρ_β(M) of the N-site ring. Configurations with n up
// spins in k ≥ 1 up-domains number (N/k)·C(n−1, k−1)·C(N−n−1, k−1) and have
// S = N − 4k; n = 0 and n = N are single states with S = N (standard domain
// counting on a ring; checked against enumeration in the tests).
func RingLnRho(n int, beta float64) []float64 {
	out := make([]float64, n+1)
	for up := 0; up <= n; up++ {
		if up == 0 || up == n {
			out[up] = beta * float64(n)
			continue
		}
		var terms []float64
		for k := 1; k <= up && k <= n-up; k++ {
			lc := math.Log(float64(n)/float64(k)) + lnChoose(up-1, k-1) + lnChoose(n-up-1, k-1)
			terms = append(terms, lc+beta*float64(n-4*k))
		}
		out[up] = logSumExp(terms)
	}
	return out
}

// RingLnRhoErr bounds the absolute rounding error of RingLnRho: three
// log-gamma values per binomial, each to a few ulps of ln Γ(N+1), the
// βS term, and one rounding per term of the log-sum-exp (first order).
func RingLnRhoErr(n int, beta float64) []float64 {
	lg, _ := math.Lgamma(float64(n + 1))
	e := 0x1p-53 * (16*(6*lg+4*beta*float64(n)+2) + float64(n))
	out := make([]float64, n+1)
	for k := range out {
		out[k] = e
	}
	return out
}

func logSumExp(x []float64) float64 {
	top := math.Inf(-1)
	for _, v := range x {
		top = math.Max(top, v)
	}
	if math.IsInf(top, -1) {
		return top
	}
	s := 0.0
	for _, v := range x {
		s += math.Exp(v - top)
	}
	return top + math.Log(s)
}

// RingEdge returns the Lee–Yang edge θ_c(β) = arcsin(e^{−2β}) of the
// infinite ring, where the transfer-matrix eigenvalues at h = iθ become
// degenerate (R. J. Baxter, Exactly Solved Models, ch. 2).
func RingEdge(beta float64) float64 { return math.Asin(math.Exp(-2 * beta)) }

// RingFirstZero returns the first zero θ₁ of Z(β, iθ) on the N-site ring:
// all zeros satisfy cos θ_k = √(1 − e^{−4β})·cos((2k+1)π/(2N)); k = 0 is the
// first. (λ₊^N + λ₋^N = 0 with λ± = e^β cos θ ± i√(e^{2β}sin²θ − e^{−2β}).)
func RingFirstZero(n int, beta float64) float64 {
	return math.Acos(math.Sqrt(-math.Expm1(-4*beta)) * math.Cos(math.Pi/(2*float64(n))))
}

// RingSign returns sign(θ) = Z(β, iθ)/Z(β, 0) and Im m(θ) = −(1/N) ∂_θ ln Z
// of the N-site ring from the transfer matrix
// T = [[e^{β+h}, e^{−β}], [e^{−β}, e^{β−h}]] at h = iθ:
// λ± = e^β cos θ ± √(e^{−2β} − e^{2β} sin²θ), Z = λ₊^N + λ₋^N (Baxter ch. 2).
// Everything is divided by e^β first (λ±/e^β = cos θ ± √(e^{−4β} − sin²θ),
// λ₊(0)/e^β = 1 + e^{−2β}) and raised to the N-th power as eigenvalue
// ratios, so nothing overflows at any β or N and there is no cancellation
// beyond that of the two terms themselves.
func RingSign(n int, beta, theta float64) (sign, imM float64) {
	q := math.Exp(-2 * beta) // e^{−2β}
	sn, cs := math.Sincos(theta)
	root := cmplx.Sqrt(complex(q*q-sn*sn, 0))
	lp := complex(cs, 0) + root
	lm := complex(cs, 0) - root
	l0 := 1 + q // λ₊(0)/e^β
	qp, qm := lp/complex(l0, 0), lm/complex(l0, 0)
	fn := complex(float64(n), 0)
	z := cmplx.Pow(qp, fn) + cmplx.Pow(qm, fn)
	z0 := 1 + math.Pow((1-q)/l0, float64(n))
	sign = real(z) / z0
	// (λ±/e^β)' = −sin θ ∓ sin θ cos θ / root
	var dp, dm complex128
	if root != 0 {
		d := complex(sn*cs, 0) / root
		dp = complex(-sn, 0) - d
		dm = complex(-sn, 0) + d
	}
	// ∂_θ ln Z = (λ₊^{N−1}λ₊' + λ₋^{N−1}λ₋')N/Z; written with r = λ_small/λ_big
	// so that it does not underflow where Z does (|r| ≤ 1)
	big, small, dbig, dsmall := lp, lm, dp, dm
	if cmplx.Abs(lm) > cmplx.Abs(lp) {
		big, small, dbig, dsmall = lm, lp, dm, dp
	}
	rn := cmplx.Pow(small/big, fn)
	dlnz := (dbig/big + rn*dsmall/small) / (1 + rn)
	if small == 0 {
		dlnz = dbig / big
	}
	imM = -real(dlnz)
	return sign, imM
}
