package stages

import (
	"math"
	"testing"

	"strata/stages/exact"
	"strata/stages/transform"
)

func curveOf(tr *TransformOut) *transform.Curve {
	return &transform.Curve{Theta: tr.Theta, Sign: Floats(tr.Sign), SignErr: Floats(tr.SignErr)}
}

// The budget planner's prediction S* (from error ∝ 1/√S and the exact
// ring sign, Baxter ch. 2) is tested over 10 seeds: with S* sweeps the
// reach gets to X − Δθ in at least 8 runs, with S*/4 it stays below X in at
// least 8.
func TestBudgetPrediction(t *testing.T) {
	if testing.Short() {
		t.Skip("30 pipeline runs")
	}
	l, beta := 24, 0.3
	x := 0.48 // exact sign 1.6e−3, first zero 0.584
	grid := TransformParams{ThetaMin: 0, ThetaMax: 0.6, Points: 61, ReachFactor: 2, ZeroFraction: 0.95, MaxBits: 4096}
	dtheta := 0.01
	exactSign, _ := exact.RingSign(l, beta, x)
	// run about s sweeps per sector in chunks of at most 1000
	runWith := func(s float64, seed uint64) *TransformOut {
		chunks := int(math.Ceil(s / 1000))
		_, tr := runBranch(t, 1, l, beta, chunks, int(math.Ceil(s/float64(chunks))), seed, grid)
		return tr
	}
	full, quarter := 0, 0
	for seed := uint64(1); seed <= 10; seed++ {
		_, tr := runBranch(t, 1, l, beta, 1, 1000, 100+seed, grid)
		p, err := transform.Budget(curveOf(tr), l, float64(tr.Reach), math.NaN(), math.NaN(), x, 1000, 2, exactSign)
		if err != nil {
			t.Fatal(err)
		}
		if p.Sweeps < 2000 {
			t.Fatalf("seed %d: predicted %v sweeps; the test needs X beyond the base reach", seed, p.Sweeps)
		}
		a := runWith(p.Sweeps, 200+seed)
		if float64(a.Reach) >= x-dtheta-1e-9 {
			full++
		}
		b := runWith(p.Sweeps/4, 300+seed)
		if float64(b.Reach) < x-1e-9 {
			quarter++
		}
		t.Logf("seed %d: S* = %.0f, reach with S* %v, with S*/4 %v", seed, p.Sweeps, a.Reach, b.Reach)
	}
	if full < 8 || quarter < 8 {
		t.Errorf("with S*: %d/10 reached X−Δθ; with S*/4: %d/10 stayed below X", full, quarter)
	}
}
