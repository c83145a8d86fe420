package links

import (
	"fmt"
	"math"
	"testing"

	"strata/stages/analysis"
	"strata/stages/exact"
	"strata/stages/lattice"
)

// sectorRatios runs one chain per sector n = 0, 2, …, ≤ N and returns
// ln[D(n+2)/D(n)] = ln⟨A⟩_n − ln⟨B⟩_{n+2} with its Γ-method error.
func sectorRatios(t *testing.T, lt *Lattice, beta float64, sweeps int, seed uint64, dropWinding []int) (lnr, errs []float64) {
	t.Helper()
	return ratiosOf(t, lt, sweeps, func(n int) ([]float64, error) {
		return Chain{Lat: lt, Beta: beta, Monomers: n, Therm: 500, Sweeps: sweeps, Seed: seed + uint64(n), DropWinding: dropWinding}.Run()
	})
}

// ratiosOf runs one chain per sector n (run returns its rows A, B) and
// returns ln[D(n+2)/D(n)] = ln⟨A⟩_n − ln⟨B⟩_{n+2} with its Γ-method error.
func ratiosOf(t *testing.T, lt *Lattice, sweeps int, run func(n int) ([]float64, error)) (lnr, errs []float64) {
	t.Helper()
	top := lt.N - lt.N%2
	A := map[int]analysis.Result{}
	B := map[int]analysis.Result{}
	for n := 0; n <= top; n += 2 {
		data, err := run(n)
		if err != nil {
			t.Fatal(err)
		}
		a, b := make([]float64, sweeps), make([]float64, sweeps)
		for s := 0; s < sweeps; s++ {
			a[s], b[s] = data[2*s], data[2*s+1]
		}
		A[n] = analysis.Gamma([][]float64{a}, analysis.DefaultS)
		B[n] = analysis.Gamma([][]float64{b}, analysis.DefaultS)
	}
	for n := 0; n+2 <= top; n += 2 {
		a, b := A[n], B[n+2]
		lnr = append(lnr, math.Log(a.Mean)-math.Log(b.Mean))
		errs = append(errs, math.Hypot(a.Err/a.Mean, b.Err/b.Mean))
	}
	return lnr, errs
}

func exactRatios(t *testing.T, rho exact.RhoFunc, n int) []float64 {
	t.Helper()
	lnD, err := exact.MonomerLnD(rho, n, 1e-13, 1<<12)
	if err != nil {
		t.Fatal(err)
	}
	out := make([]float64, len(lnD)-1)
	for m := range out {
		out[m] = lnD[m+1] - lnD[m]
	}
	return out
}

// The chain's ratios D(n+2)/D(n) against the exact monomer density from
// exact counts (Krawtchouk transform, tested against the check value
// D(2)/D(0) = 15.8344238770326 on 3×3 and against the magnetization
// Fourier sum) or, on rings of 32 and 64 sites, from the ring's link
// transfer matrix (tested against the Krawtchouk transform): χ²/dof of the
// pulls below the 99% point of χ² and no pull beyond 4σ, on rings
// (N = 8, 12, 32, 64; β from 0.2 to 1.0), 3×3, 4×4 and 3³. Before the pair
// and segment moves the 64-ring gave χ² ≈ 56–93 for 32 ratios (errors
// ~1.5× too small); with them 24 and 30 (β = 1.0, 0.6).
func TestMonomerRatiosAgainstExact(t *testing.T) {
	type tc struct {
		name   string
		d, l   int
		beta   float64
		rho    exact.RhoFunc // nil: ring transfer matrix
		sweeps int
	}
	c33, _ := exact.Enumerate(mustLat(t, 2, 3))
	c44, _ := exact.TorusCounts(4)
	c333, _ := exact.Enumerate(mustLat(t, 3, 3))
	cases := []tc{
		{"3x3x3", 3, 3, 0.2, c333.Rho(0.2), 20000},
		{"ring8", 1, 8, 0.5, exact.RingRho(8, 0.5), 20000},
		{"ring12", 1, 12, 1.0, exact.RingRho(12, 1.0), 20000},
		{"ring32", 1, 32, 0.2, nil, 20000},
		{"3x3", 2, 3, 0.3, c33.Rho(0.3), 20000},
		{"4x4", 2, 4, 0.3, c44.Rho(0.3), 20000},
	}
	if !testing.Short() {
		cases = append(cases, tc{"ring64", 1, 64, 0.6, nil, 20000}, tc{"ring64", 1, 64, 1.0, nil, 20000})
	}
	for _, c := range cases {
		lt, err := NewLattice(c.d, c.l)
		if err != nil {
			t.Fatal(err)
		}
		got, errs := sectorRatios(t, lt, c.beta, c.sweeps, 11, nil)
		checkRatios(t, c.name, got, errs, wantRatios(t, lt, c.beta, c.rho))
	}
}

// wantRatios returns the exact ln[D(n+2)/D(n)]: from rho by the
// Krawtchouk transform, or for rho == nil from the ring's link transfer
// matrix.
func wantRatios(t *testing.T, lt *Lattice, beta float64, rho exact.RhoFunc) []float64 {
	t.Helper()
	if rho != nil {
		return exactRatios(t, rho, lt.N)
	}
	lnD, err := exact.RingMonomerLnD(lt.N, beta)
	if err != nil {
		t.Fatal(err)
	}
	var want []float64
	for m := 1; m < len(lnD); m++ {
		want = append(want, lnD[m]-lnD[m-1])
	}
	return want
}

// checkRatios fails on a pull beyond 4σ or a χ² above the 99% point of χ²
// with as many degrees of freedom as ratios (≈ k + 2.33√(2k) + 2,
// Wilson–Hilferty, rounded up; common practice).
func checkRatios(t *testing.T, name string, got, errs, want []float64) {
	t.Helper()
	chi2 := 0.0
	for i := range got {
		p := (got[i] - want[i]) / errs[i]
		chi2 += p * p
		if math.Abs(p) > 4 {
			t.Errorf("%s n=%d→%d: ln ratio %.5f ± %.5f, exact %.5f (pull %.1f)", name, 2*i, 2*i+2, got[i], errs[i], want[i], p)
		}
	}
	dof := float64(len(got))
	if chi2 > dof+2.33*math.Sqrt(2*dof)+2 {
		t.Errorf("%s: χ² = %.1f for %v ratios", name, chi2, dof)
	}
	t.Logf("%s: χ² = %.1f / %v", name, chi2, dof)
}

// Without the winding-line moves the chain cannot change the winding
// parities at n = 0 (plaquettes, monomer, pair and segment moves preserve
// them there; on the ring the n = 0 sector is the empty and the full loop
// only), so ⟨A⟩₀ and with it D(2)/D(0) come out wrong: the test fails
// when the moves are removed, in 2D for either axis alone.
func TestWindingMovesNeeded(t *testing.T) {
	for _, c := range []struct {
		d, l int
		beta float64
		drop [][]int
	}{{1, 8, 1.0, [][]int{{0}}}, {2, 3, 0.6, [][]int{{0}, {1}, {0, 1}}}} {
		lt, _ := NewLattice(c.d, c.l)
		var rho exact.RhoFunc
		if c.d == 1 {
			rho = exact.RingRho(8, c.beta)
		} else {
			cc, _ := exact.Enumerate(mustLat(t, 2, 3))
			rho = cc.Rho(c.beta)
		}
		want := exactRatios(t, rho, lt.N)[0]
		with, e1 := sectorRatios(t, lt, c.beta, 20000, 5, nil)
		if p := (with[0] - want) / e1[0]; math.Abs(p) > 4 {
			t.Errorf("d=%d: with windings, ln D(2)/D(0) pull %.1f", c.d, p)
		}
		for _, drop := range c.drop {
			without, e2 := sectorRatios(t, lt, c.beta, 80000, 5, drop)
			p := (without[0] - want) / math.Max(e2[0], 1e-9)
			if math.Abs(p) < 5 {
				t.Errorf("d=%d: without the windings along %v the ratio is still right (pull %.1f): the test cannot see the moves", c.d, drop, p)
			}
			t.Logf("d=%d, no windings along %v: pull %.1f", c.d, drop, p)
		}
	}
}

// The two-sector chain {n−2, n} gives D(n)/D(n−2) = x̄/(1−x̄) from the
// fraction of time x̄ in the upper sector; checked against the exact D
// (Krawtchouk transform of exact counts) on 3×3 and an 8-ring, with the
// Γ-method error of the projected series (U. Wolff, Comput. Phys. Commun.
// 156, 143 (2004)): every pull within 4σ, χ² below the 99% point.
func TestTwoSectorChain(t *testing.T) {
	c33, _ := exact.Enumerate(mustLat(t, 2, 3))
	for _, c := range []struct {
		name string
		d, l int
		beta float64
		rho  exact.RhoFunc
	}{{"3x3", 2, 3, 0.3, c33.Rho(0.3)}, {"ring8", 1, 8, 0.7, exact.RingRho(8, 0.7)}} {
		lt, _ := NewLattice(c.d, c.l)
		got, errs := twoSectorRatios(t, lt, func(n int) ([]float64, error) {
			return Chain{Lat: lt, Beta: c.beta, Monomers: n, Therm: 500, Sweeps: 20000, Seed: uint64(n), TwoSector: true}.Run()
		})
		checkRatios(t, c.name, got, errs, exactRatios(t, c.rho, lt.N))
	}
	if _, err := (Chain{Lat: mustLatLinks(t, 1, 8), Beta: 0.3, Monomers: 0, Sweeps: 10, TwoSector: true}).Run(); err == nil {
		t.Error("a two-sector chain below n = 2 was accepted")
	}
}

// twoSectorRatios runs one two-sector chain per upper sector n (run
// returns the per-sweep fraction of time in n) and returns ln[D(n)/D(n−2)]
// = ln x̄ − ln(1−x̄) with the Γ-method error of the projected series.
func twoSectorRatios(t *testing.T, lt *Lattice, run func(n int) ([]float64, error)) (lnr, errs []float64) {
	t.Helper()
	for n := 2; n <= lt.N; n += 2 {
		data, err := run(n)
		if err != nil {
			t.Fatal(err)
		}
		g := analysis.Gamma([][]float64{data}, analysis.DefaultS)
		x := g.Mean
		lnr = append(lnr, math.Log(x/(1-x)))
		errs = append(errs, g.Err*(1/x+1/(1-x)))
	}
	return lnr, errs
}

func mustLatLinks(t *testing.T, d, l int) *Lattice {
	t.Helper()
	x, err := NewLattice(d, l)
	if err != nil {
		t.Fatal(err)
	}
	return x
}

func mustLat(t *testing.T, d, l int) *lattice.Lattice {
	t.Helper()
	x, err := lattice.New(d, l)
	if err != nil {
		t.Fatal(err)
	}
	return x
}

// BenchmarkChain reports ns per attempted move (bond, plaquette, winding,
// pair and segment proposals of a sweep, measurement included) of the
// fixed-n link chain in d = 1, 2, 3.
func BenchmarkChain(b *testing.B) {
	for _, c := range []struct{ d, l, n int }{{1, 4096, 64}, {2, 64, 64}, {3, 16, 64}} {
		b.Run(fmt.Sprintf("d%d_L%d", c.d, c.l), func(b *testing.B) {
			lt, err := NewLattice(c.d, c.l)
			if err != nil {
				b.Fatal(err)
			}
			moves := lt.Proposals()
			const sweeps = 20
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				if _, err := (Chain{Lat: lt, Beta: 0.3, Monomers: c.n, Sweeps: sweeps, Seed: uint64(i)}).Run(); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*sweeps*moves), "ns/move")
		})
	}
}

// laneRatios is sectorRatios for the 64-lane chain (lane-averaged A and B
// per sweep).
func laneRatios(t *testing.T, lt *Lattice, beta float64, sweeps int, seed uint64) (lnr, errs []float64) {
	t.Helper()
	return ratiosOf(t, lt, sweeps, func(n int) ([]float64, error) {
		return Chain{Lat: lt, Beta: beta, Monomers: n, Therm: 200, Sweeps: sweeps, Seed: seed + uint64(n)}.RunLanes()
	})
}

// The 64-lane link chain against the exact D (Krawtchouk transform of
// exact counts; the ring's link transfer matrix for 32 and 64 sites):
// χ² below the 99% point and no pull beyond 4σ.
func TestLaneChainAgainstExact(t *testing.T) {
	c33, _ := exact.Enumerate(mustLat(t, 2, 3))
	c44, _ := exact.TorusCounts(4)
	c333, _ := exact.Enumerate(mustLat(t, 3, 3))
	cases := []struct {
		name string
		d, l int
		beta float64
		rho  exact.RhoFunc
	}{
		{"ring8", 1, 8, 0.5, exact.RingRho(8, 0.5)},
		{"ring32", 1, 32, 0.2, nil},
		{"ring64", 1, 64, 1.0, nil},
		{"3x3", 2, 3, 0.3, c33.Rho(0.3)},
		{"4x4", 2, 4, 0.3, c44.Rho(0.3)},
		{"3x3x3", 3, 3, 0.2, c333.Rho(0.2)},
	}
	for _, c := range cases {
		lt, _ := NewLattice(c.d, c.l)
		got, errs := laneRatios(t, lt, c.beta, 2000, 23)
		checkRatios(t, c.name, got, errs, wantRatios(t, lt, c.beta, c.rho))
	}
}

// BenchmarkLaneChain reports ns per attempted lane-move (the proposals of
// a sweep times 64 lanes, measurement included) of the 64-lane link chain.
func BenchmarkLaneChain(b *testing.B) {
	for _, c := range []struct{ d, l, n int }{{1, 4096, 64}, {2, 64, 64}, {3, 16, 64}} {
		b.Run(fmt.Sprintf("d%d_L%d", c.d, c.l), func(b *testing.B) {
			lt, err := NewLattice(c.d, c.l)
			if err != nil {
				b.Fatal(err)
			}
			const sweeps = 100
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				if _, err := (Chain{Lat: lt, Beta: 0.3, Monomers: c.n, Sweeps: sweeps, Seed: uint64(i)}).RunLanes(); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*sweeps*lt.Proposals()*Lanes), "ns/lane-move")
		})
	}
}

// The link lanes are independent chains apart from the shared choice of
// the proposals: the variance of the lane-averaged A is compared with the
// mean per-lane variance / 64 (4×4 at β = 0.3, n = 4, errors of the mean
// by the Γ-method, autocorrelation included); lanes copying each other
// would give up to 64. The test fails above 1.5 or below 0.67.
func TestLinkLanesIndependent(t *testing.T) {
	lt, _ := NewLattice(2, 4)
	const beta = 0.3
	tt := math.Tanh(beta)
	perLane := make([][]float64, Lanes)
	var avg []float64
	_, err := Chain{Lat: lt, Beta: beta, Monomers: 4, Therm: 200, Sweeps: 4000, Seed: 9}.runLanes(func(k, odd []uint64) {
		var a [Lanes]float64
		for b, e := range lt.Ends {
			ee := ^odd[e[0]] &^ odd[e[1]]
			for l := 0; l < Lanes; l++ {
				if ee>>l&1 == 0 {
					continue
				}
				if k[b]>>l&1 != 0 {
					a[l] += 1 / tt
				} else {
					a[l] += tt
				}
			}
		}
		mean := 0.0
		for l := range a {
			perLane[l] = append(perLane[l], a[l])
			mean += a[l] / Lanes
		}
		avg = append(avg, mean)
	})
	if err != nil {
		t.Fatal(err)
	}
	varOf := func(x []float64) float64 {
		g := analysis.Gamma([][]float64{x}, analysis.DefaultS)
		return g.Err * g.Err
	}
	mean := 0.0
	for _, x := range perLane {
		mean += varOf(x) / Lanes
	}
	ratio := varOf(avg) / (mean / Lanes)
	t.Logf("var(lane average) / (mean per-lane var / 64) = %.3f", ratio)
	if ratio > 1.5 || ratio < 0.67 {
		t.Errorf("lane average variance ratio %.3f: lanes are not independent", ratio)
	}
}

// The 64-lane two-sector chain against the exact D, as TestTwoSectorChain
// (Krawtchouk transform of exact counts on 3×3, 4×4 and an 8-ring; Γ-method
// errors, U. Wolff, Comput. Phys. Commun. 156, 143 (2004)).
func TestTwoSectorLanes(t *testing.T) {
	c33, _ := exact.Enumerate(mustLat(t, 2, 3))
	c44, _ := exact.TorusCounts(4)
	for _, c := range []struct {
		name string
		d, l int
		beta float64
		rho  exact.RhoFunc
	}{{"3x3", 2, 3, 0.3, c33.Rho(0.3)}, {"ring8", 1, 8, 0.7, exact.RingRho(8, 0.7)}, {"4x4", 2, 4, 0.4, c44.Rho(0.4)}} {
		lt, _ := NewLattice(c.d, c.l)
		got, errs := twoSectorRatios(t, lt, func(n int) ([]float64, error) {
			return Chain{Lat: lt, Beta: c.beta, Monomers: n, Therm: 200, Sweeps: 2000, Seed: uint64(n), TwoSector: true}.RunLanes()
		})
		checkRatios(t, c.name, got, errs, exactRatios(t, c.rho, lt.N))
	}
}
