package stages

import (
	"encoding/json"
	"fmt"
	"math"
	"testing"

	"strata/stages/exact"
	"strata/stages/lattice"
	"strata/stages/ratio"
)

// runBranch pushes one branch through sample → ratios → stitch → transform
// in-process and returns the stitch and transform outputs.
func runBranch(t testing.TB, d, l int, beta float64, chunks, sweeps int, seed uint64, grid TransformParams) (*StitchOut, *TransformOut) {
	t.Helper()
	return runBranchOf(t, "", d, l, beta, chunks, sweeps, seed, grid)
}

// runBranchOf is runBranch for either representation (sectors "" or
// Monomer).
func runBranchOf(t testing.TB, sectors string, d, l int, beta float64, chunks, sweeps int, seed uint64, grid TransformParams) (*StitchOut, *TransformOut) {
	t.Helper()
	return runBranchOpts(t, branchOpts{sectors: sectors, block: testBlock(sweeps), minTau: 100}, d, l, beta, chunks, sweeps, seed, grid)
}

// branchOpts are the less common knobs of a test branch: the
// representation, the block length and the min_tau_ratio guard.
type branchOpts struct {
	sectors string
	block   int
	minTau  float64
}

func runBranchOpts(t testing.TB, o branchOpts, d, l int, beta float64, chunks, sweeps int, seed uint64, grid TransformParams) (*StitchOut, *TransformOut) {
	t.Helper()
	sectors := o.sectors
	lat, _ := lattice.New(d, l)
	var shards []Shard
	var inputs [][]byte
	grid.Sectors = sectors
	for _, m := range SectorsOf(sectors, ratio.Insertion, lat.N) {
		for c := 0; c < chunks; c++ {
			b, err := Sample(SampleParams{D: d, L: l, Beta: beta, Estimator: ratio.Insertion, Sectors: sectors, M: m, Chunk: c,
				Sweeps: sweeps, Therm: 100, Block: o.block, Seed: seed*7919 + uint64(1000*m+c)}).Run(nil)
			if err != nil {
				t.Fatal(err)
			}
			shards = append(shards, Shard{m, c})
			inputs = append(inputs, b)
		}
	}
	rb, err := Ratios(RatiosParams{D: d, L: l, Beta: beta, Estimator: ratio.Insertion, Sectors: sectors, Block: o.block, MinTauRatio: o.minTau, Shards: shards}).Run(inputs)
	if err != nil {
		t.Fatal(err)
	}
	sb, err := Stitch(200, seed).Run([][]byte{rb})
	if err != nil {
		t.Fatal(err)
	}
	tb, err := Transform(grid).Run([][]byte{sb})
	if err != nil {
		t.Fatal(err)
	}
	var s StitchOut
	var tr TransformOut
	if json.Unmarshal(sb, &s) != nil || json.Unmarshal(tb, &tr) != nil {
		t.Fatal("decode")
	}
	return &s, &tr
}

// testBlock is the block length of compact samples in these tests: the
// largest divisor of sweeps not above 16 (the study default).
func testBlock(sweeps int) int {
	b := 16
	for sweeps%b != 0 {
		b--
	}
	return b
}

type coverage struct{ in1, in2, n int }

func (c *coverage) add(value, err, exact float64) {
	p := math.Abs(value-exact) / err
	if p <= 1 {
		c.in1++
	}
	if p <= 2 {
		c.in2++
	}
	c.n++
}

// check applies binomial bands with about 1% false alarms for 200 runs:
// 1σ coverage (68.3%) within 60–76%, 2σ coverage (95.4%) at least 91%.
func (c *coverage) check(t *testing.T, what string) {
	f1, f2 := float64(c.in1)/float64(c.n), float64(c.in2)/float64(c.n)
	t.Logf("%s: 1σ coverage %.3f, 2σ coverage %.3f over %d runs", what, f1, f2, c.n)
	if f1 < 0.60 || f1 > 0.76 || f2 < 0.91 {
		t.Errorf("%s: 1σ coverage %.3f (want 0.60–0.76), 2σ %.3f (want ≥ 0.91)", what, f1, f2)
	}
}

// Coverage of the error bars against exact results, one pull per
// independent run: the 1D ring against the transfer-matrix closed forms
// (R. J. Baxter, Exactly Solved Models, ch. 2) and the ring domain count,
// the 2D 4×4 torus against exact enumeration.
func TestCoverage(t *testing.T) {
	if testing.Short() {
		t.Skip("200 independent runs per case")
	}
	cases := []struct {
		d, l   int
		beta   float64
		theta  float64 // grid point below the reach
		m      int     // magnetization for ln ρ
		chunks int
	}{
		{1, 10, 0.5, 0.25, 2, 2},
		{2, 4, 0.3, 0.1, 4, 2},
	}
	for _, c := range cases {
		grid := TransformParams{ThetaMin: 0, ThetaMax: 2 * c.theta, Points: 11, ReachFactor: 2, ZeroFraction: 0.95, MaxBits: 4096}
		var lnRho, sign, imM []float64
		n := 0
		switch c.d {
		case 1:
			n = c.l
			lnRho = exact.RingLnRho(n, c.beta)
			s, m := exact.RingSign(n, c.beta, c.theta)
			sign, imM = []float64{s}, []float64{m}
		case 2:
			cn, _ := exact.TorusCounts(c.l)
			n = cn.N
			lnRho = cn.LnRho(c.beta)
			s, m := exact.HighPrecision(cn.Rho(c.beta), n, c.theta, 1e-12, 4096)
			sign, imM = []float64{s}, []float64{m}
		}
		var cs, cm, cr coverage
		for seed := uint64(1); seed <= 200; seed++ {
			st, tr := runBranch(t, c.d, c.l, c.beta, c.chunks, 1000, seed, grid)
			g := 5 // θ = grid[5] = c.theta
			if math.Abs(tr.Theta[g]-c.theta) > 1e-12 {
				t.Fatalf("grid point %v, want %v", tr.Theta[g], c.theta)
			}
			cs.add(float64(tr.Sign[g]), float64(tr.SignErr[g]), sign[0])
			cm.add(float64(tr.ImM[g]), float64(tr.ImMErr[g]), imM[0])
			k := (c.m + n) / 2
			cr.add(st.LnRho[k], st.LnRhoErr[k], lnRho[k])
		}
		label := fmt.Sprintf("d=%d L=%d β=%v", c.d, c.l, c.beta)
		cs.check(t, label+" sign(θ)")
		cm.check(t, label+" Im m(θ)")
		cr.check(t, label+" ln ρ(M)")
	}
}

// Coverage of the monomer representation's error bars, one pull per
// independent run (200 runs): the sign and Im m at one θ against the exact
// ring closed forms (R. J. Baxter, Exactly Solved Models, ch. 2) and the
// 4×4 high-precision Fourier sum of exact counts, ln D(n) against the
// ring's link transfer matrix and the Krawtchouk transform of the 4×4
// counts. Then the monomer first zero of one longer run within 3σ of the
// exact zero, on a ring and on 4×4. 400 runs (with the bands of check):
// the 64-lane link chain's ring errors are honest — the spread of ln D(4)
// over 300 runs against its mean error is 0.98–1.01 on three other seed
// sets — but seeds 1–200 alone fluctuate to a 1σ coverage of 0.78 (the
// spread 2.5σ below its expectation).
func TestMonomerCoverage(t *testing.T) {
	if testing.Short() {
		t.Skip("400 independent runs per case")
	}
	cases := []struct {
		d, l   int
		beta   float64
		theta  float64
		n      int // monomers for ln D
		chunks int
	}{
		{1, 10, 0.5, 0.25, 4, 2},
		{2, 4, 0.3, 0.1, 6, 2},
	}
	for _, c := range cases {
		grid := TransformParams{ThetaMin: 0, ThetaMax: 2 * c.theta, Points: 11, ReachFactor: 2, ZeroFraction: 0.95, MaxBits: 4096}
		var lnD []float64
		var sign, imM float64
		var zero float64
		switch c.d {
		case 1:
			lnD, _ = exact.RingMonomerLnD(c.l, c.beta)
			sign, imM = exact.RingSign(c.l, c.beta, c.theta)
			zero = exact.RingFirstZero(c.l, c.beta)
		case 2:
			cn, _ := exact.TorusCounts(c.l)
			var err error
			if lnD, err = exact.MonomerLnD(cn.Rho(c.beta), cn.N, 1e-14, 4096); err != nil {
				t.Fatal(err)
			}
			sign, imM = exact.HighPrecision(cn.Rho(c.beta), cn.N, c.theta, 1e-12, 4096)
			zero = 0.18762884087762308 // strata exact --dimension 2 --size 4 --beta 0.3 (exact counts)
		}
		var cs, cm, cd coverage
		for seed := uint64(1); seed <= 400; seed++ {
			st, tr := runBranchOf(t, Monomer, c.d, c.l, c.beta, c.chunks, 1000, seed, grid)
			g := 5
			cs.add(float64(tr.Sign[g]), float64(tr.SignErr[g]), sign)
			cm.add(float64(tr.ImM[g]), float64(tr.ImMErr[g]), imM)
			cd.add(st.LnRho[c.n/2], st.LnRhoErr[c.n/2], lnD[c.n/2])
		}
		label := fmt.Sprintf("monomer d=%d L=%d β=%v", c.d, c.l, c.beta)
		cs.check(t, label+" sign(θ)")
		cm.check(t, label+" Im m(θ)")
		cd.check(t, label+" ln D(n)")
		zg := TransformParams{ThetaMin: 0, ThetaMax: 2 * zero, Points: 41, ReachFactor: 2, ZeroFraction: 0.95, MaxBits: 4096}
		_, tr := runBranchOf(t, Monomer, c.d, c.l, c.beta, 10, 5000, 999, zg)
		if tr.FirstZero == nil {
			t.Errorf("%s: no first zero resolved (exact %.6f)", label, zero)
			continue
		}
		p := (tr.FirstZero.Value - zero) / tr.FirstZero.Error
		t.Logf("%s: first zero %.5f ± %.5f, exact %.5f (pull %.2f)", label, tr.FirstZero.Value, tr.FirstZero.Error, zero, p)
		if math.Abs(p) > 3 {
			t.Errorf("%s: first zero %.5f ± %.5f, exact %.5f (pull %.1f)", label, tr.FirstZero.Value, tr.FirstZero.Error, zero, p)
		}
	}
}

// Coverage of the replica errors of the h = 0 leading-zero sequence
// θ₁^{(j)} (j = 1, 2, 3: cumulants to orders 4, 6, 8) against the same
// estimate on the exact ring density (domain count, checked against
// enumeration), one pull per independent run, with the bands of check.
func TestRoutesCoverage(t *testing.T) {
	if testing.Short() {
		t.Skip("200 independent runs")
	}
	const n, beta = 10, 0.5
	ex := &ExactOut{Kind: ExactRing, D: 1, N: n, Beta: beta, LnRho: exact.RingLnRho(n, beta)}
	grid := TransformParams{ThetaMin: 0, ThetaMax: 0.5, Points: 11, ReachFactor: 2, ZeroFraction: 0.95, MaxBits: 4096}
	cov := make([]coverage, 3)
	for seed := uint64(1); seed <= 200; seed++ {
		st, _ := runBranch(t, 1, n, beta, 2, 1000, seed, grid)
		rows, _ := cumulantRoute(8, 0, st, ex)
		for j := 1; j <= 3; j++ {
			r := rows[2*j+1] // order 2j+2
			if r.Order != 2*j+2 || math.IsNaN(float64(r.Theta1Ex)) {
				t.Fatalf("row %+v", r)
			}
			cov[j-1].add(float64(r.Theta1), float64(r.Theta1Err), float64(r.Theta1Ex))
		}
	}
	for j := range cov {
		cov[j].check(t, fmt.Sprintf("ring N=%d β=%v θ₁^(%d)", n, beta, j+1))
	}
}

// Marginal zeros (MarginalDepth) on a 32-ring at β = 0.8 (exact zero from
// the ring closed form, Baxter ch. 2). At 50 000 sweeps about half the runs
// resolve a zero and those are biased low (only runs whose sign fluctuated
// low resolve): the rule must flag at least 80% of them. At 4× the
// statistics every run resolves and at most 60% are flagged. The pulls are
// logged: the few unflagged zeros at marginal statistics are the most
// biased (a threshold on the data selects on the fluctuation), and at 4×
// the statistics a bias of about −0.7σ remains (see the README).
func TestMarginalZeros(t *testing.T) {
	if testing.Short() {
		t.Skip("72 ring runs")
	}
	const n, beta = 32, 0.8
	z := exact.RingFirstZero(n, beta)
	grid := TransformParams{ThetaMin: 0, ThetaMax: 0.5, Points: 101, ReachFactor: 2, ZeroFraction: 0.95, MaxBits: 4096}
	flagged := func(chunks int, seeds uint64) (frac float64, resolved int) {
		var pulls []float64
		marginal := 0
		for seed := uint64(1); seed <= seeds; seed++ {
			_, tr := runBranchOpts(t, branchOpts{block: 4, minTau: 100}, 1, n, beta, chunks, 320, 4000+seed, grid)
			if tr.FirstZero == nil {
				continue
			}
			resolved++
			if tr.ZeroMarginal {
				marginal++
			}
			pulls = append(pulls, (tr.FirstZero.Value-z)/tr.FirstZero.Error)
		}
		t.Logf("%d lane sweeps: %d of %d runs resolved a zero, %d marginal; pulls %.2f", chunks*320, resolved, seeds, marginal, pulls)
		return float64(marginal) / float64(max(resolved, 1)), resolved
	}
	if f, r := flagged(5, 60); r < 20 || f < 0.8 {
		t.Errorf("1600 lane sweeps: %d zeros, %.2f flagged marginal, want ≥ 20 and ≥ 0.8", r, f)
	}
	if f, r := flagged(20, 12); r < 10 || f > 0.6 {
		t.Errorf("6400 lane sweeps: %d zeros, %.2f flagged marginal, want ≥ 10 and ≤ 0.6", r, f)
	}
}

// Insertion and Bennett read the same stored fixed-M shards: on one set of
// 4×4 shards at β = 0.4 every ratio of the two agrees within twice the
// larger error (they estimate the same ratio from the same samples, so
// their difference is far below either error), and both match the exact
// counts (P. D. Beale, Phys. Rev. Lett. 76, 78 (1996), via the integer
// transfer matrix) within 4σ.
func TestInsertionBennettSameShards(t *testing.T) {
	const d, l, beta, sweeps = 2, 4, 0.4, 4096
	lat, _ := lattice.New(d, l)
	counts, _ := exact.TorusCounts(l)
	lnRho := counts.LnRho(beta)
	var shards []Shard
	var inputs [][]byte
	for _, m := range ratio.Sectors(ratio.Insertion, lat.N) {
		b, err := Sample(SampleParams{D: d, L: l, Beta: beta, Estimator: ratio.Insertion, M: m, Sweeps: sweeps, Therm: 100, Block: 16, Seed: uint64(77 + m)}).Run(nil)
		if err != nil {
			t.Fatal(err)
		}
		shards, inputs = append(shards, Shard{m, 0}), append(inputs, b)
	}
	out := map[string]RatiosOut{}
	for _, est := range []string{ratio.Insertion, ratio.Bennett} {
		rb, err := Ratios(RatiosParams{D: d, L: l, Beta: beta, Estimator: est, Block: 16, MinTauRatio: 100, Shards: shards}).Run(inputs)
		if err != nil {
			t.Fatal(err)
		}
		var r RatiosOut
		if err := json.Unmarshal(rb, &r); err != nil {
			t.Fatal(err)
		}
		out[est] = r
	}
	ins, ben := out[ratio.Insertion].Result.Ratios, out[ratio.Bennett].Result.Ratios
	for i, q := range ins {
		b := ben[i]
		k := (q.M + lat.N) / 2
		want := lnRho[k] - lnRho[k-1]
		if e := math.Max(q.Err, b.Err); math.Abs(q.LnR-b.LnR) > 2*e+1e-12 {
			t.Errorf("M=%d: insertion %.6f ± %.6f, bennett %.6f ± %.6f", q.M, q.LnR, q.Err, b.LnR, b.Err)
		}
		for _, x := range []ratio.Ratio{q, b} {
			if math.Abs(x.LnR-want) > 4*x.Err+1e-12 {
				t.Errorf("M=%d: %.6f ± %.6f, exact %.6f", x.M, x.LnR, x.Err, want)
			}
		}
	}
	// and the sample task itself does not depend on the estimator
	a := Sample(SampleParams{D: d, L: l, Beta: beta, Estimator: ratio.Insertion, M: 2, Sweeps: sweeps, Block: 16, Seed: 1})
	b := Sample(SampleParams{D: d, L: l, Beta: beta, Estimator: ratio.Bennett, M: 2, Sweeps: sweeps, Block: 16, Seed: 1})
	if fmt.Sprint(a.Params) != fmt.Sprint(b.Params) || a.Version != b.Version {
		t.Errorf("insertion and bennett shards differ in their keys: %v vs %v", a.Params, b.Params)
	}
}
