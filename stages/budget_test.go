package stages

import (
	"math"
	"sort"
	"testing"

	"strata/stages/exact"
	"strata/stages/transform"
)

func curveOf(tr *TransformOut) *transform.Curve {
	return &transform.Curve{Theta: tr.Theta, Sign: Floats(tr.Sign), SignErr: Floats(tr.SignErr)}
}

// budgetOpts: the budget tests count statistics in chunks of a few lane
// sweeps (one 64-lane sweep is worth tens of scalar sweeps), stored per
// sweep (block 1); their protocol does not need the min_tau_ratio guard.
var budgetOpts = branchOpts{block: 1}

// The budget planner's prediction S* (from error ∝ 1/√S and the exact
// ring sign, Baxter ch. 2) is tested over 10 seeds: with S* sweeps the
// reach gets to X − Δθ in at least 8 runs, with S*/4 it stays below X in at
// least 8.
func TestBudgetPrediction(t *testing.T) {
	if testing.Short() {
		t.Skip("30 pipeline runs")
	}
	l, beta := 24, 0.3
	x := 0.53 // exact sign 1.6e−4, first zero 0.584
	grid := TransformParams{ThetaMin: 0, ThetaMax: 0.6, Points: 61, ReachFactor: 2, ZeroFraction: 0.95, MaxBits: 4096}
	dtheta := 0.01
	exactSign, _ := exact.RingSign(l, beta, x)
	const unit = 64 // sweeps per chunk
	// run about s sweeps per sector in chunks of at most unit
	runWith := func(s float64, seed uint64) *TransformOut {
		chunks := int(math.Ceil(s / unit))
		_, tr := runBranchOpts(t, budgetOpts, 1, l, beta, chunks, int(math.Ceil(s/float64(chunks))), seed, grid)
		return tr
	}
	full, quarter := 0, 0
	for seed := uint64(1); seed <= 10; seed++ {
		_, tr := runBranchOpts(t, budgetOpts, 1, l, beta, 1, unit, 100+seed, grid)
		p, err := transform.Budget(curveOf(tr), transform.BudgetInput{N: l, Reach: float64(tr.Reach), Lo: math.NaN(), Hi: math.NaN(),
			Zero: exact.RingFirstZero(l, beta), X: x, Sweeps: unit, Factor: 2, ExactSign: exactSign, Probability: 0.5})
		if err != nil {
			t.Fatal(err)
		}
		if p.Sweeps < 2*unit {
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

// binomialBand99 returns the central 99% band [lo, hi] of the number of
// successes in n trials with probability p (exact binomial tails).
func binomialBand99(n int, p float64) (lo, hi int) {
	pmf := func(k int) float64 {
		lc, _ := math.Lgamma(float64(n + 1))
		a, _ := math.Lgamma(float64(k + 1))
		b, _ := math.Lgamma(float64(n - k + 1))
		return math.Exp(lc - a - b + float64(k)*math.Log(p) + float64(n-k)*math.Log1p(-p))
	}
	cum := 0.0
	for lo = 0; lo <= n; lo++ {
		if cum+pmf(lo) > 0.005 {
			break
		}
		cum += pmf(lo)
	}
	cum = 0
	for hi = n; hi >= 0; hi-- {
		if cum+pmf(hi) > 0.005 {
			break
		}
		cum += pmf(hi)
	}
	return lo, hi
}

// honesty runs the budget-honesty protocol: per seed, a pilot of two
// chunks of unit sweeps predicts S* for probability prob at θ = x; one
// independent run at S* counts as a hit when its reach below the zero gets
// to x, and a nested ×2 ladder (S*/8 … 2S*) finds the smallest sufficient
// sweeps. The hits must lie in the 99% binomial band of prob and the
// median S*/S_min be ≤ 4.
func honesty(t *testing.T, d, l int, beta, x, zero, exactSign float64, grid TransformParams, seeds uint64, unit int) {
	t.Helper()
	const prob = 0.9
	n := 1
	for i := 0; i < d; i++ {
		n *= l
	}
	reaches := func(chunks int, seed uint64) bool {
		_, tr := runBranchOpts(t, budgetOpts, d, l, beta, chunks, unit, seed, grid)
		return float64(tr.ReachBelowZero) >= x-1e-9
	}
	hits := 0
	var ratios []float64
	for s := uint64(1); s <= seeds; s++ {
		_, pilot := runBranchOpts(t, budgetOpts, d, l, beta, 2, unit, 500+s, grid)
		p, err := transform.Budget(curveOf(pilot), transform.BudgetInput{N: n, Reach: float64(pilot.Reach), Lo: math.NaN(), Hi: math.NaN(),
			Zero: zero, X: x, Sweeps: float64(2 * unit), Factor: grid.ReachFactor, ExactSign: exactSign, Probability: prob})
		if err != nil {
			t.Fatal(err)
		}
		star := int(math.Ceil(p.Sweeps / float64(unit))) // chunks
		if star < 8 {
			t.Fatalf("seed %d: S* = %v too small for a ×2 ladder below it", s, p.Sweeps)
		}
		if reaches(star, 900+s) {
			hits++
		}
		smallest := math.NaN()
		for _, c := range []int{star / 8, star / 4, star / 2, star, 2 * star} {
			if reaches(c, 700+s) {
				smallest = float64(c)
				break
			}
		}
		ratios = append(ratios, float64(star)/smallest) // NaN sorts first: counted as a miss
	}
	lo, hi := binomialBand99(int(seeds), prob)
	sort.Float64s(ratios)
	t.Logf("reached %d/%d (band [%d, %d]); S*/S_min: %v", hits, seeds, lo, hi, ratios)
	if hits < lo || hits > hi {
		t.Errorf("%d of %d runs with S* reached θ = %v; the 99%% band of P = %v is [%d, %d]", hits, seeds, x, prob, lo, hi)
	}
	if med := ratios[len(ratios)/2]; !(med <= 4) {
		t.Errorf("median S*/S_min = %v, want ≤ 4", med)
	}
}

// Budget honesty (its success probability is the claim under test) on a
// 24-ring at β = 0.3 (exact sign and zero from the closed forms, Baxter
// ch. 2): X = 0.5 (sign 7.1e−4, below the first zero 0.584), 24 seeds.
func TestBudgetHonesty(t *testing.T) {
	if testing.Short() {
		t.Skip("24 pilots and ladders")
	}
	const l, beta, x = 24, 0.3, 0.5
	grid := TransformParams{ThetaMin: 0, ThetaMax: 0.55, Points: 111, ReachFactor: 2, ZeroFraction: 0.95, MaxBits: 4096}
	exactSign, _ := exact.RingSign(l, beta, x)
	honesty(t, 1, l, beta, x, exact.RingFirstZero(l, beta), exactSign, grid, 24, 64)
}

// Budget honesty on the 8×8 torus at β = 0.2 (exact sign from the integer
// transfer-matrix counts, checked against enumeration and Kaufman): X = 0.245
// below the first zero 0.2725, 10 seeds.
func TestBudgetHonestyTorus(t *testing.T) {
	if testing.Short() {
		t.Skip("10 pilots and ladders on 8×8")
	}
	const l, beta, x = 8, 0.2, 0.245
	grid := TransformParams{ThetaMin: 0, ThetaMax: 0.27, Points: 55, ReachFactor: 2, ZeroFraction: 0.95, MaxBits: 4096}
	counts, err := exact.TorusCounts(l)
	if err != nil {
		t.Fatal(err)
	}
	ex := &ExactOut{Kind: ExactCounts, N: l * l, Beta: beta, Counts: counts}
	sg, _ := ExactOnGrid(ex, []float64{x}, 4096)
	zero, _ := firstZeroScan(l*l, counts.LnRho(beta), counts.LnRhoErr(beta))
	honesty(t, 2, l, beta, x, zero, float64(sg[0]), grid, 10, 16)
}
