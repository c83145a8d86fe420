package exact

import (
	"math"
	"math/big"
	"math/cmplx"
	"testing"

	"gonum.org/v1/gonum/mat"

	"strata/stages/lattice"
)

func lat(t *testing.T, d, l int) *lattice.Lattice {
	t.Helper()
	x, err := lattice.New(d, l)
	if err != nil {
		t.Fatal(err)
	}
	return x
}

// The ring domain count (PHYSICS.md, "1D ring") against brute-force
// enumeration of all 2^N states.
func TestRingCountMatchesEnumeration(t *testing.T) {
	for n := 3; n <= 14; n++ {
		c, err := Enumerate(lat(t, 1, n))
		if err != nil {
			t.Fatal(err)
		}
		for _, beta := range []float64{0, 0.3, 1.1} {
			got, want := RingLnRho(n, beta), c.LnRho(beta)
			for k := range got {
				if math.Abs(got[k]-want[k]) > 1e-12*math.Max(1, math.Abs(want[k])) {
					t.Errorf("N=%d β=%v M=%d: ring formula %v, enumeration %v", n, beta, 2*k-n, got[k], want[k])
				}
			}
		}
	}
}

// Energy density of states of the 4×4 torus: P. D. Beale, Phys. Rev. Lett.
// 76, 78 (1996) (values in ../shared/PHYSICS.md), E = −S.
func TestBeale4x4(t *testing.T) {
	c, err := Enumerate(lat(t, 2, 4))
	if err != nil {
		t.Fatal(err)
	}
	want := map[int]uint64{32: 2, 24: 32, 20: 64, 16: 424, 12: 1728, 8: 6688, 4: 13568, 0: 20524}
	g := c.EnergyCounts()
	for e, w := range want {
		for _, s := range []int{e, -e} {
			if got := g[(s+c.Bonds)/2]; got != w {
				t.Errorf("g(E=%d) = %d, Beale gives %d", -s, got, w)
			}
		}
	}
}

// Σ_M ρ(M) against Kaufman's exact finite-torus Z (Phys. Rev. 76, 1232
// (1949)).
func TestKaufmanPartitionFunction(t *testing.T) {
	for _, l := range []int{3, 4, 5} {
		c, err := Enumerate(lat(t, 2, l))
		if err != nil {
			t.Fatal(err)
		}
		for _, beta := range []float64{0.1, 0.3, 0.44068679350977151, 0.7} {
			want := KaufmanLnZ(l, l, beta)
			got := logSumExp(c.LnRho(beta))
			if math.Abs(got-want) > 1e-11*math.Abs(want) {
				t.Errorf("L=%d β=%v: ln Σρ = %.15g, Kaufman %.15g", l, beta, got, want)
			}
		}
	}
}

// The closed-form zeros (PHYSICS.md: cos θ_k = √(1−e^{−4β}) cos((2k+1)π/2N))
// against bisection on the transfer-matrix Z.
func TestRingFirstZeroByRootFinding(t *testing.T) {
	for _, n := range []int{8, 24, 64} {
		for _, beta := range []float64{0.3, 0.7} {
			z := RingFirstZero(n, beta)
			lo, hi := RingEdge(beta)*0.5, z+0.5*(z-RingEdge(beta))
			// the first sign change of sign(θ) above lo
			steps := 20000
			prev, _ := RingSign(n, beta, lo)
			root := math.NaN()
			for i := 1; i <= steps; i++ {
				th := lo + (hi-lo)*float64(i)/float64(steps)
				s, _ := RingSign(n, beta, th)
				if prev > 0 && s <= 0 {
					a, b := th-(hi-lo)/float64(steps), th
					for it := 0; it < 80; it++ {
						mid := (a + b) / 2
						if v, _ := RingSign(n, beta, mid); v > 0 {
							a = mid
						} else {
							b = mid
						}
					}
					root = (a + b) / 2
					break
				}
				prev = s
			}
			if math.Abs(root-z) > 1e-9 {
				t.Errorf("N=%d β=%v: closed form %v, root finding %v", n, beta, z, root)
			}
			if z <= RingEdge(beta) {
				t.Errorf("first zero %v not above the edge %v", z, RingEdge(beta))
			}
		}
	}
	// θ₁ − θ_c ∝ N^{−2}: the ratio for N and 2N tends to 4
	beta := 0.5
	d1 := RingFirstZero(400, beta) - RingEdge(beta)
	d2 := RingFirstZero(800, beta) - RingEdge(beta)
	if r := d1 / d2; math.Abs(r-4) > 0.01 {
		t.Errorf("(θ₁−θ_c)(N)/(θ₁−θ_c)(2N) = %v, want → 4", r)
	}
}

// Closed-form sign and Im m against a direct float64 Fourier sum of the
// exact ring ρ, where the sign is well above rounding.
func TestRingSignMatchesFourierSum(t *testing.T) {
	n, beta := 16, 0.4
	lr := RingLnRho(n, beta)
	for _, th := range []float64{0.05, 0.2, 0.4, 0.6} {
		z, z0, zs := 0.0, 0.0, 0.0
		for k, v := range lr {
			m := float64(2*k - n)
			z += math.Exp(v) * math.Cos(th*m)
			zs += m * math.Exp(v) * math.Sin(th*m)
			z0 += math.Exp(v)
		}
		s, imM := RingSign(n, beta, th)
		if math.Abs(s-z/z0) > 1e-12 || math.Abs(imM-zs/z/float64(n)) > 1e-9*math.Max(1, math.Abs(imM)) {
			t.Errorf("θ=%v: closed form (%v, %v), sum (%v, %v)", th, s, imM, z/z0, zs/z/float64(n))
		}
	}
}

func TestBigExpCos(t *testing.T) {
	for _, x := range []float64{-3.7, -0.2, 0, 0.5, 1, 2.25, 7} {
		e, _ := BigExp(big.NewFloat(x), 200).Float64()
		if math.Abs(e-math.Exp(x)) > 1e-15*math.Exp(x) {
			t.Errorf("BigExp(%v) = %v, math.Exp %v", x, e, math.Exp(x))
		}
		c, s := BigCosSin(big.NewFloat(x), 200)
		cf, _ := c.Float64()
		sf, _ := s.Float64()
		if math.Abs(cf-math.Cos(x)) > 1e-15 || math.Abs(sf-math.Sin(x)) > 1e-15 {
			t.Errorf("BigCosSin(%v) = %v, %v", x, cf, sf)
		}
		// identity cos² + sin² = 1 at 400 bits
		c, s = BigCosSin(big.NewFloat(x), 400)
		one := new(big.Float).SetPrec(400).Mul(c, c)
		one.Add(one, new(big.Float).SetPrec(400).Mul(s, s))
		one.Sub(one, big.NewFloat(1))
		if f, _ := one.Float64(); math.Abs(f) > 1e-110 {
			t.Errorf("cos²+sin²−1 = %v at 400 bits", f)
		}
	}
	// e^a e^b = e^{a+b} at high precision
	a := BigExp(big.NewFloat(1.25), 500)
	b := BigExp(big.NewFloat(-0.75), 500)
	ab := new(big.Float).SetPrec(500).Mul(a, b)
	d := new(big.Float).Sub(ab, BigExp(big.NewFloat(0.5), 500))
	if f, _ := d.Float64(); math.Abs(f) > 1e-140 {
		t.Errorf("e^1.25·e^−0.75 − e^0.5 = %v", f)
	}
}

// The high-precision Fourier sum of the exact ring ρ at N = 256 reproduces
// the closed-form transfer-matrix sign to 1e−10 where the sign is below
// 1e−30, and a float64 sum visibly fails there.
func TestHighPrecisionBeatsCancellation(t *testing.T) {
	n, beta := 256, 0.3
	lr := RingLnRho(n, beta)
	tested := 0
	for _, th := range []float64{0.9, 1.1, 1.3} {
		want, wantM := RingSign(n, beta, th)
		if math.Abs(want) > 1e-30 {
			continue
		}
		tested++
		got, gotM := HighPrecision(RingRho(n, beta), n, th, 1e-12, 1<<14)
		if math.Abs(got-want) > 1e-10*math.Abs(want) || math.Abs(gotM-wantM) > 1e-10*math.Abs(wantM) {
			t.Errorf("θ=%v: high precision (%g, %g), closed form (%g, %g)", th, got, gotM, want, wantM)
		}
		top := math.Inf(-1)
		for _, v := range lr {
			top = math.Max(top, v)
		}
		z, z0 := 0.0, 0.0
		for k, v := range lr {
			z += math.Exp(v-top) * math.Cos(th*float64(2*k-n))
			z0 += math.Exp(v - top)
		}
		if math.Abs(z/z0-want) < 1e3*math.Abs(want) {
			t.Errorf("θ=%v: float64 sum %g unexpectedly close to %g", th, z/z0, want)
		}
	}
	if tested == 0 {
		t.Fatal("no θ with sign below 1e−30")
	}
}

// Lee–Yang theorem (T. D. Lee and C. N. Yang, Phys. Rev. 87, 410 (1952)):
// the zeros of Z in z = e^{−2h} lie on |z| = 1, and Z(iθ) has N zeros for
// θ in (0, π).
func TestLeeYangCircle(t *testing.T) {
	for _, tc := range []struct{ d, l int }{{1, 10}, {2, 3}, {2, 4}} {
		c, err := Enumerate(lat(t, tc.d, tc.l))
		if err != nil {
			t.Fatal(err)
		}
		n := c.N
		beta := 0.2
		lr := c.LnRho(beta)
		// Z e^{−hN} = Σ_k ρ(N−2k) z^k; companion matrix of the monic polynomial
		coef := make([]float64, n+1)
		for k := 0; k <= n; k++ {
			coef[k] = math.Exp(lr[n-k] - lr[0]) // ρ(N−2k)/ρ(−N); the leading coefficient is 1
		}
		comp := mat.NewDense(n, n, nil)
		for i := 1; i < n; i++ {
			comp.Set(i, i-1, 1)
		}
		for i := 0; i < n; i++ {
			comp.Set(i, n-1, -coef[i]/coef[n])
		}
		var eig mat.Eigen
		if !eig.Factorize(comp, mat.EigenNone) {
			t.Fatal("eigen decomposition failed")
		}
		for _, z := range eig.Values(nil) {
			if math.Abs(cmplx.Abs(z)-1) > 1e-6 {
				t.Errorf("d=%d L=%d: zero z=%v has |z| = %v", tc.d, tc.l, z, cmplx.Abs(z))
			}
		}
		// count sign changes of Z(iθ) = Σρ cos θM on (0, π)
		changes := 0
		steps := 200000
		prev := 1.0
		for i := 1; i < steps; i++ {
			th := math.Pi * float64(i) / float64(steps)
			z := 0.0
			for k, v := range lr {
				z += math.Exp(v-lr[0]) * math.Cos(th*float64(2*k-n))
			}
			if (z > 0) != (prev > 0) {
				changes++
			}
			prev = z
		}
		if changes != n {
			t.Errorf("d=%d L=%d: %d zeros of Z(iθ) on (0, π), want N = %d", tc.d, tc.l, changes, n)
		}
	}
}

// The torus transfer matrix against brute-force enumeration.
func TestTorusTransferMatchesEnumeration(t *testing.T) {
	for l := 2; l <= 5; l++ {
		a, err := TorusCounts(l)
		if err != nil {
			t.Fatal(err)
		}
		b, _ := Enumerate(lat(t, 2, l))
		for i := range b.G {
			for k := range b.G[i] {
				if a.G[i][k] != b.G[i][k] {
					t.Fatalf("L=%d g(S=%d, M=%d): transfer %d, enumeration %d", l, 2*i-b.Bonds, 2*k-b.N, a.G[i][k], b.G[i][k])
				}
			}
		}
	}
}

// Σ_M ρ from the transfer-matrix counts against Kaufman's finite torus
// (Phys. Rev. 76, 1232 (1949)) for L = 6, 7 (and 8 outside -short).
func TestTorusTransferKaufman(t *testing.T) {
	sizes := []int{6, 7}
	if !testing.Short() {
		sizes = append(sizes, 8)
	}
	for _, l := range sizes {
		c, err := TorusCounts(l)
		if err != nil {
			t.Fatal(err)
		}
		for _, beta := range []float64{0.1, 0.3, 0.6} {
			want := KaufmanLnZ(l, l, beta)
			got := logSumExp(c.LnRho(beta))
			if math.Abs(got-want) > 1e-11*math.Abs(want) {
				t.Errorf("L=%d β=%v: ln Σρ = %.15g, Kaufman %.15g", l, beta, got, want)
			}
		}
		// total number of states 2^N (mod 2^64 at L = 8, where it is 0)
		var sum uint64
		for _, row := range c.G {
			for _, v := range row {
				sum += v
			}
		}
		if want := uint64(1) << uint(l*l%64); l*l < 64 && sum != want || l*l == 64 && sum != 0 {
			t.Errorf("L=%d: Σg = %d", l, sum)
		}
	}
}
