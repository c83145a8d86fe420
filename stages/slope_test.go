package stages

import (
	"math"
	"sort"
	"testing"

	"strata/stages/exact"
)

// The cost of the sign problem on a 48-ring at β = 0.3 (|sign| falls
// monotonically to ~1e−13 at the first zero 0.5818, so the reach stays
// below it; exact sign from the ring closed form, Baxter ch. 2): over four
// rungs of statistics, factor 8 apart, the exact −ln|sign| at the reach
// grows like ½ ln(sweeps) (the sign's error falls like statistics^−½,
// common practice: slope within 0.15 of ½), and at every run the exact
// |sign| at the reach lies within [0, (f + 3)σ]. Each rung takes the median
// of three independent runs: the sign's error at large θ is dominated by
// one mode (ρ(M = 0)), so a single 2σ fluctuation shifts the whole tail
// and can carry one run's reach far out (seen: one run at 160 000 sweeps
// reaching 0.5, where the exact sign is 5e−7 and σ = 9.5e−6).
func TestCostSlopeHalf(t *testing.T) {
	if testing.Short() {
		t.Skip("up to 128 000 64-lane sweeps per sector on a 48-ring, three times")
	}
	const n, beta, f = 48, 0.3, 2.0
	grid := TransformParams{ThetaMin: 0, ThetaMax: 0.58, Points: 117, ReachFactor: f, ZeroFraction: 0.95, MaxBits: 4096}
	var x, y []float64
	for k, sweeps := range []int{250, 2000, 16000, 128000} {
		var runs []float64
		for rep := 0; rep < 3; rep++ {
			// 64-lane sweeps, stored per sweep (one lane sweep is worth tens
			// of scalar ones)
			_, tr := runBranchOpts(t, branchOpts{block: 1, minTau: 100}, 1, n, beta, 10, sweeps/10, 60+uint64(10*k+rep), grid)
			r := float64(tr.ReachBelowZero)
			i := int(math.Round(r / 0.005))
			s, _ := exact.RingSign(n, beta, r)
			sigma := float64(tr.SignErr[i])
			t.Logf("%d sweeps, run %d: reach %v, exact sign %.3g, σ %.3g", sweeps, rep, r, s, sigma)
			if !(math.Abs(s) <= (f+3)*sigma) {
				t.Errorf("%d sweeps: exact |sign| %.3g at the reach %v exceeds (f+3)σ = %.3g", sweeps, s, r, (f+3)*sigma)
			}
			runs = append(runs, -math.Log(math.Abs(s)))
		}
		sort.Float64s(runs)
		x, y = append(x, math.Log(float64(sweeps))), append(y, runs[1])
	}
	mx, my := (x[0]+x[1]+x[2]+x[3])/4, (y[0]+y[1]+y[2]+y[3])/4
	num, den := 0.0, 0.0
	for i := range x {
		num += (x[i] - mx) * (y[i] - my)
		den += (x[i] - mx) * (x[i] - mx)
	}
	slope := num / den
	t.Logf("slope of the median −ln|sign(reach)| against ln(sweeps): %.3f", slope)
	if math.Abs(slope-0.5) > 0.15 {
		t.Errorf("slope %.3f, want 0.5 ± 0.15", slope)
	}
}
