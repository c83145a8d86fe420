package ratio_test

import (
	"math"
	"strings"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"

	"strata/stages/dos"
	"strata/stages/exact"
	"strata/stages/lattice"
	"strata/stages/ratio"
	"strata/stages/sampler"
)

// estimate runs the chains one estimator needs on L^d and returns its
// ratios; chunks independent chains of sweeps each per label.
func estimate(t testing.TB, est string, d, l int, beta float64, sweeps, chunks int, seed uint64) (*ratio.Result, int) {
	t.Helper()
	lat, err := lattice.New(d, l)
	if err != nil {
		t.Fatal(err)
	}
	n := lat.N
	block := 16
	for sweeps%block != 0 {
		block--
	}
	in := &ratio.Input{D: d, N: n, Beta: beta, Cols: map[string]int{ratio.Insertion: 2, ratio.Bennett: 2 * sampler.HistWidth(d), ratio.Indicator: 1}[est], Series: map[int][][]float64{}, MinTauRatio: 100, SweepsPerRow: block}
	for _, m := range ratio.Sectors(est, n) {
		for c := 0; c < chunks; c++ {
			ch := sampler.Chain{Lat: lat, Beta: beta, M: m, Therm: 100, Sweeps: sweeps,
				Seed: seed*1000003 + uint64(m+n)*101 + uint64(c)}
			var raw []uint32
			if ratio.ChainOf(est) == ratio.ChainPair {
				raw, err = sampler.PairLanes(ch, block)
			} else {
				raw, err = sampler.SectorLanes(ch, block)
			}
			if err != nil {
				t.Fatal(err)
			}
			data, err := ratio.Cook(est, d, n, m, beta, raw)
			if err != nil {
				t.Fatal(err)
			}
			in.Series[m] = append(in.Series[m], data)
		}
	}
	res, err := ratio.Estimate(est, in)
	if err != nil {
		t.Fatal(err)
	}
	return res, n
}

// checkAgainst compares ln r(M) with exact ln ρ: the χ² of the pulls must
// lie in the two-sided 99% band of a χ² with as many degrees of freedom as
// pulls, and no pull may exceed 4σ.
func checkAgainst(t *testing.T, res *ratio.Result, n int, lnRho []float64, label string) {
	t.Helper()
	chi2, dof := 0.0, 0
	for _, q := range res.Ratios {
		want := lnRho[(q.M+n)/2] - lnRho[(q.M-2+n)/2]
		if q.Err == 0 {
			if math.Abs(q.LnR-want) > 1e-10 {
				t.Errorf("%s M=%d: exact ratio %v, want %v", label, q.M, q.LnR, want)
			}
			continue
		}
		pull := (q.LnR - want) / q.Err
		if math.Abs(pull) > 4 {
			t.Errorf("%s M=%d: ln r = %v ± %v, exact %v (pull %.2f)", label, q.M, q.LnR, q.Err, want, pull)
		}
		chi2 += pull * pull
		dof++
	}
	if dof == 0 {
		return
	}
	dist := distuv.ChiSquared{K: float64(dof)}
	lo, hi := dist.Quantile(0.005), dist.Quantile(0.995)
	if chi2 < lo || chi2 > hi {
		t.Errorf("%s: χ² = %.1f for %d pulls, outside the 99%% band [%.1f, %.1f]", label, chi2, dof, lo, hi)
	}
}

// Ring ratios against the exact ring density of states (domain counting,
// confirmed by enumeration in package exact), for every estimator. This is
// also the guard against a non-ergodic two-sector chain (a deterministic
// site order with acceptance 1 at ΔS ≥ 0 gets ln r wrong by O(1) on a
// 12-site ring, far outside these pulls).
func TestRingAgainstExact(t *testing.T) {
	sizes := []int{8, 12, 24, 64}
	if testing.Short() {
		sizes = []int{8, 12, 24}
	}
	seed := uint64(1)
	for _, est := range ratio.Estimators {
		for _, n := range sizes {
			for _, beta := range []float64{0.2, 0.6, 1.0} {
				seed++
				res, _ := estimate(t, est, 1, n, beta, 1000, 4, seed)
				checkAgainst(t, res, n, exact.RingLnRho(n, beta), est+" ring")
			}
		}
	}
}

// 2D 4×4 and 3D lattices against exact enumeration.
func TestLatticesAgainstEnumeration(t *testing.T) {
	cases := []struct{ d, l int }{{2, 4}, {3, 2}, {2, 3}}
	if !testing.Short() {
		cases = append(cases, struct{ d, l int }{3, 3})
	}
	for i, c := range cases {
		lat, _ := lattice.New(c.d, c.l)
		counts, err := exact.Enumerate(lat)
		if err != nil {
			t.Fatal(err)
		}
		for _, beta := range []float64{0.15, 0.3} {
			for j, est := range ratio.Estimators {
				res, n := estimate(t, est, c.d, c.l, beta, 1000, 4, uint64(100+10*i+j))
				checkAgainst(t, res, n, counts.LnRho(beta), est+" lattice")
			}
		}
	}
}

// In the top two sectors the insertion measurement is constant:
// ρ(N−2)/ρ(N) = N e^{−4dβ} and ρ(N−4)/ρ(N−2) = [2d e^{−2β(2d−2)} +
// (N−1−2d) e^{−4dβ}]/2 (L ≥ 3; ../shared/PHYSICS.md, "Sector ratios", checked
// there by enumeration). The error must be exactly 0.
func TestTopSectorsClosedForm(t *testing.T) {
	for _, c := range []struct{ d, l int }{{1, 7}, {2, 4}, {3, 3}} {
		beta := 0.37
		res, n := estimate(t, ratio.Insertion, c.d, c.l, beta, 2000, 1, 5)
		dd := float64(c.d)
		want := []float64{
			-math.Log(float64(n) * math.Exp(-4*dd*beta)),
			-math.Log((2*dd*math.Exp(-2*beta*(2*dd-2)) + (float64(n)-1-2*dd)*math.Exp(-4*dd*beta)) / 2),
		}
		for i, w := range want {
			q := res.Ratios[i]
			if q.Err != 0 || math.Abs(q.LnR-w) > 1e-12 {
				t.Errorf("d=%d L=%d M=%d: ln r = %v ± %v, closed form %v with error 0", c.d, c.l, q.M, q.LnR, q.Err, w)
			}
		}
	}
}

// The three estimators agree with each other on a 2D 8×8 lattice.
func TestEstimatorsAgree8x8(t *testing.T) {
	if testing.Short() {
		t.Skip("long physics run")
	}
	beta := 0.3
	var results []*ratio.Result
	for i, est := range ratio.Estimators {
		res, _ := estimate(t, est, 2, 8, beta, 1000, 4, uint64(77+i))
		results = append(results, res)
	}
	for a := 0; a < len(results); a++ {
		for b := a + 1; b < len(results); b++ {
			chi2, dof := 0.0, 0
			for i := range results[a].Ratios {
				qa, qb := results[a].Ratios[i], results[b].Ratios[i]
				s := math.Hypot(qa.Err, qb.Err)
				if s == 0 {
					continue
				}
				p := (qa.LnR - qb.LnR) / s
				chi2 += p * p
				dof++
				if math.Abs(p) > 4 {
					t.Errorf("%s vs %s M=%d: pull %.2f", ratio.Estimators[a], ratio.Estimators[b], qa.M, p)
				}
			}
			dist := distuv.ChiSquared{K: float64(dof)}
			if chi2 > dist.Quantile(0.995) {
				t.Errorf("%s vs %s: χ² = %.1f for %d", ratio.Estimators[a], ratio.Estimators[b], chi2, dof)
			}
		}
	}
}

// At h = 0, Σ_M ρ(M) from stitched Monte Carlo ratios matches Kaufman's
// exact finite-torus partition function (B. Kaufman, Phys. Rev. 76, 1232
// (1949)) within 3σ, the error from replicas.
func TestKaufmanFromMonteCarlo(t *testing.T) {
	sizes := []int{4, 8}
	if testing.Short() {
		sizes = []int{4}
	}
	for _, l := range sizes {
		beta := 0.3
		res, n := estimate(t, ratio.Insertion, 2, l, beta, 1000, 8, uint64(300+l))
		lnr := make([]float64, len(res.Ratios))
		for i, q := range res.Ratios {
			lnr[i] = q.LnR
		}
		lnZ := func(lr []float64) float64 {
			rho := dos.Stitch(2, n, beta, lr)
			top := math.Inf(-1)
			for _, v := range rho {
				top = math.Max(top, v)
			}
			s := 0.0
			for _, v := range rho {
				s += math.Exp(v - top)
			}
			return top + math.Log(s)
		}
		central := lnZ(lnr)
		var reps []float64
		for _, r := range dos.Replicas(res, 400, 9) {
			reps = append(reps, lnZ(r))
		}
		m, s := 0.0, 0.0
		for _, v := range reps {
			m += v
		}
		m /= float64(len(reps))
		for _, v := range reps {
			s += (v - m) * (v - m)
		}
		sigma := math.Sqrt(s / float64(len(reps)-1))
		want := exact.KaufmanLnZ(l, l, beta)
		if math.Abs(central-want) > 3*sigma {
			t.Errorf("L=%d: ln Σρ = %v ± %v, Kaufman %v", l, central, sigma, want)
		}
	}
}

// A series shorter than min_tau_ratio·τ_int is refused with a message that
// names the sector (rule of thumb ~100 τ_int: U. Wolff, Comput. Phys.
// Commun. 156, 143 (2004)); the same chain with enough data passes.
func TestShortSeriesRefused(t *testing.T) {
	ar := func(n int, phi float64) []float64 {
		x := make([]float64, 2*n)
		v := 0.0
		r := uint64(12345)
		for i := 0; i < n; i++ {
			r = r*6364136223846793005 + 1442695040888963407
			u := float64(r>>11)/float64(1<<53) - 0.5
			v = phi*v + u
			x[2*i], x[2*i+1] = 1+0.1*v, 1+0.1*v // A and B columns, positive
		}
		return x
	}
	mk := func(n int) *ratio.Input {
		in := &ratio.Input{D: 1, N: 4, Beta: 0.3, Cols: 2, Series: map[int][][]float64{}, MinTauRatio: 100}
		for _, m := range []int{4, 2, 0} {
			in.Series[m] = [][]float64{ar(n, 0.98)}
		}
		return in
	}
	_, err := ratio.Estimate(ratio.Insertion, mk(2000))
	if err == nil || !strings.Contains(err.Error(), "sector M=") || !strings.Contains(err.Error(), "τ_int") {
		t.Errorf("short correlated series: %v", err)
	}
	if _, err := ratio.Estimate(ratio.Insertion, mk(40000)); err != nil {
		t.Errorf("long series refused: %v", err)
	}
}

// A monomer sector whose series cannot be analysed (here the sectors
// n = 4, 6 of an 8-ring never sampled the move they measure, A ≡ 0; n = 8
// has no A) is reported by sector in one error, never a panic or an
// infinite ratio.
func TestMonomerSectorRefused(t *testing.T) {
	const n = 8
	in := &ratio.Input{D: 1, N: n, Beta: 0.5, Cols: 2, Monomer: true, Series: map[int][][]float64{}, MinTauRatio: 100}
	for m := 0; m <= n; m += 2 {
		rows := make([]float64, 2*2000)
		for s := 0; s < 2000; s++ {
			a, b := 1+0.1*float64(s%7), 1+0.1*float64(s%5)
			if m >= 4 {
				a = 0 // never sampled
			}
			rows[2*s], rows[2*s+1] = a, b
		}
		in.Series[m] = [][]float64{rows}
	}
	_, err := ratio.Estimate(ratio.Insertion, in)
	if err == nil {
		t.Fatal("sectors with A ≡ 0 were accepted")
	}
	for _, want := range []string{"n=4", "n=6", "2 monomer sector(s)"} {
		if !strings.Contains(err.Error(), want) {
			t.Errorf("error %q does not name %s", err, want)
		}
	}
	if _, err := ratio.Estimate(ratio.Bennett, in); err == nil || !strings.Contains(err.Error(), "no monomer form") {
		t.Errorf("bennett on monomer sectors: %v", err)
	}
}
