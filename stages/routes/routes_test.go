package routes

import (
	"math"
	"math/cmplx"
	"testing"

	"strata/stages/exact"
	"strata/stages/lattice"
)

// ringZeros returns the N zeros of Z(β, iθ) in (0, π) of the N-site ring,
// cos θ_k = √(1 − e^{−4β}) cos((2k+1)π/(2N)) (transfer-matrix closed form,
// R. J. Baxter, Exactly Solved Models in Statistical Mechanics, ch. 2).
func ringZeros(n int, beta float64) []float64 {
	out := make([]float64, n)
	for k := range out {
		out[k] = math.Acos(math.Sqrt(-math.Expm1(-4*beta)) * math.Cos(float64(2*k+1)*math.Pi/float64(2*n)))
	}
	return out
}

// zeroSum returns Σ over all positive zeros θ_k + mπ (m ≥ 0, Z(iθ) has
// period π up to a sign) of θ^{−2j}.
func zeroSum(zeros []float64, j int) float64 {
	s := 0.0
	for _, z := range zeros {
		if j == 1 {
			s += Trigamma(z/math.Pi) / (math.Pi * math.Pi)
			continue
		}
		for m := 0; m < 20000; m++ {
			s += math.Pow(z+float64(m)*math.Pi, -2*float64(j))
		}
	}
	return s
}

// Sum rule ⟨M²⟩ = κ₂ = 2 Σ_k θ_k^{−2} over all positive zeros with their
// periodic images (Hadamard product of Z(iθ), real zeros by the Lee–Yang
// theorem), to 1e−10: the 12-ring at β = 0.5 (zeros in closed form) and
// the 4×4 torus at β = 0.3 (zeros of the exact ρ by bisection).
func TestSumRule(t *testing.T) {
	n, beta := 12, 0.5
	k := Cumulants(n, exact.RingLnRho(n, beta), 0, 2)
	want := 2 * zeroSum(ringZeros(n, beta), 1)
	if math.Abs(k[2]-want) > 1e-10*want {
		t.Errorf("12-ring: κ₂ = %.15g, 2Σθ⁻² = %.15g", k[2], want)
	}
	if math.Abs(k[2]-32.6131948056709) > 1e-10 {
		t.Errorf("12-ring: κ₂ = %.15g, check value 32.6131948056709", k[2])
	}
	lat, _ := lattice.New(2, 4)
	c, err := exact.Enumerate(lat)
	if err != nil {
		t.Fatal(err)
	}
	lr := c.LnRho(0.3)
	zeros := torusZeros(t, c.N, lr)
	k = Cumulants(c.N, lr, 0, 2)
	if want := 2 * zeroSum(zeros, 1); math.Abs(k[2]-want) > 1e-10*want {
		t.Errorf("4×4: κ₂ = %.15g, 2Σθ⁻² = %.15g", k[2], want)
	}
}

// torusZeros finds the N zeros of Z(iθ) = Σ ρ cos θM in (0, π) by a scan
// and bisection in float64 (the sign of Z is far above rounding on 4×4).
func torusZeros(t *testing.T, n int, lr []float64) []float64 {
	z := func(th float64) float64 {
		s := 0.0
		for k, v := range lr {
			s += math.Exp(v-lr[n/2]) * math.Cos(th*float64(2*k-n))
		}
		return s
	}
	var out []float64
	const steps = 100000
	prev := z(1e-9)
	for i := 1; i <= steps; i++ {
		th := math.Pi * float64(i) / steps
		if i == steps {
			th = math.Pi - 1e-9
		}
		v := z(th)
		if (v > 0) != (prev > 0) {
			a, b := th-math.Pi/steps, th
			for it := 0; it < 100; it++ {
				m := (a + b) / 2
				if (z(m) > 0) == (prev > 0) {
					a = m
				} else {
					b = m
				}
			}
			out = append(out, (a+b)/2)
		}
		prev = v
	}
	if len(out) != n {
		t.Fatalf("found %d zeros in (0, π), want N = %d", len(out), n)
	}
	return out
}

// High cumulants at h = 0 against the zero sums κ_{2j} = 2(2j−1)!(−1)^{j+1}
// Σ θ^{−2j} up to order 20 (12-ring, β = 0.5), and odd cumulants 0.
func TestCumulantsAgainstZeroSums(t *testing.T) {
	n, beta := 12, 0.5
	k := Cumulants(n, exact.RingLnRho(n, beta), 0, 20)
	zeros := ringZeros(n, beta)
	for j := 1; j <= 10; j++ {
		f, _ := math.Lgamma(float64(2 * j))
		want := 2 * math.Exp(f) * zeroSum(zeros, j)
		if j%2 == 0 {
			want = -want
		}
		if math.Abs(k[2*j]-want) > 1e-9*math.Abs(want) {
			t.Errorf("κ_%d = %.15g, zero sum %.15g", 2*j, k[2*j], want)
		}
		if math.Abs(k[2*j-1]) > 1e-9*math.Abs(want) {
			t.Errorf("κ_%d = %g, want 0 at h = 0", 2*j-1, k[2*j-1])
		}
	}
}

// The h = 0 sequence on the 12-ring at β = 0.5 (check values from the
// zero sums above: 0.5329, 0.4363, 0.4150, 0.4065 for j = 1 … 4)
// decreases towards the exact zero 0.397793.
func TestH0Sequence(t *testing.T) {
	n, beta := 12, 0.5
	seq := H0Sequence(Cumulants(n, exact.RingLnRho(n, beta), 0, 20))
	for j, want := range []float64{0.5329, 0.4363, 0.4150, 0.4065} {
		if math.Abs(seq[j]-want) > 6e-5 {
			t.Errorf("θ₁^(%d) = %.6f, want %.4f", j+1, seq[j], want)
		}
	}
	z := exact.RingFirstZero(n, beta)
	for j := 1; j < len(seq); j++ {
		if !(seq[j] < seq[j-1] && seq[j] > z) {
			t.Errorf("sequence not decreasing to %v: %v", z, seq)
		}
	}
	// convergence like (θ₁/θ₂)^{2j} (PHYSICS.md: θ₁/θ₂ = 0.740 here): at
	// j = 9 the excess is below θ₁·0.740^18 ≈ 0.0018
	if d := seq[len(seq)-1] - z; d > 0.0018 {
		t.Errorf("θ₁^(9) − θ₁ = %v", d)
	}
	// the four-cumulant pair at h = 0 reduces to the same sequence
	k := Cumulants(n, exact.RingLnRho(n, beta), 0, 20)
	for j := 1; j <= 8; j++ {
		re, th, ok := LeadingPair(k, 2*j, 0)
		if !ok || math.Abs(th-seq[j-1]) > 1e-12 || math.Abs(re) > 1e-12 {
			t.Errorf("j=%d: LeadingPair (%v, %v, %v), H0Sequence %v", j, re, th, ok, seq[j-1])
		}
	}
}

// A cumulant sequence made of one complex pair h₀, h₀* (κ_n = Σ over the
// pair of (−1)^{n−1}(n−1)!/(h − h_k)^n) returns that pair exactly.
func TestLeadingPairSynthetic(t *testing.T) {
	h0 := complex(0.03, 0.41)
	h := 0.2
	kappa := make([]float64, 12)
	for m := 1; m < len(kappa); m++ {
		f, _ := math.Lgamma(float64(m))
		s := cmplx.Pow(complex(h, 0)-h0, complex(-float64(m), 0)) + cmplx.Pow(complex(h, 0)-cmplx.Conj(h0), complex(-float64(m), 0))
		kappa[m] = math.Pow(-1, float64(m-1)) * math.Exp(f) * real(s)
	}
	for n := 1; n+3 < len(kappa); n++ {
		re, th, ok := LeadingPair(kappa, n, h)
		if !ok || math.Abs(re-real(h0)) > 1e-9 || math.Abs(th-imag(h0)) > 1e-9 {
			t.Errorf("n=%d: got (%v, %v, %v), want %v", n, re, th, ok, h0)
		}
	}
}

// At a real field the leading pair converges to ±iθ₁ (Re h₀ → 0) on the
// exact 12-ring density (β = 0.5), slower than at h = 0 (PHYSICS.md:
// per-order ratio 0.751 at h = 0.1 against 0.740).
func TestLeadingPairRealField(t *testing.T) {
	n, beta := 12, 0.5
	z := exact.RingFirstZero(n, beta)
	for _, h := range []float64{0.1, 0.2} {
		k := Cumulants(n, exact.RingLnRho(n, beta), h, 20)
		re, th, ok := LeadingPair(k, 17, h)
		if !ok || math.Abs(th-z) > 0.01 || math.Abs(re) > 0.01 {
			t.Errorf("h=%v: leading pair (%v, %v, %v), exact zero ±i%v", h, re, th, ok, z)
		}
	}
}

// The phase expansions at small θ agree with exp(−θ²⟨M²⟩/2) and with the
// direct sum; at larger θ they stay positive (a truncated expansion cannot
// produce a zero).
func TestPhaseSigns(t *testing.T) {
	n, beta := 16, 0.5
	lr := exact.RingLnRho(n, beta)
	m2 := Cumulants(n, lr, 0, 2)[2]
	grid := []float64{0.001, 0.01, 0.02, 0.3, 0.6, 1.0}
	p2, p4, s2, s4 := PhaseSigns(n, lr, grid)
	for i, th := range grid[:3] {
		want := math.Exp(-th * th * m2 / 2)
		direct, _ := exact.RingSign(n, beta, th)
		for name, v := range map[string]float64{"phase2": p2[i], "phase4": p4[i], "series2": s2[i], "series4": s4[i]} {
			if math.Abs(v-want) > 2e-3*th*th*m2 || math.Abs(v-direct) > 2e-3*th*th*m2 {
				t.Errorf("θ=%v %s = %.10g, exp(−θ²⟨M²⟩/2) = %.10g, direct %.10g", th, name, v, want, direct)
			}
		}
	}
	for i := range grid {
		for _, v := range []float64{p2[i], p4[i], s2[i], s4[i]} {
			if !(v > 0) {
				t.Errorf("θ=%v: expansion %v not positive", grid[i], v)
			}
		}
	}
}

func TestTrigamma(t *testing.T) {
	// ψ₁(1) = π²/6, ψ₁(1/2) = π²/2 (Abramowitz and Stegun 6.4.2, 6.4.4)
	for _, c := range []struct{ x, want float64 }{{1, math.Pi * math.Pi / 6}, {0.5, math.Pi * math.Pi / 2}, {25, 0}} {
		want := c.want
		if c.x == 25 { // against direct summation with the integral tail
			for m := 0; m < 1000000; m++ {
				want += 1 / ((25 + float64(m)) * (25 + float64(m)))
			}
			want += 1 / (25 + 1e6 - 0.5)
		}
		if got := Trigamma(c.x); math.Abs(got-want) > 1e-13*want {
			t.Errorf("ψ₁(%v) = %.16g, want %.16g", c.x, got, want)
		}
	}
}

// Trigamma returns (a test helper for the zero sums) ψ₁(x) = Σ_{m≥0} (x+m)^{−2} for x > 0: the recurrence
// ψ₁(x) = ψ₁(x+1) + x^{−2} up to x ≥ 20, then the asymptotic series
// 1/x + 1/(2x²) + 1/(6x³) − 1/(30x⁵) + 1/(42x⁷) − 1/(30x⁹) (M. Abramowitz
// and I. A. Stegun, Handbook of Mathematical Functions, 6.4.12), accurate to
// about 1e−16 there.
func Trigamma(x float64) float64 {
	s := 0.0
	for x < 20 {
		s += 1 / (x * x)
		x++
	}
	x2 := 1 / (x * x)
	return s + 1/x + x2/2 + x2/x*(1.0/6-x2*(1.0/30-x2*(1.0/42-x2/30)))
}
