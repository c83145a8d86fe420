package stages

import (
	"math"
	"testing"

	"strata/stages/exact"
)

// The cost of the sign problem on a 48-ring at β = 0.3 (|sign| falls
// monotonically to ~1e−13 at the first zero 0.5818, so the reach stays
// below it; exact sign from the ring closed form, Baxter ch. 2): over four
// rungs of statistics, factor 10 apart, the exact −ln|sign| at the reach
// grows like ½ ln(sweeps) (the sign's error falls like statistics^−½,
// common practice: slope within 0.15 of ½), and at every rung the exact
// |sign| at the reach lies within [0, (f + 3)σ].
func TestCostSlopeHalf(t *testing.T) {
	if testing.Short() {
		t.Skip("up to 10^6 sweeps per sector on a 48-ring")
	}
	const n, beta, f = 48, 0.3, 2.0
	grid := TransformParams{ThetaMin: 0, ThetaMax: 0.58, Points: 117, ReachFactor: f, ZeroFraction: 0.95, MaxBits: 4096}
	var x, y []float64
	for k, sweeps := range []int{1000, 10000, 100000, 1000000} {
		_, tr := runBranch(t, 1, n, beta, 10, sweeps/10, 60+uint64(k), grid)
		r := float64(tr.ReachBelowZero)
		i := int(math.Round(r / 0.005))
		s, _ := exact.RingSign(n, beta, r)
		sigma := float64(tr.SignErr[i])
		t.Logf("%d sweeps: reach %v, exact sign %.3g, σ %.3g", sweeps, r, s, sigma)
		if !(math.Abs(s) <= (f+3)*sigma) {
			t.Errorf("%d sweeps: exact |sign| %.3g at the reach %v exceeds (f+3)σ = %.3g", sweeps, s, r, (f+3)*sigma)
		}
		x, y = append(x, math.Log(float64(sweeps))), append(y, -math.Log(math.Abs(s)))
	}
	mx, my := (x[0]+x[1]+x[2]+x[3])/4, (y[0]+y[1]+y[2]+y[3])/4
	num, den := 0.0, 0.0
	for i := range x {
		num += (x[i] - mx) * (y[i] - my)
		den += (x[i] - mx) * (x[i] - mx)
	}
	slope := num / den
	t.Logf("slope of −ln|sign(reach)| against ln(sweeps): %.3f", slope)
	if math.Abs(slope-0.5) > 0.15 {
		t.Errorf("slope %.3f, want 0.5 ± 0.15", slope)
	}
}
