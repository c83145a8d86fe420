package fss

import (
	"math"
	"testing"

	"strata/stages/exact"
)

// Fits on the exact 1D first zeros (closed form, PHYSICS.md) converge to
// the exact edge θ_c = arcsin(e^{−2β}) with y → 2 (the transfer-matrix
// gap closes as N^{−2}) as the smallest size grows; on small sizes the
// leading-power fit is visibly biased.
func TestRingFitConverges(t *testing.T) {
	beta := 0.7
	fit := func(sizes []int) Fit {
		var pts []Point
		for _, n := range sizes {
			pts = append(pts, Point{L: n, Theta: exact.RingFirstZero(n, beta), Err: 1e-9})
		}
		f, err := Solve(pts, 2, true, false)
		if err != nil {
			t.Fatal(err)
		}
		return f
	}
	want := exact.RingEdge(beta)
	small := fit([]int{8, 12, 16, 20, 24})
	if math.Abs(small.ThetaC-want) < 2e-4 {
		t.Errorf("small sizes: θ_c = %v, exact %v: expected a visible bias", small.ThetaC, want)
	}
	large := fit([]int{400, 500, 600, 800, 1000})
	if math.Abs(large.ThetaC-want) > 1e-6 || math.Abs(large.Y-2) > 1e-3 {
		t.Errorf("large sizes: θ_c = %v (exact %v), y = %v (exact 2)", large.ThetaC, want, large.Y)
	}
	if math.Abs(large.ThetaC-want) >= math.Abs(small.ThetaC-want) {
		t.Error("the fit does not improve with size")
	}
}

// 2D: free-y fits on exact first zeros of tori L = 4…8 at high temperature
// (β = 0.10, 0.15) give y within 0.1 of the Yang–Lee value y_h = 12/5 of
// the non-unitary minimal model M(2,5) (J. L. Cardy, Phys. Rev. Lett. 54,
// 1354 (1985)).
func TestTorusExponent(t *testing.T) {
	if testing.Short() {
		t.Skip("needs the 8×8 transfer matrix (several seconds)")
	}
	counts := map[int]*exact.Counts{}
	for l := 4; l <= 8; l++ {
		c, err := exact.TorusCounts(l)
		if err != nil {
			t.Fatal(err)
		}
		counts[l] = c
	}
	for _, beta := range []float64{0.10, 0.15} {
		var pts []Point
		for l := 4; l <= 8; l++ {
			z := firstZero(l*l, counts[l].LnRho(beta))
			pts = append(pts, Point{L: l, Theta: z, Err: 1e-9 * z})
		}
		f, err := Solve(pts, 2, true, false)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(f.Y-2.4) > 0.1 {
			t.Errorf("β=%v: y = %v, want 2.4 ± 0.1 (θ_c = %v)", beta, f.Y, f.ThetaC)
		}
	}
}

func firstZero(n int, lnRho []float64) float64 {
	sign := func(th float64) float64 {
		z := 0.0
		for k, v := range lnRho {
			z += math.Exp(v-lnRho[0]) * math.Cos(th*float64(2*k-n))
		}
		return z
	}
	const steps = 20000
	for i := 1; i <= steps; i++ {
		a, b := math.Pi/2*float64(i-1)/steps, math.Pi/2*float64(i)/steps
		if sign(a) > 0 && sign(b) <= 0 {
			for it := 0; it < 100; it++ {
				m := (a + b) / 2
				if sign(m) > 0 {
					a = m
				} else {
					b = m
				}
			}
			return (a + b) / 2
		}
	}
	return math.NaN()
}

func TestTooFewPoints(t *testing.T) {
	_, err := Solve([]Point{{L: 4, Theta: 1, Err: 1}, {L: 8, Theta: 0.9, Err: 1}, {L: 16, Theta: 0.8, Err: 1}}, 2, true, false)
	if err != ErrTooFew {
		t.Errorf("3 points, 3 parameters: %v", err)
	}
	if _, err := Solve([]Point{{L: 4, Theta: 1, Err: 1}, {L: 8, Theta: 0.9, Err: 1}, {L: 16, Theta: 0.85, Err: 1}}, 2, false, false); err != nil {
		t.Errorf("fixed y with 3 points: %v", err)
	}
}
