package sampler

import (
	"fmt"
	"math"
	"math/bits"
	"sort"
	"testing"
	"time"

	"strata/stages/analysis"
	"strata/stages/exact"
)

// Every lane keeps its magnetization, and the block counts count every
// (site, lane, sweep) once.
func TestSectorLanesInvariants(t *testing.T) {
	for _, c := range []struct{ d, l, m int }{{1, 2, 0}, {1, 9, 3}, {2, 4, -6}, {3, 3, 1}, {2, 4, 16}} {
		lat := mustLat(t, c.d, c.l)
		nu := (lat.N + c.m) / 2
		ch := Chain{Lat: lat, Beta: 0.4, M: c.m, Therm: 3, Sweeps: 32, Seed: 5}
		_, err := sectorLanes(ch, 8, func(s []uint64) {
			for l := 0; l < Lanes; l++ {
				up := 0
				for _, w := range s {
					up += int(w >> l & 1)
				}
				if up != nu {
					t.Fatalf("d=%d L=%d M=%d: lane %d has %d up spins, want %d", c.d, c.l, c.m, l, up, nu)
				}
			}
		})
		if err != nil {
			t.Fatal(err)
		}
		out, _ := SectorLanes(ch, 8)
		w := HistWidth(c.d)
		for b := 0; b < 4; b++ {
			up, dn := 0, 0
			for k := 0; k < w; k++ {
				up += int(out[b*2*w+k])
				dn += int(out[b*2*w+w+k])
			}
			if up != nu*Lanes*8 || dn != (lat.N-nu)*Lanes*8 {
				t.Fatalf("d=%d L=%d M=%d block %d: %d up and %d down counts", c.d, c.l, c.m, b, up, dn)
			}
		}
	}
	if _, err := SectorLanes(Chain{Lat: mustLat(t, 1, 8), M: 0, Sweeps: 20}, 8); err == nil {
		t.Error("a partial block was accepted")
	}
}

// lanesRatios estimates ln r(M) = ln ρ(M)/ρ(M−2) for M = N, N−2, … > 0 from
// the 64-lane chains, each from the insertion identity read from above,
// −ln⟨A⟩_M with A = Σ_{up} e^{−2βh}/((N−M+2)/2) (see package ratio), per
// block, with the Γ-method error of the block series.
func lanesRatios(t *testing.T, d, l int, beta float64, sweeps, block int, seed uint64) (ms []int, lnr, errs []float64) {
	t.Helper()
	lat := mustLat(t, d, l)
	n, w := lat.N, HistWidth(d)
	for m := n; m > 0; m -= 2 {
		out, err := SectorLanes(Chain{Lat: lat, Beta: beta, M: m, Therm: 200, Sweeps: sweeps, Seed: seed + uint64(m+n)}, block)
		if err != nil {
			t.Fatal(err)
		}
		blocks := sweeps / block
		a := make([]float64, blocks)
		for b := range a {
			for k := 0; k < w; k++ {
				a[b] += float64(out[b*2*w+k]) * math.Exp(-2*beta*float64(2*k-2*d))
			}
			a[b] /= float64((n-m+2)/2) * Lanes * float64(block)
		}
		g := analysis.Gamma([][]float64{a}, analysis.DefaultS)
		ms = append(ms, m)
		lnr = append(lnr, -math.Log(g.Mean))
		errs = append(errs, g.Err/g.Mean)
	}
	return ms, lnr, errs
}

// The lane-averaged ratios against exact densities: the ring's closed
// form (R. J. Baxter, Exactly Solved Models, ch. 2, via the domain count),
// 4×4 and 6×6 integer counts (transfer matrix, checked against P. D. Beale,
// Phys. Rev. Lett. 76, 78 (1996)), 3³ by enumeration. χ² of the pulls below
// the 99% point, no pull beyond 4σ.
func TestSectorLanesAgainstExact(t *testing.T) {
	c4, _ := exact.TorusCounts(4)
	c6, _ := exact.TorusCounts(6)
	c3, _ := exact.Enumerate(mustLat(t, 3, 3))
	cases := []struct {
		name  string
		d, l  int
		beta  float64
		lnRho []float64
	}{
		{"ring12", 1, 12, 0.5, exact.RingLnRho(12, 0.5)},
		{"4x4", 2, 4, 0.4, c4.LnRho(0.4)},
		{"6x6", 2, 6, 0.3, c6.LnRho(0.3)},
		{"3x3x3", 3, 3, 0.2, c3.LnRho(0.2)},
	}
	for _, c := range cases {
		ms, lnr, errs := lanesRatios(t, c.d, c.l, c.beta, 4000, 16, 17)
		n := len(c.lnRho) - 1
		chi2, dof := 0.0, 0
		for i, m := range ms {
			k := (m + n) / 2
			want := c.lnRho[k] - c.lnRho[k-1]
			if errs[i] == 0 {
				if math.Abs(lnr[i]-want) > 1e-12 {
					t.Errorf("%s M=%d: exact sector gives %.15g, want %.15g", c.name, m, lnr[i], want)
				}
				continue
			}
			p := (lnr[i] - want) / errs[i]
			chi2 += p * p
			dof++
			if math.Abs(p) > 4 {
				t.Errorf("%s M=%d: ln r %.6f ± %.6f, exact %.6f (pull %.1f)", c.name, m, lnr[i], errs[i], want, p)
			}
		}
		k := float64(dof)
		// 99% point of χ² ≈ k + 2.33√(2k) + 2 (Wilson–Hilferty, rounded up; common practice)
		if chi2 > k+2.33*math.Sqrt(2*k)+2 {
			t.Errorf("%s: χ² = %.1f for %d ratios", c.name, chi2, dof)
		}
		t.Logf("%s: χ² = %.1f / %d", c.name, chi2, dof)
	}
}

// The lanes are independent chains apart from the shared choice of the
// site pair: the variance of the lane-averaged A (per sweep) is compared
// with the mean per-lane variance / 64. Measured ratio (6×6, β = 0.3,
// M = 0): about 1; lanes copying each other would give up to 64. The test
// fails above 1.5 (or below 0.67).
func TestLanesIndependent(t *testing.T) {
	lat := mustLat(t, 2, 6)
	const beta, m, sweeps = 0.3, 0, 4000
	n, z := lat.N, lat.Z
	wts := make([]float64, z+1)
	for k := range wts {
		wts[k] = math.Exp(-2 * beta * float64(2*k-z))
	}
	perLane := make([][]float64, Lanes)
	var avg []float64
	ls := &laneState{lat: lat}
	_, err := sectorLanes(Chain{Lat: lat, Beta: beta, M: m, Therm: 200, Sweeps: sweeps, Seed: 3}, 16, func(s []uint64) {
		ls.s = s
		var a [Lanes]float64
		for i, si := range s {
			c0, c1, c2 := ls.upCount(i)
			for k := 0; k <= z; k++ {
				x := si & oneHot(k, c0, c1, c2)
				for x != 0 {
					a[bits.TrailingZeros64(x)] += wts[k]
					x &= x - 1
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
	_ = n
	varOf := func(x []float64) float64 {
		g := analysis.Gamma([][]float64{x}, analysis.DefaultS)
		return g.Err * g.Err // variance of the mean, autocorrelation included
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

// BenchmarkSectorLanes reports ns per lane-update (a sweep is N proposals
// in each of the 64 lanes), the block measurement included.
func BenchmarkSectorLanes(b *testing.B) {
	for _, c := range []struct{ d, l int }{{1, 4096}, {2, 32}, {2, 64}, {3, 16}} {
		b.Run(fmt.Sprintf("d%d_L%d", c.d, c.l), func(b *testing.B) {
			lat := mustLat(b, c.d, c.l)
			const sweeps = 64
			ch := Chain{Lat: lat, Beta: 0.3, M: lat.N / 4 * 2, Sweeps: sweeps, Seed: 3}
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				ch.Seed++
				if _, err := SectorLanes(ch, 16); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*sweeps*lat.N*Lanes), "ns/lane-update")
		})
	}
}

// The 64-lane two-sector chains against exact densities (ring closed form
// via the domain count, R. J. Baxter, Exactly Solved Models, ch. 2; 4×4
// integer counts, P. D. Beale, Phys. Rev. Lett. 76, 78 (1996); 3³ by
// enumeration): ln r = ln x̄/(1−x̄) with the Γ-method error of the block
// series; χ² below the 99% point, no pull beyond 4σ.
func TestPairLanesAgainstExact(t *testing.T) {
	c4, _ := exact.TorusCounts(4)
	c3, _ := exact.Enumerate(mustLat(t, 3, 3))
	for _, c := range []struct {
		name  string
		d, l  int
		beta  float64
		lnRho []float64
	}{
		{"ring12", 1, 12, 0.5, exact.RingLnRho(12, 0.5)},
		{"4x4", 2, 4, 0.4, c4.LnRho(0.4)},
		{"3x3x3", 3, 3, 0.2, c3.LnRho(0.2)},
	} {
		lat := mustLat(t, c.d, c.l)
		n := lat.N
		const sweeps, block = 4000, 16
		chi2, dof := 0.0, 0
		for m := n; m > 1; m -= 2 {
			out, err := PairLanes(Chain{Lat: lat, Beta: c.beta, M: m, Therm: 200, Sweeps: sweeps, Seed: uint64(31 + m + n)}, block)
			if err != nil {
				t.Fatal(err)
			}
			x := make([]float64, len(out)/2)
			for i := range x {
				x[i] = float64(out[2*i]) / float64(out[2*i+1])
			}
			g := analysis.Gamma([][]float64{x}, analysis.DefaultS)
			got := math.Log(g.Mean / (1 - g.Mean))
			e := g.Err * (1/g.Mean + 1/(1-g.Mean))
			k := (m + n) / 2
			want := c.lnRho[k] - c.lnRho[k-1]
			p := (got - want) / e
			chi2 += p * p
			dof++
			if math.Abs(p) > 4 {
				t.Errorf("%s M=%d: ln r %.6f ± %.6f, exact %.6f (pull %.1f)", c.name, m, got, e, want, p)
			}
		}
		k := float64(dof)
		if chi2 > k+2.33*math.Sqrt(2*k)+2 {
			t.Errorf("%s: χ² = %.1f for %d ratios", c.name, chi2, dof)
		}
		t.Logf("%s: χ² = %.1f / %d", c.name, chi2, dof)
	}
}

// BenchmarkPairLanes reports ns per lane-update of the two-sector chains.
func BenchmarkPairLanes(b *testing.B) {
	for _, c := range []struct{ d, l int }{{1, 4096}, {2, 64}, {3, 16}} {
		b.Run(fmt.Sprintf("d%d_L%d", c.d, c.l), func(b *testing.B) {
			lat := mustLat(b, c.d, c.l)
			const sweeps = 64
			ch := Chain{Lat: lat, Beta: 0.3, M: lat.N / 4 * 2, Sweeps: sweeps, Seed: 3}
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				ch.Seed++
				if _, err := PairLanes(ch, 16); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*sweeps*lat.N*Lanes), "ns/lane-update")
		})
	}
}

// BenchmarkLaneEfficiency compares, per sector of 2D 16² (β = 0.3 above
// T_c and 0.6 below), the efficiency 1/(σ²_rel·t) of the insertion
// measurement A = Σ_{up} e^{−2βh} of the 64-lane chain (block means of 16
// sweeps) with the scalar chain's (per sweep), t the CPU time of each run,
// σ from the Γ-method. It reports the smallest and the median ratio over
// the sectors (lanes/scalar) and logs each sector's with -v: a ratio
// below 1 would mark a sector where the scalar chain wins.
func BenchmarkLaneEfficiency(b *testing.B) {
	lat := mustLat(b, 2, 16)
	n, d, w := lat.N, 2, HistWidth(2)
	for _, beta := range []float64{0.3, 0.6} {
		b.Run(fmt.Sprintf("beta%v", beta), func(b *testing.B) {
			aOf := func(hist []float64) float64 {
				a := 0.0
				for k := 0; k < w; k++ {
					a += hist[k] * math.Exp(-2*beta*float64(2*k-2*d))
				}
				return a
			}
			relVar := func(x []float64) float64 {
				g := analysis.Gamma([][]float64{x}, analysis.DefaultS)
				return g.Err * g.Err / (g.Mean * g.Mean)
			}
			for it := 0; it < b.N; it++ {
				var ratios []float64
				for _, m := range []int{252, 246, 230, 200, 160, 100, 0} {
					const scalarSweeps, laneSweeps = 20000, 2048
					t0 := time.Now()
					h, _ := Sector(Chain{Lat: lat, Beta: beta, M: m, Therm: 100, Sweeps: scalarSweeps, Seed: uint64(it + 1)})
					ts := time.Since(t0).Seconds()
					a := make([]float64, scalarSweeps)
					for s := range a {
						a[s] = aOf(h[s*2*w : (s+1)*2*w])
					}
					t0 = time.Now()
					raw, _ := SectorLanes(Chain{Lat: lat, Beta: beta, M: m, Therm: 100, Sweeps: laneSweeps, Seed: uint64(it + 1)}, 16)
					tl := time.Since(t0).Seconds()
					al := make([]float64, laneSweeps/16)
					x := make([]float64, 2*w)
					for blk := range al {
						for k := range x {
							x[k] = float64(raw[blk*2*w+k]) / (Lanes * 16)
						}
						al[blk] = aOf(x)
					}
					r := (relVar(a) * ts) / (relVar(al) * tl)
					b.Logf("β=%v M=%d (minority fraction %.3f): efficiency lanes/scalar %.2f", beta, m, float64((n-m)/2)/float64(n), r)
					ratios = append(ratios, r)
				}
				sort.Float64s(ratios)
				b.ReportMetric(ratios[0], "min-lanes/scalar")
				b.ReportMetric(ratios[len(ratios)/2], "median-lanes/scalar")
			}
		})
	}
}
